"""What the signal simulation assumed, stated in the report: rule "signal.model" (the receiver, cable and driver
models, the sampling window, the delay's definition and the accuracy) and rule "signal.tolerance" (the ranges
the worst case was taken over, each with its source, and which tolerance dominates). Both inform, never fail.
"""

from collections import Counter

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.line import REFERENCE_FREQUENCY_HZ, rlgc_per_m
from pairline.engine.metrics import DELAY_DEFINITION, plan_window
from pairline.engine.tolerance import ToleranceReport
from pairline.engine.transient import ACCURACY, edge_duration_s
from pairline.engine.units import si_format

_MODEL_SOURCE = (
    "Engine model (engine/solve.py, engine/line.py, engine/transient.py); accuracy checked against ngspice "
    "transients of the same buses"
)
_TOLERANCE_SOURCE = "Library classes' tolerances (engine/library.py), each with its own source, or the plan's"
_NOT_ANALYSED = (
    "Not analysed in this quick check: another finding is already tight or breaks, and a tolerance corner can only "
    "make a holding receiver tight, so the verdict is the full check's; the full check lists each receiver's corner."
)


def model_text(bus: Bus) -> str:
    """The receiver, cable and driver models the simulation used, in sentences."""
    cable, driver, plan = bus.cable, bus.driver, bus.plan
    rlgc = rlgc_per_m(cable, [REFERENCE_FREQUENCY_HZ])
    skin = (
        f"skin effect on (loop R grows as the root of frequency above {si_format(cable.skin_effect_onset_hz, 'Hz')})"
        if cable.skin_effect_onset_hz is not None
        else "skin effect off (constant R)"
    )
    dielectric = (
        f"dielectric loss tangent {cable.dielectric_loss_tangent:g} (constant-phase, causal)"
        if cable.dielectric_loss_tangent > 0
        else "no dielectric loss"
    )
    devices = [bus.devices[n.name] for n in plan.nodes]
    inputs = Counter((d.unit_loads, d.differential_input_ohm, d.input_capacitance_f) for d in devices)
    receivers = ", ".join(
        f"{count} x {si_format(r, 'Ω')} ∥ {si_format(c, 'F') if c else '0 F'} ({ul:g} UL)"
        for (ul, r, c), count in sorted(inputs.items())
    )
    window = plan_window(bus)
    start, end = window.centre_ui - window.half_width_ui, window.centre_ui + window.half_width_ui
    return (
        f"Cable '{cable.label}': Z0 {cable.z0_ohm:g} Ω, velocity factor {cable.velocity_factor:g}; per metre of the "
        f"pair at 1 MHz R {rlgc.r_ohm_per_m[0]:.3g} Ω (loop), L {rlgc.l_h_per_m[0] * 1e9:.3g} nH, "
        f"G {rlgc.g_siemens_per_m[0] * 1e6:.3g} µS, C {rlgc.c_f_per_m[0] * 1e12:.3g} pF; {skin}; {dielectric}. "
        f"Receivers: input resistance 24 kΩ per unit load across the pair (12 kΩ per line, TIA-485-A) in parallel "
        f"with the device's input capacitance, at the end of its stub: {receivers}. Driver '{driver.label}': "
        f"{driver.open_circuit_v:g} V open circuit behind {driver.source_ohm:g} Ω, linear ramp of "
        f"{si_format(driver.rise_time_s, 's')} 10-90 % ({si_format(edge_duration_s(driver.rise_time_s), 's')} "
        "0-100 %). Terminators as planned (RC ones as R in "
        f"series with C); each bias network as its pull-up plus pull-down across the pair. Sampling window: "
        f"{start:.3g} to {end:.3g} of each bit after the receiver's start edge (UART mid-bit at "
        f"{window.centre_ui:.3g}). Delay: {DELAY_DEFINITION}. Waveforms within {ACCURACY:.1%} of each probe's "
        f"swing at any instant."
    )


def model_finding(bus: Bus) -> Finding:
    """Rule "signal.model": what the simulation assumed."""
    return Finding(
        rule_id="signal.model",
        title="Simulation model",
        verdict=Verdict.HOLDS,
        value=None,
        limit=None,
        unit="",
        limit_kind="none",
        node=None,
        criterion="States the receiver, cable and driver models, the sampling window and the delay's definition.",
        source=_MODEL_SOURCE,
        detail=model_text(bus),
    )


def left_out_finding(rule_id: str, title: str, why: str, source: str, detail: str = "") -> Finding:
    """A finding for an analysis the quick check leaves out because it cannot move the verdict: it holds, has no
    value, and says why (`why`, then `detail`)."""
    return Finding(
        rule_id=rule_id,
        title=title,
        verdict=Verdict.HOLDS,
        value=None,
        limit=None,
        unit="V",
        limit_kind="none",
        node=None,
        criterion=why,
        source=source,
        detail=why + detail,
    )


def tolerance_finding(report: ToleranceReport | None, rise_time_s: float) -> Finding:
    """Rule "signal.tolerance": the ranges of the worst case and the tolerance that dominates; or, when the
    tolerances were not analysed (engine.ruleset.run_rules, quick), that they were not."""
    if report is None:
        return left_out_finding(
            "signal.tolerance", "Worst case over component tolerances", _NOT_ANALYSED, _TOLERANCE_SOURCE
        )
    ranges = []
    for r in report.ranges:
        if r.key == "rise_time":
            span = f"{si_format(r.low * rise_time_s, 's')} to {si_format(r.high * rise_time_s, 's')}"
        elif r.key in ("input_capacitance", "unit_loads"):
            span = f"{r.low:.2g}x to {r.high:.2g}x"
        else:
            span = f"±{100.0 * (r.high - 1.0):.3g} %"
        ranges.append(f"{r.label} {span} ({r.source})")
    dominant = Counter(t.dominant for t in report.receivers if t.dominant_shift_v < 0.0)
    leader = dominant.most_common(1)
    monte_carlo = (
        f"Monte Carlo: {report.variants} variants, seed {report.seed}, each component drawn uniformly in its range"
        if report.variants
        else "Monte Carlo: not run (set tolerances.monte_carlo_variants)"
    )
    worst = min(report.receivers, key=lambda t: t.worst.margin_v, default=None)
    summary = (
        f" Lowest margin at a corner: '{worst.receiver}' {worst.worst.margin_v:.3g} V ({worst.worst_corner})."
        if worst is not None
        else ""
    )
    return Finding(
        rule_id="signal.tolerance",
        title="Worst case over component tolerances",
        verdict=Verdict.HOLDS,
        value=float(np.min([t.worst.margin_v for t in report.receivers])) if report.receivers else None,
        limit=None,
        unit="V",
        limit_kind="none",
        node=None,
        criterion=(
            "Corners: each tolerance alone at either end, then every receiver's own worst corner; the "
            "signal.integrity verdicts use each receiver's worst corner."
        ),
        source=_TOLERANCE_SOURCE,
        detail=(
            "Ranges: "
            + "; ".join(ranges)
            + f". Corners simulated: {report.corners}. {monte_carlo}. "
            + (
                f"Dominant tolerance: {leader[0][0]} (at {leader[0][1]} of {len(report.receivers)} receivers)."
                if leader
                else "No tolerance lowers any receiver's margin."
            )
            + summary
        ),
    )
