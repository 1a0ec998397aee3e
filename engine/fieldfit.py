"""Least-squares fit of an installation to a capture: the model at the capture's samples, Levenberg-Marquardt
with bounds, coarse-to-fine scans for quantities that move reflections in time, and confidence ranges.

The capture y (n samples) is compared with V_oc m(t - tau; theta) + b: m the response at the probe per volt
of the driver's open-circuit swing (engine.fieldmodel), theta the nonlinear quantities (time offset, edge time,
and any of Z0, length stretch, end terminators, an extra stub), V_oc and b solved by linear least squares at
every theta (variable projection: G. H. Golub, V. Pereyra, "The differentiation of pseudo-inverses and
nonlinear least squares problems whose variables separate", SIAM J. Numer. Anal. 10 (1973)).

Minimisation: Levenberg-Marquardt with forward-difference Jacobians and Marquardt's diagonal scaling
(D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear parameters", J. SIAM 11 (1963));
bounds by clipping. A quantity that moves a reflection in time has a narrow valley (about one edge wide),
so it is first scanned at coarse resolutions: capture and model both averaged over a window W (a box of
W seconds: on the model one factor (1 - exp(-s W)) / (s W), on the capture a moving mean) widens every
valley to about the edge time plus W, on a grid W / 12 apart, so the solves there are cheap.

Confidence: cov = s^2 kappa (J^T J)^-1 at the optimum with s^2 = RSS / (n - p) and kappa = 1 + 2 sum rho_k,
the residual's correlation over neighbouring samples (the residual is not white: model error is smooth),
summed until the autocorrelation first turns negative. 95 % ranges are +/- 1.96 standard deviations.
Source: N. R. Draper, H. Smith, Applied Regression Analysis, 3rd ed. (1998), ch. 24 (nonlinear least squares);
the correlation factor is the usual effective-sample-size correction (common practice).
"""

import math
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from pairline.engine.capture import Capture
from pairline.engine.fieldmodel import (
    SAMPLES_PER_EDGE,
    FieldSetup,
    Installed,
    ModelGrid,
    edge_response,
    model_grid,
    probe_transfer,
    sent_waveform,
)
from pairline.engine.plan import BusPlan

CACHE_ENTRIES = 48  # transfers kept (one per installation tried)
MAX_WINDOW_SHARE = 0.125  # an averaging window spans at most this share of the compared time
INSTALLED_KEYS = ("z0_ohm", "length_scale", "start_siemens", "end_siemens", "stub_position_m", "stub_length_m")
Values = dict[str, float]
Bounds = dict[str, tuple[float, float, float]]  # key -> (lower, upper, typical step)


@dataclass(frozen=True, slots=True)
class Level:
    """One resolution: the model grid, the averaging window, and the capture averaged and thinned to match."""

    grid: ModelGrid
    window_s: float  # W, 0 at full resolution
    time_s: np.ndarray  # (n_l,) capture times used
    y_v: np.ndarray  # (n_l,) the capture, averaged over W
    use: np.ndarray  # (n_l,) bool, False where clipped samples fall in the average


@dataclass(frozen=True, slots=True)
class FitResult:
    values: Values  # every nonlinear quantity fitted
    open_circuit_v: float
    offset_v: float
    cost: float  # residual sum of squares, V^2, at full resolution
    residual_v: np.ndarray  # (n,) at full resolution
    sigma: Values  # standard deviation of each fitted quantity, incl. "open_circuit_v"


class FitProblem:
    """One capture held against one plan and setup over a fixed window of capture time."""

    def __init__(
        self,
        plan: BusPlan,
        setup: FieldSetup,
        capture: Capture,
        planned: Installed,
        window_s: tuple[float, float],
        span_s: float,
        rise_time_s: float,
    ) -> None:
        self.plan = plan
        self.setup = setup
        self.planned = planned
        inside = (capture.time_s >= window_s[0]) & (capture.time_s <= window_s[1])
        self.time_s = capture.time_s[inside]
        self.y_v = capture.v_diff_v[inside]
        self.use = ~capture.clipped[inside]
        self.dt_capture_s = capture.sample_interval_s
        self.span_s = span_s
        self.edge_s = rise_time_s / 0.8
        self._cache: OrderedDict[tuple[float, Installed], tuple[np.ndarray, float]] = OrderedDict()
        self.levels: dict[float, Level] = {}
        self.solves = 0

    # --- model --------------------------------------------------------------------------------------------

    def level(self, window_s: float) -> Level:
        """The resolution averaging over window_s (0: full; at most an eighth of the compared time), built once."""
        if window_s not in self.levels:
            asked_s, window_s = window_s, min(window_s, MAX_WINDOW_SHARE * float(self.time_s[-1] - self.time_s[0]))
            if window_s in self.levels:
                self.levels[asked_s] = self.levels[window_s]
                return self.levels[window_s]
            grid = model_grid(self.span_s, (self.edge_s + window_s) / SAMPLES_PER_EDGE)
            width = int(round(window_s / self.dt_capture_s))
            y, use, t = self.y_v, self.use, self.time_s
            if width > 1:
                c = np.cumsum(np.r_[0.0, y])
                y = (c[width:] - c[:-width]) / width  # mean of the width samples up to each time
                bad = np.cumsum(np.r_[0, ~use])
                use = (bad[width:] - bad[:-width]) == 0
                t = t[width - 1 :]
            stride = max(1, int(grid.dt_s / (2.0 * self.dt_capture_s)))
            self.levels[window_s] = self.levels[asked_s] = Level(
                grid, window_s, t[::stride], y[::stride], use[::stride]
            )
        return self.levels[window_s]

    def transfer(self, level: Level, inst: Installed) -> tuple[np.ndarray, float]:
        """(H(s) on the level's grid, with the averaging box, and H(0)): cached per installation."""
        key = (level.window_s, inst)
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        s = np.r_[level.grid.s, 0.0]
        h = probe_transfer(self.plan, inst, self.setup, s)
        self.solves += 1
        transfer, settled = h[:-1], float(h[-1].real)
        if level.window_s > 0:
            w = level.window_s
            transfer = transfer * (-np.expm1(-level.grid.s * w) / (level.grid.s * w))
        self._cache[key] = (transfer, settled)
        if len(self._cache) > CACHE_ENTRIES:
            self._cache.popitem(last=False)
        return transfer, settled

    def installed(self, values: Values) -> Installed:
        return replace(self.planned, **{k: values[k] for k in INSTALLED_KEYS if k in values})

    def unit_response(self, level: Level, values: Values, at_s: np.ndarray | None = None) -> np.ndarray:
        """m(t - tau) per volt of V_oc at the level's capture times (or at at_s, capture time)."""
        transfer, settled = self.transfer(level, self.installed(values))
        edge = edge_response(level.grid, transfer, values["rise_time_s"])
        times = level.time_s if at_s is None else at_s
        return sent_waveform(level.grid, edge, settled, self.setup, times - values["time_offset_s"])

    def residual(self, level: Level, values: Values) -> tuple[np.ndarray, float, float]:
        """(residual at used samples, V_oc, b) with V_oc and b the linear least-squares solution; V_oc is held
        when values name it ("open_circuit_v")."""
        m = self.unit_response(level, values)[level.use]
        y = level.y_v[level.use]
        v_oc, offset = _line_fit(m, y, values.get("open_circuit_v"))
        return y - v_oc * m - offset, v_oc, offset

    # --- fitting ------------------------------------------------------------------------------------------

    def cost(self, level: Level, values: Values) -> float:
        r = self.residual(level, values)[0]
        return float(r @ r)

    def fit(self, level: Level, values: Values, free: list[str], bounds: Bounds) -> Values:
        """Levenberg-Marquardt over the free quantities (bounds: key -> (lower, upper, step)); others held."""
        lower = np.array([bounds[k][0] for k in free])
        upper = np.array([bounds[k][1] for k in free])
        scale = np.array([bounds[k][2] for k in free])

        def fun(x: np.ndarray) -> np.ndarray:
            return self.residual(level, values | dict(zip(free, x.tolist(), strict=True)))[0]

        x = levenberg_marquardt(fun, np.array([values[k] for k in free]), lower, upper, scale)
        return values | dict(zip(free, x.tolist(), strict=True))

    def scan(
        self,
        level: Level,
        values: Values,
        grid: dict[str, np.ndarray],
        realign: bool,
        relative: bool = False,
        bounds: Bounds | None = None,
    ) -> Values:
        """The best point of a grid of installations (every combination of the grid's values, or of the current
        values plus them when relative); with realign, the time offset is re-fitted at each point (for
        quantities that move the first arrival)."""
        keys = list(grid)
        best, best_cost = values, math.inf
        base = np.array([values[k] if relative else 0.0 for k in keys])
        lower = np.array([bounds[k][0] if bounds else -math.inf for k in keys])
        upper = np.array([bounds[k][1] if bounds else math.inf for k in keys])
        combos = np.stack(np.meshgrid(*grid.values(), indexing="ij"), axis=-1).reshape(-1, len(keys))
        for combo in np.unique(np.clip(base + combos, lower, upper), axis=0):
            trial = values | dict(zip(keys, combo.tolist(), strict=True))
            if realign:
                step = level.grid.dt_s
                span = 4.0 * (self.edge_s + level.window_s)
                t0 = values["time_offset_s"]
                trial = self.fit(level, trial, ["time_offset_s"], {"time_offset_s": (t0 - span, t0 + span, step)})
            c = self.cost(level, trial)
            if c < best_cost:
                best, best_cost = trial, c
        return best

    def result(self, values: Values, free: list[str], bounds: Bounds) -> FitResult:
        """Residual, linear quantities and confidence of a fit at full resolution."""
        level = self.level(0.0)
        y = self.y_v[self.use]
        m = self.unit_response(level, values, self.time_s)[self.use]
        v_oc, offset = _line_fit(m, y, values.get("open_circuit_v"))
        r = y - v_oc * m - offset
        columns = [m, np.ones_like(m)]  # d/dV_oc, d/db
        for k in free:
            h = bounds[k][2]
            upper = bounds[k][1]
            sign = -1.0 if values[k] + h > upper else 1.0
            moved = self.unit_response(level, values | {k: values[k] + sign * h}, self.time_s)[self.use]
            columns.append(v_oc * (moved - m) / (sign * h))
        steps = np.array([1.0, 1.0] + [bounds[k][2] for k in free])
        jac = np.column_stack(columns) * steps  # each column per step of its quantity: a well-scaled system
        dof = max(1, r.size - jac.shape[1])
        s2 = float(r @ r) / dof * correlation_factor(r)
        sd = np.sqrt(np.abs(np.diag(s2 * np.linalg.pinv(jac.T @ jac)))) * steps
        sigma = {"open_circuit_v": float(sd[0])} | {k: float(sd[2 + i]) for i, k in enumerate(free)}
        full = np.full(self.y_v.shape, np.nan)
        full[self.use] = r
        return FitResult(values, v_oc, offset, float(r @ r), full, sigma)


def _line_fit(x: np.ndarray, y: np.ndarray, slope: float | None = None) -> tuple[float, float]:
    """(a, b) minimising |y - a x - b|^2 (the normal equations of a straight line), or b alone for a given a."""
    x_mean, y_mean = float(x.mean()), float(y.mean())
    if slope is not None:
        return slope, y_mean - slope * x_mean
    dx = x - x_mean
    sxx = float(dx @ dx)
    a = float(dx @ (y - y_mean)) / sxx if sxx > 0 else 0.0
    return a, y_mean - a * x_mean


def correlation_factor(r: np.ndarray, max_lag: int = 400) -> float:
    """kappa = 1 + 2 sum_k rho_k over lags until the residual's autocorrelation first turns negative."""
    x = r - r.mean()
    var = float(x @ x)
    if var == 0.0:
        return 1.0
    n = x.size
    size = 1 << int(math.ceil(math.log2(2 * n)))
    spectrum = np.fft.rfft(x, size)
    acf = np.fft.irfft(spectrum * np.conj(spectrum), size)[: min(max_lag, n)] / var
    negative = np.flatnonzero(acf <= 0.0)
    stop = int(negative[0]) if negative.size else acf.size
    return float(max(1.0, 1.0 + 2.0 * acf[1:stop].sum()))


def levenberg_marquardt(
    fun: Callable[[np.ndarray], np.ndarray],
    x0: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    scale: np.ndarray,
    max_iterations: int = 30,
) -> np.ndarray:
    """Minimise |fun(x)|^2 within [lower, upper]; scale: a typical change of each x (and its difference step)."""
    x = np.clip(x0, lower, upper)
    r = fun(x)
    cost = float(r @ r)
    damping = 1e-3
    small = False
    for _ in range(max_iterations):
        jac = np.empty((r.size, x.size))
        for i in range(x.size):
            h = scale[i] if x[i] + scale[i] <= upper[i] else -scale[i]
            moved = x.copy()
            moved[i] += h
            jac[:, i] = (fun(moved) - r) / h
        grad = jac.T @ r
        normal = jac.T @ jac
        diag = np.maximum(np.diag(normal), 1e-30)
        improved = False
        while damping < 1e8:
            step = np.linalg.solve(normal + damping * np.diag(diag), -grad)
            trial = np.clip(x + step, lower, upper)
            r_trial = fun(trial)
            c_trial = float(r_trial @ r_trial)
            if c_trial < cost:
                small = bool(np.all(np.abs(trial - x) < 0.05 * scale)) or c_trial > cost * (1.0 - 1e-5)
                x, r, cost = trial, r_trial, c_trial
                damping = max(damping / 4.0, 1e-7)
                improved = True
                break
            damping *= 5.0
        if not improved or small:
            break
    return np.asarray(x)
