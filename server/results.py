"""The one place the server calls the engine for results: rule report, receiver metrics, waveforms, curve.

One edge response of the primary driver is solved per view and shared: the metrics of every receiver and the
pattern waveforms of the one or two receivers the page draws both come from it. Everything returned is plain
data for `server.views`; nothing here knows about HTTP or templates.
"""

from dataclasses import dataclass

import numpy as np
from engine.sweep import length_rate_curve

from engine.bus import Bus
from engine.check import PlanReport, check_plan, report_to_dict
from engine.metrics import ReceiverMetrics, receiver_metrics
from engine.plan import BusPlan
from engine.waveform import Waveforms, prbs_bits, simulate_pattern, step_responses

__all__ = ["CheckedPlan", "PlanReport", "check_and_simulate", "check_only", "report_to_dict", "worst_receiver"]


@dataclass(frozen=True, slots=True)
class CheckedPlan:
    report: PlanReport
    metrics: tuple[ReceiverMetrics, ...]  # every receiver, plan order
    waveforms: Waveforms | None  # only the receivers drawn: the worst, then the chosen one
    curve_bit_rate_bps: np.ndarray  # (n_points,)
    curve_max_length_m: np.ndarray  # (n_points,)
    simulation_note: str  # why waveforms are missing, when they are


def check_only(plan: BusPlan) -> PlanReport:
    """The rule report alone (for the bill of materials), without simulating."""
    return check_plan(plan)


def worst_receiver(metrics: tuple[ReceiverMetrics, ...]) -> ReceiverMetrics | None:
    """The receiver whose smallest sampled voltage (on the driven side) is lowest; ties go to the smaller eye."""
    return min(metrics, key=lambda m: (m.min_sample_v, m.eye_height_v), default=None)


def check_and_simulate(plan: BusPlan, chosen_receiver: str | None = None) -> CheckedPlan:
    """Run every rule, simulate the plan's bit pattern from the primary driver, and sweep length against rate."""
    report = check_plan(plan)
    bus: Bus = report.bus
    bits = plan.test_pattern or prbs_bits()
    step = step_responses(bus, (plan.driver.name,), max_time_s=len(bits) / plan.bit_rate_bps)
    metrics = receiver_metrics(bus, pattern=bits, step=step)
    worst = worst_receiver(metrics)
    shown = [] if worst is None else [worst.receiver]
    if chosen_receiver and chosen_receiver not in shown and any(m.receiver == chosen_receiver for m in metrics):
        shown.append(chosen_receiver)
    waveforms = simulate_pattern(bus, bits, receiver_names=tuple(shown), step=step) if shown else None
    curve = length_rate_curve(bus)
    return CheckedPlan(
        report=report,
        metrics=metrics,
        waveforms=waveforms,
        curve_bit_rate_bps=np.asarray(curve.bit_rate_bps, dtype=float),
        curve_max_length_m=np.asarray(curve.max_length_m, dtype=float),
        simulation_note="" if shown else "this bus has no receiver to simulate",
    )
