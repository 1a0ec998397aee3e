"""Field check: a capture of the installed bus held against its plan, and what in the installation differs.

1. Alignment. The capture's first edge (its first crossing of the level midway between its low and high
   levels) is matched to the plan's first edge at the probe (where its edge response is halfway); the time
   offset is then refined by least squares and the level scale and offset solved linearly. A capture that
   falls where the plan rises is used inverted. Only the plan's window around the edges is compared: from
   before the first edge to 3 edge times plus MEMORY_DELAYS longest one-way delays after the last.
2. Regions. Each sample belongs to the edge (from its arrival at the probe for 1.5 edge times), the
   reflections (until the plan's response stays within 2 % of its swing of the settled level) or the settled
   level (before the first edge and after settling), counted from the most recent level change sent.
3. Diagnosis. The driver's edge time and swing are always fitted. Then each candidate difference (cable Z0;
   every distance stretched; the terminator at either end; an extra stub) is fitted with what is already
   accepted, and candidates are taken in order of how much of the residual they remove: the first that
   removes at least MIN_GAIN and whose fitted value lies outside the tolerance of the planned one (with the
   planned value outside its 95 % range) is accepted; then the search repeats, up to MAX_DIFFERENCES.
   Tolerances (common practice): cable Z0 +/- 10 %, lengths +/- 5 %, terminators +/- 25 % (missing above
   10 Z0); an extra stub counts from 1 m. What stays unexplained is reported too (engine.fieldtext).
"""

import math
from dataclasses import dataclass, replace

import numpy as np
from pairline.engine.bus import build_bus
from pairline.engine.capture import MIN_SAMPLES, Capture
from pairline.engine.fieldfit import Bounds, FitProblem, FitResult, Values
from pairline.engine.fieldmodel import FieldSetup, Installed, plan_edge, planned_installation, sent_duration_s
from pairline.engine.fieldtext import Difference, Quantity, describe, is_unexplained, time_text
from pairline.engine.plan import BusInputError, BusPlan, Problem
from pairline.engine.units import propagation_velocity_m_per_s
from pairline.engine.waveform import edge_duration_s, longest_delay_s

MIN_GAIN = 0.2  # fraction of the residual a difference must remove
MAX_DIFFERENCES = 3
SWING_ALIKE = 1.1  # a bus difference with the planned driver swing may leave this much more residual
RIVAL = 1.1  # another candidate within this factor of the chosen one's residual fits about as well
SWING_TOLERANCE = 0.1  # a fitted driver swing further than this from the plan asks for an explanation
MEDIUM_WINDOW = 1.0  # candidates are compared averaged over this many edge times
MEMORY_DELAYS = 8.0  # the plan's window: 3 edge times plus this many longest one-way delays
LONGEST_STRETCH = 1.6  # the longest installed trunk tried, times the planned one
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


@dataclass(frozen=True, slots=True)
class _Hypothesis:
    key: str
    free: tuple[str, ...]
    scans: tuple[tuple[float, dict[str, np.ndarray], bool], ...]  # (averaging window, grid, relative) coarse first
    realign: bool  # the quantity moves the first arrival at the probe


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
        raise BusInputError(
            [
                Problem(
                    "capture_csv",
                    "Capture file",
                    fit.time_s.size,
                    {"min": MIN_SAMPLES, "unit": "samples"},
                    f"Only {fit.time_s.size} samples of the capture fall in the plan's window around the edge "
                    f"({time_text(window.end_s - window.start_s)}); at least {MIN_SAMPLES} are needed: sample faster.",
                )
            ]
        )
    bounds = _bounds(plan, z0, rise_s, window.offset_s, t_edge, memory_s)
    aligned, scale_v, level_v = _align(fit, window.offset_s, rise_s, t_edge, bounds)
    hypotheses = _hypotheses(plan, setup, z0, t_edge, delay_s, propagation_velocity_m_per_s(bus.cable.velocity_factor))
    values, best, accepted, rivals = _diagnose(fit, aligned, bounds, hypotheses, planned, t_edge, v_oc)

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


def _diagnose(
    fit: FitProblem,
    aligned: Values,
    bounds: Bounds,
    hypotheses: list["_Hypothesis"],
    planned: Installed,
    t_edge: float,
    swing_v: float,
) -> tuple[Values, FitResult, list[str], dict[str, list[str]]]:
    """(fitted values, their result, accepted candidate keys, and for each the other explanations that fit
    about as well): step 3 of the module docstring. When the best fit asks for a driver swing outside its
    tolerance, a bus difference that explains the capture about as well (within SWING_ALIKE of the residual)
    with the planned swing is preferred, the swing named as its rival: at some probes a missing terminator and a
    stronger driver look alike."""
    full = fit.level(0.0)
    free = ["time_offset_s", "rise_time_s"]
    values = fit.fit(full, aligned, free, bounds)
    best = fit.result(values, free, bounds)
    accepted: list[str] = []
    rivals: dict[str, list[str]] = {}
    search = _Search(fit, bounds, [h for h in hypotheses], planned, t_edge, aligned["rise_time_s"])
    while len(accepted) < MAX_DIFFERENCES:
        found = search.next_difference(values, free, accepted, None)
        swing_off = abs(abs(best.open_circuit_v) / swing_v - 1.0) > SWING_TOLERANCE
        if found is None and swing_off and "open_circuit_v" not in values:
            found = search.next_difference(values | {"open_circuit_v": swing_v}, free, accepted, best.cost)
            if found is not None:
                found[3].append("open_circuit_v")
        if found is None:
            break
        h, values, best, found_rivals = found
        accepted.append(h.key)
        rivals[h.key] = found_rivals
        free += list(h.free)
    return values, best, accepted, rivals


@dataclass(frozen=True, slots=True)
class _Search:
    fit: FitProblem
    bounds: Bounds
    hypotheses: list[_Hypothesis]
    planned: Installed
    t_edge: float
    rise_s: float  # as planned

    def next_difference(
        self, values: Values, free: list[str], accepted: list[str], ceiling: float | None
    ) -> tuple[_Hypothesis, Values, FitResult, list[str]] | None:
        """(candidate, fitted values, result, rivals) for the candidate removing most of the residual that differs
        from the plan; None if none does. Rivals fit about as well (within RIVAL of its residual).

        ceiling: with the driver's swing held at the plan's, the residual of the fit that had it free; a
        candidate must come within SWING_ALIKE of it (there is no gain to ask for: the held swing is the base).
        """
        fit, medium, full = self.fit, self.fit.level(MEDIUM_WINDOW * self.t_edge), self.fit.level(0.0)
        # scans start from the planned edge time when the fit so far has bent it to stand in for something else
        drifted = abs(values["rise_time_s"] / self.rise_s - 1.0) > 0.1
        start = values | {"rise_time_s": self.rise_s} if drifted else values
        base = fit.fit(medium, values, free, self.bounds) if ceiling is None else start
        limit = (1.0 - MIN_GAIN) * fit.cost(medium, base) if ceiling is None else math.inf
        trials = []
        for h in self.hypotheses:
            if h.key in accepted:
                continue
            trial = start
            for window, grid, relative in h.scans:
                level = fit.level(window * self.t_edge)
                trial = fit.scan(level, trial, grid, h.realign, relative, self.bounds)
            if ceiling is None and fit.cost(level, trial) > (1.0 - 0.5 * MIN_GAIN) * fit.cost(level, base):
                continue  # no promise even where the candidates are scanned
            trial = fit.fit(medium, trial, free + list(h.free), self.bounds)
            trials.append((fit.cost(medium, trial), h, trial))
        trials.sort(key=lambda item: item[0])
        for cost, h, trial in trials:
            if cost > limit:
                break
            trial = fit.fit(full, trial, free + list(h.free), self.bounds)
            result = fit.result(trial, free + list(h.free), self.bounds)
            if _differs(h.key, result, self.planned) and (ceiling is None or result.cost <= SWING_ALIKE * ceiling):
                rivals = [other.key for c, other, _ in trials if other is not h and c <= RIVAL * cost]
                return h, trial, result, rivals
        return None


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


def _bounds(plan: BusPlan, z0: float, rise_s: float, offset_s: float, t_edge: float, memory_s: float) -> Bounds:
    """(lower, upper, typical step) of every quantity the fit may move."""
    reach = 4.0 * t_edge + 0.2 * memory_s
    return {
        "time_offset_s": (offset_s - reach, offset_s + reach, t_edge / 50.0),
        "rise_time_s": (0.3 * rise_s, 5.0 * rise_s, 0.02 * rise_s),
        "z0_ohm": (40.0, 300.0, 0.005 * z0),
        "length_scale": (0.5, 2.0, 0.002),
        "start_siemens": (0.0, 5.0 / z0, 0.01 / z0),
        "end_siemens": (0.0, 5.0 / z0, 0.01 / z0),
        "stub_position_m": (0.0, plan.trunk_length_m * 2.0, 0.5),
        "stub_length_m": (0.1, 100.0, 0.1),
    }


def _hypotheses(
    plan: BusPlan, setup: FieldSetup, z0: float, t_edge: float, delay_s: float, speed_m_per_s: float
) -> list[_Hypothesis]:
    """The candidate differences and their scans (averaging windows in edge times). Scans of quantities that
    move reflections in time step by a quarter of the averaged edge's length in round-trip time."""
    stretch_step = min(9.0 * t_edge / (4.0 * delay_s), 0.05)
    out = [
        _Hypothesis(
            "z0_ohm", ("z0_ohm",), ((2.0, {"z0_ohm": z0 * np.array([0.7, 0.85, 1.0, 1.2, 1.4])}, False),), False
        ),
        _Hypothesis(
            "length_scale",
            ("length_scale",),
            (
                (8.0, {"length_scale": np.arange(0.6, LONGEST_STRETCH + 1e-9, stretch_step)}, False),
                (2.0, {"length_scale": np.arange(-2.0, 2.01, 0.5) * stretch_step}, True),
            ),
            setup.at != plan.driver.name or plan.driver.position_m > 0.0,
        ),
    ]
    for key, where_m in (("start_siemens", 0.0), ("end_siemens", plan.trunk_length_m)):
        here = [t for t in plan.terminations if t.position_m == where_m]
        if any(t.kind != "parallel" for t in here):
            continue
        planned_siemens = sum(1.0 / t.resistance_ohm for t in here)
        grid = np.unique(np.r_[0.0, 0.5 / z0, 1.0 / z0, 2.0 / z0, planned_siemens])
        out.append(_Hypothesis(key, (key,), ((2.0, {key: grid}, False),), False))
    step_m = min(speed_m_per_s * 9.0 * t_edge / 4.0, plan.trunk_length_m / 10.0)
    positions = np.arange(0.0, plan.trunk_length_m + 1e-9, max(step_m, plan.trunk_length_m / 200.0))
    out.append(
        _Hypothesis(
            "stub",
            ("stub_position_m", "stub_length_m"),
            (
                (8.0, {"stub_position_m": positions, "stub_length_m": np.array([2.0, 8.0, 25.0])}, False),
                (2.0, {"stub_position_m": np.linspace(-1.0, 1.0, 9) * step_m}, True),
            ),
            False,
        )
    )
    return out


def _differs(key: str, result: FitResult, planned: Installed) -> bool:
    """Is the fitted quantity outside its tolerance, with the planned value outside its 95 % range?"""
    v, sd = result.values, result.sigma
    if key == "z0_ohm":
        return abs(v[key] / planned.z0_ohm - 1.0) > 0.10 and abs(v[key] - planned.z0_ohm) > 1.96 * sd[key]
    if key == "length_scale":
        return abs(v[key] - 1.0) > 0.05 and abs(v[key] - 1.0) > 1.96 * sd[key]
    if key in ("start_siemens", "end_siemens"):
        g0, g, missing = getattr(planned, key) or 0.0, v[key], 0.1 / planned.z0_ohm
        if g0 > missing:
            outside = g < missing or abs(g / g0 - 1.0) > 0.25
        else:
            outside = g > missing
        return outside and abs(g - g0) > 1.96 * sd[key]
    return v["stub_length_m"] >= 1.0 and v["stub_length_m"] > 1.96 * sd["stub_length_m"]


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
