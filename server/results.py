"""The one place the server calls the engine for results: rule report, receiver metrics, waveforms, curve.

check_plan solves the bus once and returns what it simulated (the primary driver's edge responses, its bit
pattern and every receiver's metrics); the page draws the one or two receivers it shows from those, without
solving again. Everything returned is plain data for `server.views`; nothing here knows about HTTP or templates.
"""

from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.check import PlanReport, check_plan, report_to_dict
from pairline.engine.findings import Finding, Verdict
from pairline.engine.metrics import ReceiverMetrics
from pairline.engine.network import NetworkReport, check_network
from pairline.engine.plan import BusPlan
from pairline.engine.rules.length_rate import (
    LENGTH_RATE_PRODUCT_M_BPS,
    LOSS_SOURCE,
    RATE_SOURCE,
    loss_limit_length_m,
)
from pairline.engine.sweep import LengthRateCurve, length_rate_curve
from pairline.engine.waveform import Waveforms, probe_waveforms, simulate_pattern

__all__ = [
    "CheckedNetwork",
    "CheckedPlan",
    "PlanReport",
    "check_and_simulate",
    "check_network_and_simulate",
    "check_only",
    "quick_check",
    "report_to_dict",
    "worst_receiver",
]


@dataclass(frozen=True, slots=True)
class CheckedPlan:
    report: PlanReport
    metrics: tuple[ReceiverMetrics, ...]  # every receiver, plan order
    waveforms: Waveforms | None  # only the receivers drawn: the worst, then the chosen one
    probes: Waveforms | None  # what a scope shows at the plan's own probes (plan.probes); None when it names none
    curve: LengthRateCurve  # simulated: the longest trunk per bit rate for this cable and driver
    rule_bit_rate_bps: np.ndarray  # (n_points,) the report's two length rules, for comparison
    rule_max_length_m: np.ndarray  # (n_points,)
    simulation_note: str  # why waveforms are missing, when they are


def check_only(plan: BusPlan) -> PlanReport:
    """The report alone (for the bill of materials and the advised plan), without drawing waveforms or the curve."""
    return check_plan(plan)


def quick_check(plan: BusPlan) -> PlanReport:
    """The report for a verdict while typing: the advised plan is not simulated again (engine.check.check_plan)."""
    return check_plan(plan, simulate_advice=False)


SIGNAL_RULE = "signal.integrity"  # the finding that judges each receiver's simulated signal


def worst_receiver(
    metrics: tuple[ReceiverMetrics, ...], findings: "tuple[Finding, ...] | list[Finding]" = ()
) -> ReceiverMetrics | None:
    """The receiver whose signal-integrity finding is worst (breaks, then tight, then holds); among equal
    verdicts the smallest sampled voltage on the driven side, then the smaller eye. A receiver without that
    finding counts as holding."""
    verdicts = {f.node: f.verdict for f in findings if f.rule_id == SIGNAL_RULE and f.node}
    return min(
        metrics,
        key=lambda m: (-verdicts.get(m.receiver, Verdict.HOLDS).rank, m.min_sample_v, m.eye_height_v),
        default=None,
    )


def check_and_simulate(plan: BusPlan, chosen_receiver: str | None = None) -> CheckedPlan:
    """Run every rule (which simulates the plan once), draw the shown receivers from that simulation, and sweep
    length against rate."""
    return pictured(check_plan(plan), chosen_receiver)


@dataclass(frozen=True, slots=True)
class CheckedNetwork:
    report: NetworkReport
    parts: tuple[CheckedPlan, ...]  # each part's report with its pictures, in the report's order


def check_network_and_simulate(plan: BusPlan, chosen_receiver: str | None = None) -> CheckedNetwork:
    """Every part of a plan of several checked (engine.network) and pictured as a bus of its own; the chosen
    receiver is drawn in the part it belongs to."""
    report = check_network(plan)
    return CheckedNetwork(report, tuple(pictured(p.report, chosen_receiver) for p in report.parts))


def pictured(report: PlanReport, chosen_receiver: str | None = None) -> CheckedPlan:
    """A checked bus with what its page draws: the worst receiver's waveforms (and the chosen one's), the plan's
    probes and the length-against-rate curve, from the simulation the check ran."""
    plan = report.plan
    bus: Bus = report.bus
    sim = report.simulation
    metrics = sim.metrics
    worst = worst_receiver(metrics, report.findings)
    shown = [] if worst is None else [worst.receiver]
    if chosen_receiver and chosen_receiver not in shown and any(m.receiver == chosen_receiver for m in metrics):
        shown.append(chosen_receiver)
    waveforms = simulate_pattern(bus, sim.bits, receiver_names=tuple(shown), step=sim.step) if shown else None
    rule_rates_bps, rule_lengths_m = length_rate_limit(bus)
    return CheckedPlan(
        report=report,
        metrics=metrics,
        waveforms=waveforms,
        probes=probe_waveforms(bus, pattern=sim.bits) if plan.probes else None,
        curve=length_rate_curve(bus),
        rule_bit_rate_bps=rule_rates_bps,
        rule_max_length_m=rule_lengths_m,
        simulation_note="" if shown else "this bus has no receiver to simulate",
    )


CURVE_RATES_BPS = np.logspace(3.0, 8.0, 61)  # 1 kbit/s to 100 Mbit/s, 12 points per decade
CURVE_CRITERIA = {
    "eye": "Simulated: the longest trunk at each bit rate whose worst-case eye at the far receiver still opens "
    "beyond ±200 mV (this driver and cable, every receiver's load lumped at the far end)",
    "tia422": "Simulated: the longest trunk at each bit rate meeting the TIA/EIA-422-B Annex A rise-time and loss "
    "criteria",
}
RULE_CRITERION = (
    "Rules the report applies: length × rate ≤ 1e8 m·bit/s; below 90 kbit/s the TIA/EIA-422-B Annex A 1200 m plateau, "
    "above it cable loss at f = bit rate ≤ 9 dB"
)
RULE_SOURCE = f"{RATE_SOURCE}; {LOSS_SOURCE}"


def length_rate_limit(bus: Bus) -> tuple[np.ndarray, np.ndarray]:
    """The length-versus-rate limit of this cable, from the rules behind findings "length.rate_rule" and
    "length.loss": L_max(rate) = min(1e8 / rate, the loss rule's longest path at that rate)."""
    loss_m = np.array([loss_limit_length_m(bus, float(f)) for f in CURVE_RATES_BPS])  # (n_points,)
    lengths_m = np.minimum(LENGTH_RATE_PRODUCT_M_BPS / CURVE_RATES_BPS, loss_m)
    return CURVE_RATES_BPS.copy(), lengths_m
