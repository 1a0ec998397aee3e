"""Field check: a capture of the installed bus held against its plan, and what in the installation differs.

1. Alignment. The capture's first edge (its first crossing of the level midway between its low and high
   levels) is matched to the plan's first edge at the probe (where its edge response is halfway); the time
   offset is then refined by least squares and the level scale and offset solved linearly. A capture that
   falls where the plan rises is used inverted. Only the plan's window around the edges is compared: from
   before the first edge to 3 edge times plus MEMORY_DELAYS longest one-way delays after the last.
2. Regions. Each sample belongs to the edge (from its arrival at the probe for 1.5 edge times), the
   reflections (until the plan's response stays within 2 % of its swing of the settled level) or the settled
   level (before the first edge and after settling), counted from the most recent level change sent.
3. Diagnosis: engine.fieldsearch fits the candidate differences and keeps those the capture supports.
"""

import math
from dataclasses import dataclass, replace

import numpy as np
from pairline.engine.bus import build_bus
from pairline.engine.capture import MIN_SAMPLES, Capture
from pairline.engine.capturefile import file_error
from pairline.engine.fieldfit import Bounds, FitProblem, Values
from pairline.engine.fieldmodel import FieldSetup, plan_edge, planned_installation, sent_duration_s
from pairline.engine.fieldsearch import LONGEST_STRETCH, candidates, diagnose, fit_bounds
from pairline.engine.fieldtext import Difference, Quantity, describe, is_unexplained, time_text
from pairline.engine.plan import BusPlan
from pairline.engine.units import propagation_velocity_m_per_s
from pairline.engine.waveform import edge_duration_s, longest_delay_s

MEMORY_DELAYS = 8.0  # the plan's window: 3 edge times plus this many longest one-way delays
FAR_LONGER = 4.0  # a capture longer than this many plan windows is trimmed, with a warning
SETTLED_FRACTION = 0.02  # of the swing: within this of the settled level counts as settled
REGIONS = ("edge", "reflections", "settled")
REGION_NAMES = ("edge", "reflections after the edge", "settled level")


@dataclass(frozen=True, slots=True)
class Alignment:
    """How the plan's prediction was laid over the capture: capture = scale * prediction(t - offset) + level."""

    time_offset_s: float  # capture time at which the driver starts sending (its first bit; for one edge, the edge)
    scale: float
    level_offset_v: float
    inverted: bool  # the capture was used upside down (falling edge, or A and B swapped)


@dataclass(frozen=True, slots=True)
class RegionResidual:
    region: str  # one of REGIONS
    samples: int
    rms_v: float
    max_abs_v: float
    rms_fraction: float  # rms over the predicted swing


@dataclass(frozen=True, slots=True)
class Overlay:
    time_s: np.ndarray  # (n,) capture time
    measured_v: np.ndarray  # (n,) as compared (inverted when the alignment says so)
    predicted_v: np.ndarray  # (n,) the plan, aligned
    fitted_v: np.ndarray  # (n,) the fitted installation
    region: np.ndarray  # (n,) index into REGIONS
    clipped: np.ndarray  # (n,) bool


@dataclass(frozen=True, slots=True)
class FieldCheck:
    setup: FieldSetup
    samples: int  # in the capture
    sample_interval_s: float
    signal: str
    noise_v: float
    alignment: Alignment
    residuals: tuple[RegionResidual, ...]  # the plan, aligned, against the capture
    fitted_residuals: tuple[RegionResidual, ...]  # the fitted installation against the capture
    overlay: Overlay
    quantities: tuple[Quantity, ...]
    differences: tuple[Difference, ...]
    fitted_plan: BusPlan | None  # the plan as the capture says it was installed, when anything differs
    warnings: tuple[str, ...]
    solves: int  # network solves the fit needed

    @property
    def matches(self) -> bool:
        return not self.differences


@dataclass(frozen=True, slots=True)
class _Window:
    offset_s: float  # first guess of the capture time of the driver's first edge
    start_s: float  # compared capture times
    end_s: float
    span_s: float  # of the edge response


def check_capture(plan: BusPlan, capture: Capture, setup: FieldSetup) -> FieldCheck:
    """Align, compare by region, and fit the installation to the capture (module docstring)."""
    bus = build_bus(plan)
    z0, rise_s, v_oc = bus.cable.z0_ohm, bus.driver.rise_time_s, bus.driver.open_circuit_v
    planned = planned_installation(plan, z0)
    t_edge = edge_duration_s(rise_s)
    delay_s = longest_delay_s(bus)
    memory_s = 3.0 * t_edge + MEMORY_DELAYS * delay_s
    edge = plan_edge(plan, setup, planned, memory_s, rise_s)
    warnings = list(capture.warnings)
    _, times, steps = setup.transitions()
    capture_cross_s, rising = _first_crossing(capture)
    inverted = rising != (steps[0] > 0)
    if inverted:
        capture = replace(capture, v_diff_v=-capture.v_diff_v)
        warnings.append(
            "The capture falls where the plan's edge rises: it is compared upside down (a falling edge, or A and B "
            "swapped at the probe)."
        )
    window = _window(capture, setup, capture_cross_s - float(times[0]) - _half_time_s(*edge), memory_s, warnings)
    if capture.sample_interval_s > t_edge:
        warnings.append(
            f"The capture is sampled every {time_text(capture.sample_interval_s)}, slower than the driver's edge "
            f"({time_text(t_edge)}): edges and short reflections are blurred in it."
        )
    if window.end_s - window.offset_s < sent_duration_s(setup) + 3.0 * t_edge + 4.0 * delay_s:
        warnings.append(
            "The capture ends before the far end's reflection and its echo are back "
            f"({time_text(3.0 * t_edge + 4.0 * delay_s)} after the last edge): late reflections and the settled "
            "level are compared only in part."
        )
    fit = FitProblem(plan, setup, capture, planned, (window.start_s, window.end_s), window.span_s, rise_s)
    if fit.time_s.size < MIN_SAMPLES:
        raise file_error(
            fit.time_s.size,
            {"min": MIN_SAMPLES, "unit": "samples"},
            f"Only {fit.time_s.size} samples of the capture fall in the plan's window around the edge "
            f"({time_text(window.end_s - window.start_s)}); at least {MIN_SAMPLES} are needed: sample faster, or "
            "check the time unit (times in µs read as seconds look like this).",
        )
    limits = fit_bounds(plan, z0, rise_s, window.offset_s, t_edge, memory_s)
    aligned, scale_v, level_v = _align(fit, window.offset_s, rise_s, t_edge, limits)
    speed = propagation_velocity_m_per_s(bus.cable.velocity_factor)
    found = candidates(plan, setup, z0, t_edge, delay_s, speed)
    values, best, accepted, rivals = diagnose(fit, aligned, limits, found, planned, t_edge, v_oc)

    full = fit.level(0.0)
    predicted = scale_v * fit.unit_response(full, aligned, fit.time_s) + level_v
    fitted = fit.unit_response(full, values, fit.time_s) * best.open_circuit_v + best.offset_v
    region = _regions(fit, aligned["time_offset_s"], edge, t_edge)
    swing_v = float(np.ptp(predicted)) or 1.0
    fitted_rms = _region_rms(fit.y_v - fitted, region, fit.use, swing_v)
    rms_v = math.sqrt(best.cost / max(1, int(np.count_nonzero(fit.use))))
    worst = max(range(len(fitted_rms)), key=lambda i: fitted_rms[i].rms_v)
    left = (rms_v, REGION_NAMES[REGIONS.index(fitted_rms[worst].region)])
    quantities, differences, fitted_plan = describe(
        bus,
        setup,
        fit.installed(values),
        planned,
        best,
        accepted,
        rivals,
        left if is_unexplained(rms_v, capture.noise_v, swing_v) else None,
    )
    return FieldCheck(
        setup=setup,
        samples=capture.time_s.size,
        sample_interval_s=capture.sample_interval_s,
        signal=capture.signal,
        noise_v=capture.noise_v,
        alignment=Alignment(aligned["time_offset_s"], scale_v / v_oc, level_v, inverted),
        residuals=_region_rms(fit.y_v - predicted, region, fit.use, swing_v),
        fitted_residuals=fitted_rms,
        overlay=Overlay(fit.time_s, fit.y_v, predicted, fitted, region, ~fit.use),
        quantities=quantities,
        differences=differences,
        fitted_plan=fitted_plan,
        warnings=tuple(warnings),
        solves=fit.solves + 1,
    )


def _window(capture: Capture, setup: FieldSetup, offset_s: float, memory_s: float, warnings: list[str]) -> _Window:
    """The compared part of the capture: from before the first edge to the end of the plan's window."""
    first_s, last_s = float(capture.time_s[0]), float(capture.time_s[-1])
    edge_s = offset_s + float(setup.transitions()[1][0])
    pre_s = min(edge_s - first_s, max(0.25 * memory_s, 50 * capture.sample_interval_s))
    wanted_s = sent_duration_s(setup) + memory_s
    if last_s - edge_s > FAR_LONGER * (wanted_s + pre_s):
        warnings.append(
            f"The capture lasts {time_text(last_s - first_s)}, far longer than the plan's window of "
            f"{time_text(wanted_s + pre_s)} around the edges; only that window is compared."
        )
    end_s = min(last_s, edge_s + wanted_s)
    span_s = end_s - offset_s if setup.sent == "edge" else min(end_s - offset_s, memory_s * LONGEST_STRETCH)
    return _Window(offset_s, edge_s - pre_s, end_s, span_s)


def _align(
    fit: FitProblem, offset_s: float, rise_s: float, t_edge: float, bounds: Bounds
) -> tuple[Values, float, float]:
    """The plan laid over the capture: the time offset fitted (edge time as planned), then scale and level."""
    full = fit.level(0.0)
    start = {"time_offset_s": offset_s, "rise_time_s": rise_s}
    start = fit.scan(full, start, {"time_offset_s": offset_s + t_edge * np.linspace(-2.0, 2.0, 9)}, realign=False)
    aligned = fit.fit(full, start, ["time_offset_s"], bounds)
    _, scale_v, level_v = fit.residual(full, aligned)
    return aligned, scale_v, level_v


def _half_time_s(time_s: np.ndarray, edge: np.ndarray, settled: float) -> float:
    """When the edge response first gets halfway to its settled value: where a swing between the two levels
    the driver sends crosses their midpoint."""
    half = edge >= 0.5 * settled if settled >= 0 else edge <= 0.5 * settled
    return float(time_s[int(np.argmax(half))])


def _first_crossing(capture: Capture) -> tuple[float, bool]:
    """(time, rising) of the capture's first crossing of the level midway between its 1st and 99th percentiles,
    with hysteresis of a quarter of that span so noise does not count."""
    v = capture.v_diff_v
    lo, hi = np.percentile(v[~capture.clipped], [1.0, 99.0])
    mid, band = 0.5 * (lo + hi), 0.25 * (hi - lo)
    start_high = float(np.median(v[: max(5, v.size // 50)])) > mid
    far = np.flatnonzero(v < mid - band) if start_high else np.flatnonzero(v > mid + band)
    k = int(far[0]) if far.size else v.size - 1
    side = v[:k] > mid if start_high else v[:k] < mid
    cross = int(np.flatnonzero(side)[-1]) if np.any(side) else 0
    return float(capture.time_s[cross]), not start_high


def _regions(fit: FitProblem, offset_s: float, edge: tuple[np.ndarray, np.ndarray, float], t_edge: float) -> np.ndarray:
    """Region index of every compared sample (module docstring, step 2)."""
    time_s, e, settled = edge
    peak = float(np.max(np.abs(e))) or 1.0
    arrival = float(time_s[int(np.argmax(np.abs(e) >= 0.05 * peak))])
    away = np.flatnonzero(np.abs(e - settled) > SETTLED_FRACTION * peak)
    settle = float(time_s[away[-1]]) if away.size else arrival
    _, times, _ = fit.setup.transitions()
    start = arrival - 0.25 * t_edge
    t_model = fit.time_s - offset_s
    last = np.searchsorted(times + start, t_model, side="right") - 1
    since = t_model - (times[np.clip(last, 0, None)] + start)
    region = np.where(since < 1.5 * t_edge, 0, np.where(since < max(settle - start, 1.5 * t_edge), 1, 2))
    return np.asarray(np.where(last < 0, 2, region), dtype=np.int8)


def _region_rms(
    residual_v: np.ndarray, region: np.ndarray, use: np.ndarray, swing_v: float
) -> tuple[RegionResidual, ...]:
    out = []
    for i, name in enumerate(REGIONS):
        r = residual_v[(region == i) & use]
        if r.size:
            rms = float(np.sqrt(np.mean(r * r)))
            out.append(RegionResidual(name, int(r.size), rms, float(np.max(np.abs(r))), rms / swing_v))
    return tuple(out)


__all__ = ["Alignment", "FieldCheck", "Overlay", "REGIONS", "RegionResidual", "check_capture"]
