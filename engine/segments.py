"""A plan's parts, each a stand-alone bus: every segment of a plan joined by repeaters, or both pairs of a
four-wire plan. Each part is a plan of one bus (engine.plan.topology: what a version-2 plan is), so every rule
checks it exactly as it would check that bus laid out alone.

Segments. The master's segment is the plan's own trunk with one node more for every repeater whose upstream port
sits on it: the port is a receiver of the repeater's device that, on RS-485, also drives (it repeats the replies
from further out back toward the master). A further segment is driven by its repeater's downstream port: the
part's driver is the repeater (its device, its downstream position and stub), its nodes are the segment's own
and the upstream ports of the repeaters it feeds in turn. Each port stands on its own side's ground: the
upstream port on the repeater's ground, the downstream port on the repeater's ground too, or on its own when the
repeater is isolated (its device is; the barrier lies between the ports). A part's driver is its ground
reference (0 V), so every node's ground offset, stated against the master's ground, is restated against the
part's driver. A probe of a node goes to that node's part; trunk and driver-pin probes read the master's segment.

Four-wire pairs. The transmit pair is the plan's layout with the master driving and every slave a receiver, on
the plan's terminators and bias, under the plan's standard: on RS-422 the master's driver is always on (one
terminator at the far end, no bias: an RS-422-style multidrop), on RS-485 it may go idle between messages and
the pair is held to RS-485's rules (both ends terminated, bias unless every receiver is failsafe). The return
pair carries the replies: every slave that may drive is a talker, the master's receiver listens, on the return
pair's own terminators and bias, as an RS-485 bus whatever the plan's standard (several drivers take turns on it,
which RS-422 does not provide for). Its primary talker, the part's ground reference, is the replying slave
farthest from the master. Slaves that never reply have no
driver on the return pair and leave it out; the master's receiver stands for its unit loads there.
"""

from dataclasses import dataclass

from pairline.engine.devices import resolve_device
from pairline.engine.plan import BusPlan, DeviceSpec, DriverSpec, NodeSpec, ProbeSpec, RepeaterSpec, SegmentSpec

MAX_TITLE_CHARS = 120


@dataclass(frozen=True, slots=True)
class PlanPart:
    """One stand-alone bus of a plan: a segment, a four-wire pair, or the whole plan when it is one bus."""

    kind: str  # "bus" (a plan of one bus), "segment", "transmit_pair" or "return_pair"
    name: str  # the segment's name, or "transmit" / "return"
    label: str  # "segment 'store'", "the transmit pair"
    plan: BusPlan  # the part as a plan of one bus
    feeder: str | None = None  # the repeater that drives a further segment
    ground_reference_v: float = 0.0  # the part's driver's ground against the master's
    hops: tuple[str, ...] = ()  # the repeaters between the master and the part's driver, master side first


def plan_parts(plan: BusPlan) -> tuple[PlanPart, ...]:
    """Every part of a plan (see the module docstring): segments in order outward from the master's, or the
    transmit pair then the return pair (none when no slave replies); a plan of one bus is its own only part."""
    if plan.four_wire is not None:
        return _pairs(plan)
    if not plan.segments:
        return (PlanPart("bus", plan.segment_name, f"segment '{plan.segment_name}'", plan),)
    return _segments(plan)


def _named(plan: BusPlan, part: str) -> str:
    title = f"{plan.title} ({part})" if plan.title else part[:1].upper() + part[1:]
    return title[:MAX_TITLE_CHARS]


def _probes(plan: BusPlan, node_names: set[str], master_side: bool) -> list[ProbeSpec]:
    return [p for p in plan.probes if (p.node in node_names if p.kind == "node" else master_side)]


def port_device(repeater: RepeaterSpec, default_device: str) -> DeviceSpec | None:
    """A repeater port's device: the repeater's, referenced to its own side's ground (not isolated within it)."""
    if not repeater_isolated(repeater, default_device):
        return repeater.device
    spec = repeater.device or DeviceSpec(class_key=default_device)
    return spec.model_copy(update={"isolated": False, "isolation_rating_vrms": None, "isolation_grade": None})


def repeater_isolated(repeater: RepeaterSpec, default_device: str) -> bool:
    """Whether a repeater's device is isolated: its barrier lies between its two ports."""
    return resolve_device(repeater.device, default_device).isolated


def downstream_ground_v(repeater: RepeaterSpec, default_device: str) -> float:
    """The ground of a repeater's downstream port against the master's: its own when isolated and stated, else the
    repeater's."""
    own = repeater.downstream_ground_offset_v
    isolated = repeater_isolated(repeater, default_device)
    return own if isolated and own is not None else repeater.ground_offset_v


def _upstream_ports(plan: BusPlan, segment: str, reference_v: float) -> list[NodeSpec]:
    """The upstream port of every repeater fed from `segment`, as a node of that segment's part."""
    return [
        NodeSpec(
            name=r.name,
            position_m=r.upstream_position_m,
            stub_length_m=r.upstream_stub_m,
            device=port_device(r, plan.default_device),
            may_drive=plan.standard == "rs485",
            ground_offset_v=r.ground_offset_v - reference_v,
        )
        for r in plan.repeaters
        if r.upstream_segment == segment
    ]


def _rebased(nodes: list[NodeSpec], reference_v: float) -> list[NodeSpec]:
    if reference_v == 0.0:
        return list(nodes)
    return [n.model_copy(update={"ground_offset_v": n.ground_offset_v - reference_v}) for n in nodes]


def _segments(plan: BusPlan) -> tuple[PlanPart, ...]:
    by_name = {s.name: s for s in plan.segments}
    empty: dict[str, object] = {"segments": [], "repeaters": [], "notes": "", "response_budget_s": None}
    main_nodes = [*plan.nodes, *_upstream_ports(plan, plan.segment_name, 0.0)]
    main = plan.model_copy(
        update=empty
        | {
            "title": _named(plan, f"segment {plan.segment_name}"),
            "nodes": main_nodes,
            "probes": _probes(plan, {n.name for n in plan.nodes}, True),
        }
    )
    parts = [PlanPart("segment", plan.segment_name, f"segment '{plan.segment_name}'", main)]
    queue: list[tuple[str, tuple[str, ...]]] = [(plan.segment_name, ())]
    while queue:
        upstream, hops = queue.pop(0)
        for rep in (r for r in plan.repeaters if r.upstream_segment == upstream):
            seg: SegmentSpec = by_name[rep.downstream_segment]
            reference_v = downstream_ground_v(rep, plan.default_device)
            driver = DriverSpec(
                name=rep.name,
                position_m=rep.downstream_position_m,
                stub_length_m=rep.downstream_stub_m,
                device=port_device(rep, plan.default_device),
            )
            part = plan.model_copy(
                update=empty
                | {
                    "title": _named(plan, f"segment {seg.name}"),
                    "trunk_length_m": seg.trunk_length_m,
                    "cable": seg.cable if seg.cable is not None else plan.cable,
                    "driver": driver,
                    "nodes": [*_rebased(seg.nodes, reference_v), *_upstream_ports(plan, seg.name, reference_v)],
                    "branches": list(seg.branches),
                    "terminations": list(seg.terminations),
                    "bias": list(seg.bias),
                    "grounding": seg.grounding,
                    "probes": _probes(plan, {n.name for n in seg.nodes}, False),
                }
            )
            parts.append(
                PlanPart("segment", seg.name, f"segment '{seg.name}'", part, rep.name, reference_v, (*hops, rep.name))
            )
            queue.append((seg.name, (*hops, rep.name)))
    return tuple(parts)


def _pairs(plan: BusPlan) -> tuple[PlanPart, ...]:
    assert plan.four_wire is not None  # the caller's branch
    quiet: dict[str, object] = {"four_wire": None, "notes": "", "response_budget_s": None}
    listeners = [n.model_copy(update={"may_drive": False, "drives_pair": None}) for n in plan.nodes]
    transmit = plan.model_copy(update=quiet | {"title": _named(plan, "transmit pair"), "nodes": listeners})
    parts = [PlanPart("transmit_pair", "transmit", "the transmit pair", transmit)]
    talkers = [n for n in plan.nodes if n.may_drive]
    if not talkers:
        return tuple(parts)
    master = plan.driver

    def reach_m(node: NodeSpec) -> float:
        return abs(node.position_m - master.position_m) + node.stub_length_m

    primary = max(talkers, key=reach_m)
    reference_v = primary.ground_offset_v
    master_rx = NodeSpec(
        name=master.name,
        position_m=master.position_m,
        stub_length_m=master.stub_length_m,
        device=master.device,
        ground_offset_v=-reference_v,
    )
    others = [n.model_copy(update={"drives_pair": None}) for n in talkers if n is not primary]
    back = plan.model_copy(
        update=quiet
        | {
            "title": _named(plan, "return pair"),
            "standard": "rs485",
            "driver": DriverSpec(
                name=primary.name,
                position_m=primary.position_m,
                stub_length_m=primary.stub_length_m,
                device=primary.device,
            ),
            "nodes": [master_rx, *_rebased(others, reference_v)],
            "terminations": list(plan.four_wire.return_terminations),
            "bias": list(plan.four_wire.return_bias),
            "probes": [],
        }
    )
    parts.append(PlanPart("return_pair", "return", "the return pair", back, None, reference_v))
    return tuple(parts)
