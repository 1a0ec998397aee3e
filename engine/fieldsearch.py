"""Which differences between plan and installation a capture supports: candidates fitted one at a time.

The driver's edge time and swing are always fitted. Then each candidate difference (cable Z0;
every distance stretched; the terminator at either end; an extra stub) is fitted with what is already
accepted, and candidates are taken in order of how much of the residual they remove: the first that
removes at least MIN_GAIN and whose fitted value lies outside the tolerance of the planned one (with the
planned value outside its 95 % range) is accepted; then the search repeats, up to MAX_DIFFERENCES.
Tolerances (common practice): cable Z0 +/- 10 %, lengths +/- 5 %, terminators +/- 25 % (missing above
10 Z0); an extra stub counts from 1 m. What stays unexplained is reported too (engine.fieldtext).

Candidates whose quantity moves reflections in time (the stretch, a stub's position) are scanned coarse to fine
first (engine.fieldfit); the others on a few values around the plan's. Every accepted difference keeps the other
candidates that fit about as well from the probe (its rivals), so a sentence can say what would look alike.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.fieldfit import Bounds, FitProblem, FitResult, Values
from pairline.engine.fieldmodel import FieldSetup, Installed
from pairline.engine.plan import BusPlan

MIN_GAIN = 0.2  # fraction of the residual a difference must remove
MAX_DIFFERENCES = 3
SWING_ALIKE = 1.1  # a bus difference with the planned driver swing may leave this much more residual
RIVAL = 1.1  # another candidate within this factor of the chosen one's residual fits about as well
SWING_TOLERANCE = 0.1  # a fitted driver swing further than this from the plan asks for an explanation
MEDIUM_WINDOW = 1.0  # candidates are compared averaged over this many edge times
LONGEST_STRETCH = 1.6  # the longest installed trunk tried, times the planned one


@dataclass(frozen=True, slots=True)
class Hypothesis:
    key: str
    free: tuple[str, ...]
    scans: tuple[tuple[float, dict[str, np.ndarray], bool], ...]  # (averaging window, grid, relative) coarse first
    realign: bool  # the quantity moves the first arrival at the probe


def diagnose(
    fit: FitProblem,
    aligned: Values,
    bounds: Bounds,
    hypotheses: list["Hypothesis"],
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
    hypotheses: list[Hypothesis]
    planned: Installed
    t_edge: float
    rise_s: float  # as planned

    def next_difference(
        self, values: Values, free: list[str], accepted: list[str], ceiling: float | None
    ) -> tuple[Hypothesis, Values, FitResult, list[str]] | None:
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


def fit_bounds(plan: BusPlan, z0: float, rise_s: float, offset_s: float, t_edge: float, memory_s: float) -> Bounds:
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


def candidates(
    plan: BusPlan, setup: FieldSetup, z0: float, t_edge: float, delay_s: float, speed_m_per_s: float
) -> list[Hypothesis]:
    """The candidate differences and their scans (averaging windows in edge times). Scans of quantities that
    move reflections in time step by a quarter of the averaged edge's length in round-trip time."""
    stretch_step = min(9.0 * t_edge / (4.0 * delay_s), 0.05)
    out = [
        Hypothesis(
            "z0_ohm", ("z0_ohm",), ((2.0, {"z0_ohm": z0 * np.array([0.7, 0.85, 1.0, 1.2, 1.4])}, False),), False
        ),
        Hypothesis(
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
        out.append(Hypothesis(key, (key,), ((2.0, {key: grid}, False),), False))
    step_m = min(speed_m_per_s * 9.0 * t_edge / 4.0, plan.trunk_length_m / 10.0)
    positions = np.arange(0.0, plan.trunk_length_m + 1e-9, max(step_m, plan.trunk_length_m / 200.0))
    out.append(
        Hypothesis(
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
