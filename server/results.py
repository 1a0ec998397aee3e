"""The one place the server calls the engine for results: rule report, simulated waveforms, length-rate curve.

Everything returned is plain data for `server.views`; nothing here knows about HTTP or templates.
"""

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from engine.check import PlanReport, check_plan, report_to_dict
from engine.sweep import length_rate_curve
from engine.waveform import Waveforms, simulate_pattern

from engine.bus import Bus
from engine.plan import BusPlan

__all__ = ["CheckedPlan", "ReceiverMargin", "check_and_simulate", "check_only", "PlanReport", "report_to_dict"]


@dataclass(frozen=True, slots=True)
class ReceiverMargin:
    """How far a receiver's sampled voltage stays on the right side of 0 V, in volts: the smallest of
    (+v for a 1 bit, -v for a 0 bit) over every sampling instant. Below +0.2 V it is inside the ±200 mV band."""

    name: str
    margin_v: float


@dataclass(frozen=True, slots=True)
class CheckedPlan:
    report: PlanReport
    waveforms: Waveforms | None
    margins: tuple[ReceiverMargin, ...]  # plan order
    curve_bit_rate_bps: np.ndarray  # (n_points,)
    curve_max_length_m: np.ndarray  # (n_points,)
    simulation_note: str  # why waveforms are missing, when they are


def sampled_margins(waveforms: Waveforms) -> tuple[ReceiverMargin, ...]:
    """Per receiver: min over bits of (bit sign x voltage at the sampling instant)."""
    signs = np.array([1.0 if b == "1" else -1.0 for b in waveforms.bits])  # (n_bits,)
    n = min(signs.size, len(waveforms.sample_times_s))
    sampled = np.array(
        [np.interp(waveforms.sample_times_s[:n], waveforms.time_s, v) for v in waveforms.v_diff_v]
    )  # (n_receivers, n_bits)
    margins = (sampled * signs[:n]).min(axis=1) if n else np.zeros(len(waveforms.receiver_names))
    return tuple(ReceiverMargin(name, float(m)) for name, m in zip(waveforms.receiver_names, margins, strict=True))


def check_only(plan: BusPlan) -> PlanReport:
    """The rule report alone (for the bill of materials), without simulating."""
    return check_plan(plan)


def check_and_simulate(plan: BusPlan) -> CheckedPlan:
    """Run every rule, simulate the plan's bit pattern from the primary driver, and sweep length against rate."""
    report = check_plan(plan)
    bus: Bus = report.bus
    waveforms = simulate_pattern(bus, plan.test_pattern)
    rates, lengths = _curve(bus)
    return CheckedPlan(report, waveforms, sampled_margins(waveforms), rates, lengths, "")


def _curve(bus: Bus) -> tuple[np.ndarray, np.ndarray]:
    curve = length_rate_curve(bus)
    rates: Sequence[float] = curve.bit_rate_bps
    lengths: Sequence[float] = curve.max_length_m
    return np.asarray(rates, dtype=float), np.asarray(lengths, dtype=float)
