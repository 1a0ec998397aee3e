"""Signal integrity from the simulated waveforms: a verdict per receiver, fixes found by re-simulating, and
whether the simulation confirms or overrides the rules of thumb for stubs and for leaving a line unterminated.

Rule "signal.integrity": one finding per receiver (plan order). The waveforms are the bit pattern of the plan
(or the default PRBS) driven by the primary driver; on an RS-485 bus with transceiver nodes every node that
may drive is simulated (up to 33; on larger buses a sample of 12 holding the usual worst cases, see
drivers_to_simulate) and each receiver gets its worst case, naming the driver. A waveform breaks by the
criteria of engine.fixes.judge_metrics (threshold +/-200 mV, TIA-485-A / TIA-422-B receiver sensitivity). The
tight band is that of every rule (engine.rules.margins): BREAKS when the waveform breaks with nominal parts,
TIGHT when it holds with nominal parts but breaks at the receiver's worst tolerance corner (engine.tolerance:
the primary driver's pattern with the cable, resistors, driver edge and receiver loads at the ends of their
published tolerances), HOLDS when even that corner holds.

Rule "signal.confirms": the rules of thumb judge the layout without a waveform; the simulation settles it.
- "stub.length": the stubs the rule flags (TIGHT or BREAKS) are set to zero in one more simulation; the
  finding per flagged node compares the node's own waveform with and without those stubs (ringback,
  re-crossings, eye). The simulation confirms the rule when removing the stubs turns a failing receiver into
  a passing one, or when the rule passes and the simulation passes; it overrides it otherwise.
- "termination.may_omit": the bus is simulated without its terminators (or as laid out, if it has none) and
  the worst receiver's verdict is set against the rule's deciding criterion (three round trips settle
  before mid-bit).
A stub confirms finding carries the simulation's verdict for the bus as built, so an overridden BREAKS shows up
as HOLDS here, with the rule's own finding still beside it. The termination confirms finding carries the
simulated verdict only when the bus has no terminators; with terminators fitted its what-if is advice (HOLDS).
"""

import dataclasses
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus, build_bus, talker_groups, with_plan
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.fixes import ComputedFix, SignalJudgement, compute_fixes, judge_bus, level_breaks
from pairline.engine.metrics import ReceiverMetrics, SampledLevels
from pairline.engine.rules.cable_ends import end_name, required_ends_m, terminator_value_ohm
from pairline.engine.rules.margins import band_verdict
from pairline.engine.rules.signal_model import left_out_finding, model_finding, tolerance_finding
from pairline.engine.rules.stubs import check_stubs
from pairline.engine.rules.unterminated import line_may_stay_unterminated
from pairline.engine.tolerance import ReceiverTolerance, ToleranceReport, analyse_tolerances
from pairline.engine.units import length_text, si_format
from pairline.engine.waveform import StepResponses, default_pattern, pattern_duration_s, step_responses

MAX_STUB_CONFIRMS = 8  # flagged stubs reported one by one; the rest summarised
MAX_WATCHED = 8  # receivers judged in a second (what-if) simulation on large buses
MAX_DRIVERS_ALL = 33  # every possible driver is simulated up to this many (32 transceivers + the driver)
MAX_DRIVERS_SAMPLED = 12  # beyond, a sample of this many (drivers_to_simulate)
PROBE_DRIVER_VALUES = 2048  # drivers x receivers whose edge responses are solved and held at once
_WHAT_IF_LEFT_OUT = (
    "Not simulated: the quick check (a verdict while typing) leaves out the bus simulated with its terminators "
    "removed, a what-if that never moves the verdict of a bus that has them; the full check (a saved plan's page) "
    "simulates it."
)
_SOURCE = (
    "Simulated waveforms (reflection simulation of the whole bus); receiver threshold ±200 mV from TIA/EIA-485-A "
    "and TIA/EIA-422-B; tolerance band from the parts' published tolerances (signal.tolerance)"
)
_CRITERION = (
    "BREAKS: with nominal parts, a bit not beyond ±200 mV somewhere in its sampling window, a fall back through "
    "the threshold after an edge, inner eye < 0.4 V, or not settled by the sampling instant. TIGHT: none of these "
    "with nominal parts, but one of them at the receiver's worst tolerance corner."
)


def drivers_to_simulate(bus: Bus) -> list[str]:
    """Every node that may drive, up to MAX_DRIVERS_ALL; beyond that a sample of MAX_DRIVERS_SAMPLED that holds
    the usual worst cases: the primary driver, the transceivers nearest each cable end, those on the longest
    stubs, and the rest spread evenly along the trunk."""
    if bus.plan.standard != "rs485":
        return [bus.plan.driver.name]
    drivers = bus.drivers_possible
    if len(drivers) <= MAX_DRIVERS_ALL:
        return drivers
    nodes = [n for n in bus.plan.nodes if n.may_drive]
    by_position = sorted(nodes, key=lambda n: n.position_m)
    picked = [bus.plan.driver.name, by_position[0].name, by_position[-1].name]
    picked += [n.name for n in sorted(nodes, key=lambda n: -n.stub_length_m)[:3]]
    spread = np.linspace(0, len(by_position) - 1, MAX_DRIVERS_SAMPLED).round().astype(int)
    picked += [by_position[i].name for i in spread]
    return list(dict.fromkeys(picked))[:MAX_DRIVERS_SAMPLED]


@dataclass(frozen=True, slots=True)
class Simulation:
    """What the signal rule simulated, kept so that nothing downstream solves it again: the primary driver's edge
    responses at every receiver, its bit pattern and each receiver's metrics; each receiver's worst judgement over
    the drivers simulated, with the driver; and the fixes found by re-simulating."""

    driver_name: str  # the primary driver
    bits: str  # the pattern the primary driver sent
    step: StepResponses  # the primary driver's edge responses at every receiver
    metrics: tuple[ReceiverMetrics, ...]  # every receiver, plan order, from the primary driver
    worst: tuple[tuple[SignalJudgement, str], ...]  # every receiver, plan order: its worst judgement and driver
    fixes: tuple[ComputedFix, ...]  # re-simulated fixes for receivers the primary driver breaks
    tolerance: ToleranceReport | None  # the primary driver's pattern over the tolerances (None: not analysed)

    def judgement(self, receiver: str) -> tuple[SignalJudgement, str]:
        return next(item for item in self.worst if item[0].receiver == receiver)


def simulate_bus(bus: Bus, *, tolerance: bool = True) -> Simulation:
    """Simulate every node that may drive (drivers_to_simulate), judge each receiver by its worst case, find
    re-simulated fixes for the receivers the primary driver breaks, and (tolerance) run the primary driver's
    pattern over the component tolerances (with_tolerance)."""
    drivers = drivers_to_simulate(bus)  # the primary driver first
    primary = bus.plan.driver.name
    duration_s = pattern_duration_s(bus, bus.plan.test_pattern)
    per_group = max(1, PROBE_DRIVER_VALUES // len(bus.plan.nodes))  # drivers whose edges are solved together
    out: dict[str, tuple[SignalJudgement, str]] = {}
    from_primary: dict[str, SignalJudgement] = {}
    # Talkers of one device share a simulation; each group drives with its own device's output and edge. The
    # primary driver's group comes first, the primary first in it, so its pattern is known before the others.
    for view, names in talker_groups(bus, drivers):
        for g0 in range(0, len(names), per_group):
            steps = step_responses(view, names[g0 : g0 + per_group], max_time_s=duration_s)
            for name in steps.driver_names:
                step = steps.for_driver(name)
                if name == primary:
                    primary_step = step
                    bits = bus.plan.test_pattern or default_pattern(step, 1.0 / bus.plan.bit_rate_bps)
                judged = judge_bus(view, driver_name=name, step=step, pattern=bits if name == primary else None)
                if name == primary:
                    from_primary = judged
                for rx, j in judged.items():
                    if rx == name:  # a node does not listen to itself: its own receiver is not judged while it drives
                        continue
                    old = out.get(rx)
                    if old is None or _severity(j) > _severity(old[0]):
                        out[rx] = (j, name)
    failing = [rx for rx, (j, d) in out.items() if j.verdict is Verdict.BREAKS and d == primary]
    metrics = tuple(from_primary[n.name].metrics for n in bus.plan.nodes)
    return Simulation(
        driver_name=primary,
        bits=bits,
        step=primary_step,
        metrics=metrics,
        worst=tuple(out[n.name] for n in bus.plan.nodes),
        fixes=tuple(compute_fixes(bus, failing)) if failing else (),
        tolerance=analyse_tolerances(bus, pattern=bits, nominal=(primary_step, metrics)) if tolerance else None,
    )


def with_tolerance(bus: Bus, sim: Simulation) -> Simulation:
    """The simulation with its tolerance analysis (engine.tolerance), from the edge responses it holds."""
    if sim.tolerance is not None:
        return sim
    report = analyse_tolerances(bus, pattern=sim.bits, nominal=(sim.step, sim.metrics))
    return dataclasses.replace(sim, tolerance=report)


def _severity(j: SignalJudgement) -> tuple[int, float]:
    return (j.verdict.rank, -j.metrics.eye_height_v)


def fix_text(fixes: "tuple[ComputedFix, ...] | list[ComputedFix]") -> str:
    """Each computed fix makes every failing receiver pass on re-simulation, wherever the change is made: a long
    stub on one node can be what breaks its neighbours."""
    if not fixes:
        return ""
    return "Re-simulated fixes (any one): " + "; ".join(f.sentence for f in fixes) + "."


def termination_step(bus: Bus) -> str:
    """The terminator change that would widen a margin, worded for what the plan already has at the ends."""
    ends = required_ends_m(bus)
    value = terminator_value_ohm(bus, ends[0])
    where = " and ".join(end_name(bus, e) for e in ends)
    terms = bus.plan.terminations
    if not terms:
        return f"fit {value:g} Ω terminators at {where}"
    if any(t.kind == "rc" for t in terms):
        return f"replace the RC terminators with plain {value:g} Ω resistors at {where}"
    return f"set the terminators at {where} to {value:g} Ω"


def headline(j: SignalJudgement) -> tuple[str, float, float, str, str]:
    """The quantity that decided the verdict: (name, value, limit, unit, limit_kind); the limit is a minimum
    except for false edges (a maximum of none)."""
    m = j.metrics
    th = m.threshold_v
    if m.threshold_recrossings > 0:
        return "false edges after an edge", float(m.threshold_recrossings), 0.0, "edges", "max"
    if m.sample_errors > 0:
        return "lowest sampled level", m.min_sample_v, th, "V", "min"
    if m.eye_height_v < 2.0 * th:
        return "inner eye height", m.eye_height_v, 2.0 * th, "V", "min"
    if m.settle_margin_s < 0.0:
        return "settled before the sampling instant by", m.settle_margin_s, 0.0, "s", "min"
    return "lowest sampled level", m.min_sample_v, th, "V", "min"


def check_signal_integrity(bus: Bus, simulation: Simulation | None = None, *, what_if: bool = True) -> list[Finding]:
    """Rules "signal.integrity" (one finding per receiver: BREAKS when its nominal waveform breaks for some driver,
    TIGHT when only its worst tolerance corner does), "signal.model" and "signal.tolerance" (what was assumed),
    and "signal.confirms" (stubs, termination); simulation: what simulate_bus(bus) returned, when the caller has
    it already. what_if=False leaves out the simulation of a terminated bus without its terminators
    (confirm_termination_rule), which never moves the verdict."""
    sim = simulation if simulation is not None else simulate_bus(bus)
    primary = bus.plan.driver.name
    findings = []
    fixes_by_node: dict[str, str] = {}
    corners = sim.tolerance.receivers if sim.tolerance is not None else (None,) * len(sim.worst)
    at_the_ends = termination_step(bus)
    for node, (j, driver), corner in zip(bus.plan.nodes, sim.worst, corners, strict=True):
        verdict, reasons = banded(j, corner)
        tight_corner = corner if corner is not None and verdict is Verdict.TIGHT else None
        m = j.metrics
        driven_by = "" if driver == primary else f" (worst case: '{driver}' driving)"
        detail = (
            f"Driver '{driver}', {si_format(1.0 / m.bit_time_s, 'bit/s')}: settled level ±{m.amplitude_v:.2f} V, "
            f"peak {m.peak_v:.2f} V, overshoot {m.overshoot_v:.2f} V, ringback {m.undershoot_v:.2f} V, "
            f"{m.threshold_recrossings} threshold re-crossing(s), lowest level over the sampling window "
            f"{m.min_sample_v:.2f} V (margin {m.margin_v:+.2f} V), eye {m.eye_height_v:.2f} V "
            f"(from the 0s' -V to the 1s' +V) × {m.eye_width_ui:.0%} of a bit at ±{m.threshold_v * 1e3:.0f} mV, "
            f"delay {si_format(m.propagation_delay_s, 's')} (0 V crossings), jitter {m.jitter_ui:.0%} of a bit. "
            + _corner_text(corner)
        )
        if reasons:
            detail = "; ".join(reasons) + ". " + detail
        steps = []
        if node.stub_length_m > 0.0:
            steps.append(f"shorten its {length_text(node.stub_length_m)} stub")
        steps.append(at_the_ends)
        fix = ""
        if tight_corner is not None:
            fix = (
                f"'{node.name}' passes with nominal parts but breaks at its worst tolerance corner "
                f"({tight_corner.worst_corner}); {tight_corner.dominant} moves its margin most "
                f"({tight_corner.dominant_shift_v:+.2f} V). Narrow the range of the {tight_corner.dominant} (parts "
                "specified closer), or widen the margin: "
                + ", ".join(steps)
                + f", or lower the bit rate below {si_format(1.0 / m.bit_time_s, 'bit/s')}; then re-check."
            )
        elif j.verdict is Verdict.BREAKS:
            fix = fix_text(sim.fixes) if driver == primary else ""
            if not fix:
                fix = (
                    f"No single change found by re-simulation for '{node.name}'{driven_by}: "
                    + " and ".join(steps)
                    + ", and lower the bit rate together, then re-check."
                )
        fixes_by_node[node.name] = fix
        quantity, value, limit, unit, limit_kind = (
            corner_headline(tight_corner.worst) if tight_corner is not None else headline(j)
        )
        where = " at the worst tolerance corner" if tight_corner is not None else driven_by
        findings.append(
            Finding(
                rule_id="signal.integrity",
                title=f"Simulated waveform: {quantity}{where}",
                verdict=verdict,
                value=value,
                limit=limit,
                unit=unit,
                limit_kind=limit_kind,
                node=node.name,
                criterion=_CRITERION,
                source=_SOURCE,
                fix=fix,
                detail=detail,
            )
        )
    findings.append(model_finding(bus))
    findings.append(tolerance_finding(sim.tolerance, bus.driver.rise_time_s))
    from_primary = {j.receiver: j for j, d in sim.worst if d == primary} or None
    findings += confirm_stub_rule(bus, from_primary, fixes_by_node)
    findings.append(confirm_termination_rule(bus, from_primary, simulate=what_if))
    return findings


def banded(j: SignalJudgement, corner: ReceiverTolerance | None) -> tuple[Verdict, tuple[str, ...]]:
    """The receiver's verdict in the tolerance band (engine.rules.margins.band_verdict) and its reasons: BREAKS as
    judged with nominal parts; TIGHT when only its worst tolerance corner breaks (the corner's reasons); else
    HOLDS. Without a corner (tolerances not analysed) the nominal judgement."""
    if corner is None:
        return j.verdict, j.reasons
    at_corner = level_breaks(corner.worst)
    verdict = band_verdict(j.verdict is not Verdict.BREAKS, not at_corner)
    if verdict is not Verdict.TIGHT:
        return verdict, j.reasons
    return verdict, tuple(f"at the worst tolerance corner ({corner.worst_corner}) {r}" for r in at_corner)


def corner_headline(levels: SampledLevels) -> tuple[str, float, float, str, str]:
    """headline() of a tolerance corner: its lowest sampled level, or its eye when that is what breaks."""
    th = levels.threshold_v
    if levels.sample_errors == 0 and levels.eye_height_v < 2.0 * th:
        return "inner eye height", levels.eye_height_v, 2.0 * th, "V", "min"
    return "lowest sampled level", levels.min_sample_v, th, "V", "min"


def _corner_text(t: ReceiverTolerance | None) -> str:
    if t is None:
        return "Tolerance corners not analysed (signal.tolerance)."
    w = t.worst
    text = (
        f"Worst tolerance corner ({t.worst_corner}): margin {w.margin_v:+.2f} V, eye {w.eye_height_v:.2f} V; "
        f"dominant tolerance: {t.dominant} ({t.dominant_shift_v:+.2f} V)."
    )
    if t.p1_margin_v is not None and t.p1_eye_height_v is not None:
        text += f" Monte Carlo 1st percentile: margin {t.p1_margin_v:+.2f} V, eye {t.p1_eye_height_v:.2f} V."
    return text


def confirm_stub_rule(
    bus: Bus, judged: dict[str, SignalJudgement] | None = None, fixes_by_node: dict[str, str] | None = None
) -> list[Finding]:
    """Rule "signal.confirms" for "stub.length": each flagged stub's node with and without the flagged stubs.
    fixes_by_node: the fix sentence of each receiver's signal.integrity finding, which a confirmation repeats."""
    stub_findings = {f.node: f for f in check_stubs(bus) if f.node is not None}
    flagged = [n for n, f in stub_findings.items() if f.verdict is not Verdict.HOLDS]
    if judged is None or any(n.name not in judged for n in bus.plan.nodes if n.name in flagged):
        judged = judge_bus(bus)
    if not flagged:
        worst_rx = max(judged.values(), key=_severity)
        sim = worst_rx.verdict
        agree = sim is not Verdict.BREAKS
        return [
            Finding(
                rule_id="signal.confirms",
                title=f"Stub rule {'confirmed' if agree else 'overridden'} by simulation",
                verdict=sim,
                value=worst_rx.metrics.undershoot_v,
                limit=None,
                unit="V",
                limit_kind="none",
                node=None,
                criterion="The stub rule passes every stub; the simulation judges every receiver.",
                source=_SOURCE,
                fix="" if sim is Verdict.HOLDS else _receiver_fix(bus, worst_rx, fixes_by_node),
                detail=(
                    f"simulation: worst receiver '{worst_rx.receiver}' {sim.value} with ringback "
                    f"{worst_rx.metrics.undershoot_v:.2f} V and {worst_rx.metrics.threshold_recrossings} re-crossing(s)"
                    + (" -> confirms the stub rule's HOLDS." if agree else " -> overrides the stub rule's HOLDS.")
                ),
            )
        ]
    plan = bus.plan
    nodes = [n.model_copy(update={"stub_length_m": 0.0}) if n.name in flagged else n for n in plan.nodes]
    driver = plan.driver
    if driver.name in flagged:
        driver = driver.model_copy(update={"stub_length_m": 0.0})
    bare = judge_bus(build_bus(plan.model_copy(update={"nodes": nodes, "driver": driver}), bus.layout))
    out = []
    # Receivers whose verdict improves once the flagged stubs are gone: the stubs' reflections harm them, wherever
    # they sit (a long drop rings on the trunk and can break a neighbour while its own node reads cleanly).
    harmed = [rx for rx, j in bare.items() if rx in judged and judged[rx].verdict.rank > j.verdict.rank]
    harm_text = (
        "without the flagged stubs "
        + ", ".join(f"'{rx}' {judged[rx].verdict.value} -> {bare[rx].verdict.value}" for rx in harmed[:6])
        if harmed
        else "removing the flagged stubs changes no receiver's verdict"
    )
    rate = si_format(bus.plan.bit_rate_bps, "bit/s")
    receivers = [n for n in flagged if n in judged]
    for name in receivers[:MAX_STUB_CONFIRMS]:
        rule = stub_findings[name]
        own = judged[name]
        m = own.metrics
        as_built = worst([own.verdict] + [judged[rx].verdict for rx in harmed])
        agree = bool(harmed) or own.verdict is not Verdict.HOLDS
        if agree:
            verdict_text = f"confirms the stub rule's {rule.verdict.value.upper()}."
        else:
            verdict_text = (
                f"disagrees with the stub rule's {rule.verdict.value.upper()}: every receiver passes with this stub "
                f"at {rate}. The rule's verdict is kept, as the published design limit; the simulation says this "
                f"layout works at this bit rate and edge, so a later rate increase needs a re-check."
            )
        out.append(
            Finding(
                rule_id="signal.confirms",
                title=f"Stub rule {'confirmed' if agree else 'not confirmed'} by simulation",
                verdict=as_built,
                value=float(len(harmed)),
                limit=0.0,
                unit="receivers harmed",
                node=name,
                criterion="Flagged stubs set to zero in a second simulation; every receiver's verdict compared.",
                source=_SOURCE,
                fix="" if as_built is Verdict.HOLDS else rule.fix,
                detail=(
                    f"simulation: at '{name}' ({rule.value:.3g} m stub) ringback {m.undershoot_v:.2f} V, "
                    f"{m.threshold_recrossings} re-crossing(s) ({own.verdict.value}); {harm_text} -> {verdict_text}"
                ),
            )
        )
    rest = receivers[MAX_STUB_CONFIRMS:] + [n for n in flagged if n not in judged]
    if rest:
        sim = worst([judged[n].verdict for n in rest if n in judged])
        out.append(
            Finding(
                rule_id="signal.confirms",
                title=f"Stub rule at {len(rest)} more flagged stub(s)",
                verdict=sim,
                value=None,
                limit=None,
                unit="",
                limit_kind="none",
                node=None,
                criterion="Flagged stubs set to zero in a second simulation; waveforms compared.",
                source=_SOURCE,
                fix="" if sim is Verdict.HOLDS else "Shorten these stubs as their stub.length findings say.",
                detail=f"simulation: worst verdict {sim.value} at " + ", ".join(f"'{n}'" for n in rest[:20]) + ".",
            )
        )
    return out


def _receiver_fix(bus: Bus, j: SignalJudgement, fixes_by_node: dict[str, str] | None) -> str:
    """The fix a confirmation repeats: the receiver's own signal.integrity fix when there is one."""
    own = (fixes_by_node or {}).get(j.receiver, "")
    if own:
        return f"As for '{j.receiver}' under signal.integrity: {own}"
    return f"At '{j.receiver}': {termination_step(bus)}, or lower the bit rate, then re-check."


def _watch_list(bus: Bus, judged: dict[str, SignalJudgement] | None) -> list[str] | None:
    """Receivers to judge in a second simulation: the worst few of the first and the two farthest from the
    driver (ends of the line, where reflections pile up). None (all) on small buses."""
    if judged is None or len(judged) <= MAX_WATCHED:
        return None
    by_severity = sorted(judged.values(), key=_severity, reverse=True)
    watch = [j.receiver for j in by_severity[: MAX_WATCHED - 2]]
    x0 = bus.plan.driver.position_m
    far = sorted(bus.plan.nodes, key=lambda n: abs(n.position_m - x0) + n.stub_length_m, reverse=True)
    for n in far:
        if len(watch) >= MAX_WATCHED:
            break
        if n.name not in watch:
            watch.append(n.name)
    return watch


def confirm_termination_rule(
    bus: Bus, judged: dict[str, SignalJudgement] | None = None, *, simulate: bool = True
) -> Finding:
    """Rule "signal.confirms" for "termination.may_omit": the bus simulated without terminators.

    judged: the primary driver's judgements of the bus as laid out; on a bus of more than MAX_WATCHED
    receivers the second simulation judges only the worst of those and the farthest two. With terminators fitted
    that simulation is a what-if and the finding holds whatever it shows; simulate=False (the quick check) then
    leaves it out and says so.
    """
    plan = bus.plan
    may_omit = line_may_stay_unterminated(bus)
    if plan.terminations and not simulate:
        return left_out_finding(
            "signal.confirms",
            "Unterminated-line rule: what-if not simulated in the quick check",
            _WHAT_IF_LEFT_OUT,
            _SOURCE,
            f" The rule says the line {'may stay unterminated' if may_omit else 'needs terminators'}.",
        )
    if not plan.terminations:
        judged = judged if judged is not None else judge_bus(bus)
    else:
        judged = judge_bus(
            with_plan(bus, plan.model_copy(update={"terminations": []})), receivers=_watch_list(bus, judged)
        )
    worst_rx = max(judged.values(), key=_severity)
    sim = worst_rx.verdict
    m = worst_rx.metrics
    sim_ok = sim is not Verdict.BREAKS
    agree = sim_ok == may_omit
    rule_says = "may stay unterminated" if may_omit else "needs terminators"
    how = "as laid out (no terminators)" if not plan.terminations else "with its terminators removed"
    # With terminators fitted the simulation above is a what-if: it tells whether they are needed, it does not
    # judge the bus as built (rule "signal.integrity" does that). Without terminators it is the bus as built.
    verdict = sim if not plan.terminations else Verdict.HOLDS
    fix = ""
    if verdict is not Verdict.HOLDS:
        ends = " and ".join(f"{end_m:g} m" for end_m in required_ends_m(bus))
        value = terminator_value_ohm(bus, required_ends_m(bus)[0])
        fix = f"Fit {value:g} Ω terminators at the cable ends ({ends}), or lower the bit rate, then re-check."
    return Finding(
        rule_id="signal.confirms",
        title=f"Unterminated-line rule {'confirmed' if agree else 'not confirmed'} by simulation",
        verdict=verdict,
        value=headline(worst_rx)[1],
        limit=headline(worst_rx)[2],
        unit=headline(worst_rx)[3],
        limit_kind=headline(worst_rx)[4],
        node=None,
        criterion="The bus simulated without terminators; worst receiver against the rule's deciding criterion.",
        source=_SOURCE,
        fix=fix,
        detail=(
            f"simulation {how}: worst receiver '{worst_rx.receiver}' {sim.value} (eye {m.eye_height_v:.2f} V, "
            f"ringback {m.undershoot_v:.2f} V, {m.threshold_recrossings} re-crossing(s)"
            + (f"; {'; '.join(worst_rx.reasons)}" if worst_rx.reasons else "")
            + f") -> {'confirms' if agree else 'disagrees with'} the rule (three round trips before mid-bit): "
            f"the rule says the line {rule_says}"
            + ("." if agree else "; the rule's verdict is kept as the published criterion.")
        ),
    )
