"""Rules over a whole plan of several parts (engine.segments): what no single segment or pair can see.

network.delay. A message from the master reaches a node after the cable's delay along the path (the master's
stub, the trunk to each repeater on the way, the repeater's ports and its own delay, the trunk and the node's
stub in the node's segment, each at its cable's speed, t = L / (VF c0)), and its reply comes back the same way:
the round trip is twice the one-way delay to the farthest node. The master's reply time-out must allow for it.
With a response budget in the plan (the longest round trip the protocol's timing allows) the round trip is
held against it: BREAKS beyond it, TIGHT when runs 10 % longer than drawn and the cable's velocity factor at
the low end of its tolerance would take it beyond (engine.rules.margins). Without a budget it is held against
one bit: a round trip inside a bit hides in any UART protocol's byte timing (common practice); beyond it the
finding is TIGHT and asks for the budget, as the protocol decides. Direction-sensing repeaters also hold their
direction for about one character after the last edge, so nobody may answer sooner (EDN Design Idea 1421,
"simple RS-485 repeater", 1994): stated in the finding.

network.ground_domain. Segments joined by a repeater that is not isolated share a ground: the repeater's. An
isolated repeater starts a ground domain of its own beyond its barrier. Each segment's finding names its domain
and the earths its nodes sit on (their offsets against the master's ground); whether those offsets fit each
receiver's common-mode range is the segment's own common-mode rule.

repeater.isolation. The difference an isolated repeater's barrier stands between its ports' grounds. Up to
30 Vrms basic insulation is the common practice for a data bus; above it the barrier stands between a hazardous
voltage and circuits people touch and must be reinforced (TI blog "Our isolators are certified. Are yours?",
2018; D. Lohbeck, EDN 2016), and past about 1 kV Pairline names fibre (engine.rules.common_mode).

pairs.return_idle. A four-wire plan whose slaves never reply leaves the return pair without a driver: stated.
"""

from collections.abc import Sequence

from pairline.engine.bus import on_trunk
from pairline.engine.devices import resolve_device
from pairline.engine.findings import Finding, Verdict
from pairline.engine.library import CABLES
from pairline.engine.plan import BusPlan, resolve_cable
from pairline.engine.rules.common_mode import HAZARDOUS_V, danger_text, isolation_advice
from pairline.engine.rules.margins import LENGTH_ALLOWANCE, band_verdict
from pairline.engine.segments import PlanPart, downstream_ground_v, repeater_isolated
from pairline.engine.units import propagation_velocity_m_per_s, si_format

DELAY_SOURCE = (
    "t = L / (VF c0) per cable run, plus each repeater's stated delay; round trip twice the one-way delay; held "
    "against the plan's response budget, else one bit (common practice); direction-sensing repeaters hold about "
    "one character after a message: EDN Design Idea 1421, 'simple RS-485 repeater' (1994)"
)
ISOLATION_SOURCE = (
    "basic insulation up to 30 Vrms, reinforced above: TI blog 'Our isolators are certified. Are yours?' (2018); "
    "D. Lohbeck, 'Understanding isolator standards', EDN (2016)"
)
FIBRE_V = 1000.0  # past about 1 kV between grounds Pairline names fibre (engine.rules.common_mode, from memory)
DEFAULT_VF_TOLERANCE = 0.05  # the library's default velocity-factor tolerance (engine.library.CableClass)


def _vf_tolerance(plan: BusPlan) -> float:
    if plan.tolerances.velocity_factor_tolerance is not None:
        return plan.tolerances.velocity_factor_tolerance
    cable = CABLES.get(plan.cable.class_key) if plan.cable.class_key else None
    return cable.velocity_factor_tolerance if cable else DEFAULT_VF_TOLERANCE


def arrival_times_s(plan: BusPlan, parts: Sequence[PlanPart]) -> dict[str, tuple[float, float]]:
    """When the master's edge reaches every node of every segment: name -> (nominal s, worst corner s). The corner
    takes runs 10 % longer than drawn and each cable's velocity factor at the low end of its tolerance."""
    at_driver: dict[str, tuple[float, float]] = {plan.driver.name: (0.0, 0.0)}
    out: dict[str, tuple[float, float]] = {}
    repeaters = {r.name: r for r in plan.repeaters}
    for part in parts:  # outward from the master: a part's driver is reached before its nodes
        p = part.plan
        speed = propagation_velocity_m_per_s(resolve_cable(p.cable).velocity_factor)
        slow = (1.0 + LENGTH_ALLOWANCE) / (1.0 - _vf_tolerance(p))
        t0, t0_corner = at_driver[p.driver.name]
        for node in on_trunk(p)[0].nodes:  # a branch's node: its run from the junction
            run_s = (p.driver.stub_length_m + abs(node.position_m - p.driver.position_m) + node.stub_length_m) / speed
            arrival = (t0 + run_s, t0_corner + run_s * slow)
            if node.name in repeaters:
                delay = repeaters[node.name].delay_s
                at_driver[node.name] = (arrival[0] + delay, arrival[1] + delay)
            else:
                out[node.name] = arrival
    return out


def check_delay(plan: BusPlan, parts: Sequence[PlanPart]) -> list[Finding]:
    """network.delay: the round trip from the master to the farthest node (module docstring)."""
    times = arrival_times_s(plan, parts)
    if not times:
        return []
    farthest = max(times, key=lambda name: times[name][0])
    one_way_s, corner_s = times[farthest]
    round_trip_s, corner_trip_s = 2.0 * one_way_s, 2.0 * corner_s
    part = next(p for p in parts if any(n.name == farthest for n in p.plan.nodes))
    hops = part.hops
    via = f" through {len(hops)} repeater(s) ({', '.join(hops)})" if hops else ""
    bit_s = 1.0 / plan.bit_rate_bps
    hold = (
        " Direction-sensing repeaters also hold their direction for about one character after a message, so no "
        "node may answer sooner."
        if hops
        else ""
    )
    detail = (
        f"One way {si_format(one_way_s, 's')} to '{farthest}' in {part.label}{via}; "
        f"{si_format(corner_trip_s, 's')} round trip with runs 10 % longer and the slowest velocity factor.{hold}"
    )
    if plan.response_budget_s is not None:
        limit_s = plan.response_budget_s
        verdict = band_verdict(round_trip_s <= limit_s, corner_trip_s <= limit_s)
        criterion = "round trip master -> farthest node -> master <= the plan's response budget"
        fix = (
            f"The round trip to '{farthest}' ({si_format(round_trip_s, 's')}) needs a response budget of at least "
            f"{si_format(corner_trip_s, 's')}: lengthen the master's reply time-out, shorten the path, or use fewer "
            "repeaters in series."
            if verdict is not Verdict.HOLDS
            else ""
        )
    else:
        limit_s = bit_s
        verdict = Verdict.HOLDS if corner_trip_s <= bit_s else Verdict.TIGHT
        criterion = "round trip master -> farthest node -> master within one bit (no response budget stated)"
        fix = (
            f"The round trip to '{farthest}' is {corner_trip_s / bit_s:.3g} bit(s) at the worst corner: make sure the "
            f"master's reply time-out allows {si_format(corner_trip_s, 's')} more than on a short bus, and state the "
            "protocol's response budget (response_budget_s) to have it checked."
            if verdict is not Verdict.HOLDS
            else ""
        )
    return [
        Finding(
            rule_id="network.delay",
            title="Round trip from the master to the farthest node",
            verdict=verdict,
            value=round_trip_s,
            limit=limit_s,
            unit="s",
            node=farthest,
            criterion=criterion,
            source=DELAY_SOURCE,
            fix=fix,
            detail=detail,
            figures=(("one_way_s", one_way_s), ("round_trip_corner_s", corner_trip_s), ("bit_s", bit_s)),
        )
    ]


def ground_domains(plan: BusPlan, parts: Sequence[PlanPart]) -> dict[str, int]:
    """Segment name -> its ground domain (1 = the master's): an isolated repeater starts a new one."""
    repeaters = {r.name: r for r in plan.repeaters}
    domain = {parts[0].name: 1}
    count = 1
    for part in parts[1:]:
        rep = repeaters[part.feeder] if part.feeder else None
        upstream = domain[rep.upstream_segment] if rep else 1
        if rep is not None and repeater_isolated(rep, plan.default_device):
            count += 1
            domain[part.name] = count
        else:
            domain[part.name] = upstream
    return domain


def check_ground_domains(plan: BusPlan, parts: Sequence[PlanPart]) -> list[Finding]:
    """network.ground_domain: each segment's ground domain and the earths its nodes sit on (module docstring)."""
    domain = ground_domains(plan, parts)
    own = {n.name for s in ([plan.nodes] + [s.nodes for s in plan.segments]) for n in s}
    out = []
    for part in parts:
        earths = sorted(
            {round(n.ground_offset_v + part.ground_reference_v, 6) for n in part.plan.nodes if n.name in own}
        )
        where = ", ".join(f"{v:g} V" for v in earths) or "no node of its own"
        behind = f", behind isolated repeater '{part.feeder}'" if part.feeder and domain[part.name] > 1 else ""
        shared = [p.label for p in parts if domain[p.name] == domain[part.name] and p is not part]
        out.append(
            Finding(
                rule_id="network.ground_domain",
                title=f"Ground domain of {part.label}",
                verdict=Verdict.HOLDS,
                value=float(domain[part.name]),
                limit=None,
                unit="",
                node=None,
                criterion="segments joined by a repeater without isolation share its ground; an isolated repeater "
                "starts a domain of its own",
                source="TI SLLA272 (The RS-485 Design Guide), grounding and isolation",
                detail=f"Ground domain {domain[part.name]}{behind}"
                + (f", shared with {', '.join(shared)}" if shared else "")
                + f"; its nodes' earths against the master's ground: {where}. Each receiver's common mode is checked "
                "in its segment.",
                limit_kind="none",
                figures=(("domain", float(domain[part.name])), ("earths", float(len(earths)))),
            )
        )
    return out


def check_repeater_isolation(plan: BusPlan) -> list[Finding]:
    """repeater.isolation: what each isolated repeater's barrier stands (module docstring)."""
    out = []
    for rep in plan.repeaters:
        if not repeater_isolated(rep, plan.default_device):
            continue
        grade = resolve_device(rep.device, plan.default_device).isolation_grade or "basic"
        across_v = abs(downstream_ground_v(rep, plan.default_device) - rep.ground_offset_v)
        limit_v = FIBRE_V if grade == "reinforced" else HAZARDOUS_V
        verdict = Verdict.HOLDS if across_v <= limit_v else Verdict.BREAKS
        fix = (
            danger_text(across_v)
            + f"Repeater '{rep.name}' stands {across_v:g} V between its ports' grounds with {grade} insulation: use "
            f"{isolation_advice(across_v)}."
            if verdict is Verdict.BREAKS
            else ""
        )
        out.append(
            Finding(
                rule_id="repeater.isolation",
                title=f"Isolation barrier of repeater '{rep.name}'",
                verdict=verdict,
                value=across_v,
                limit=limit_v,
                unit="V",
                node=rep.name,
                criterion=f"the difference between the ports' grounds <= {limit_v:g} V for {grade} insulation",
                source=ISOLATION_SOURCE,
                fix=fix,
                detail=f"Between {rep.upstream_segment!r} ({rep.ground_offset_v:g} V) and {rep.downstream_segment!r} "
                f"({downstream_ground_v(rep, plan.default_device):g} V) against the master's ground.",
            )
        )
    return out


def check_return_pair(plan: BusPlan, parts: Sequence[PlanPart]) -> list[Finding]:
    """pairs.return_idle: a four-wire plan whose slaves never reply has nothing on the return pair."""
    if plan.four_wire is None or any(p.kind == "return_pair" for p in parts):
        return []
    return [
        Finding(
            rule_id="pairs.return_idle",
            title="Return pair without a talker",
            verdict=Verdict.HOLDS,
            value=0.0,
            limit=None,
            unit="",
            node=None,
            criterion="a slave that may drive replies on the return pair",
            source="B&B Electronics RS-422/485 application note (four-wire multidrop)",
            detail="No slave may drive, so nothing replies on the return pair and it is not checked; mark the slaves "
            "that answer as may drive.",
            limit_kind="none",
        )
    ]


def check_topology(plan: BusPlan, parts: Sequence[PlanPart]) -> list[Finding]:
    """Every plan-level finding, in report order."""
    if plan.four_wire is not None:
        return check_return_pair(plan, parts)
    if not plan.segments:
        return []
    return [
        *check_delay(plan, parts),
        *check_ground_domains(plan, parts),
        *check_repeater_isolation(plan),
    ]
