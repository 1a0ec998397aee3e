"""Edge responses: every probe's waveform after one rising driver edge, by numerical Laplace inversion on time
grids chosen from the response itself, with each probe's wave front kept exact.

The driver edge is a linear ramp 0 -> V (open_circuit_v) whose 10-90 % time is rise_time_s, so its 0-100 %
duration is T_e = rise_time_s / 0.8 and its Laplace transform E(s) = V (1 - exp(-s T_e)) / (s^2 T_e).

Frames. Probe p of driver d is read in its own frame, local time u = t - tau_dp, tau_dp its geometric path delay
(engine.solve.probe_delays_s): nothing reaches it earlier, so a far receiver's transform starts where its signal
starts, and fine grids only span the time the signal is busy, not the time the edge spends on its way.

Front. The delay-normalised transfer H(s) exp(s tau) tends, at a large real s, to a_dp, the amplitude of the wave
front arriving at tau (engine.solve.settled_and_front, taken at s_f = 1 / sigma_min, the blur of the finest grid below).
The response is split into that front, a V r(u) with r the unit ramp (exact, in closed form), and a remainder of
spectrum (H exp(s tau) - a) E(s), which the transform inverts. Where a lossless or constant-R path carries the
ramp unrounded (a matched line, an open end's doubled first step, the driver's own pins) the remainder has no
corner there, and the ramp's corners, at local times 0 and T_e, are grid points of every level.

One level of the transform: N samples spaced dt over a window T = N dt, s_k = c + j 2 pi k / T with c T = ln(1e8),
x(n dt) = exp(c n dt) irfft(X(s_k) W_k)[n] / dt, W_k = exp(-f_k^2 / (2 (lowpass f_Nyquist)^2)). The damping makes
the response's own tail vanish before it wraps around, so the first half of the window is accurate to about 1e-4
of the swing, apart from the low-pass: a Gaussian blur of sigma_t = dt / (pi lowpass). It rounds a corner whose
slope changes by S by S sigma_t / sqrt(2 pi), and reading the blurred samples by linear interpolation adds at most
S dt^2 / (8 sigma_t sqrt(2 pi)) (the curvature of the blurred corner). Together, per unit slope change,
    error(dt) = dt (0.127 / lowpass + 0.157 lowpass)                       (error_per_slope_change)
Sources: L. M. Wedepohl, "Power system transients: errors incurred in the numerical inversion of the Laplace
transform", Proc. 26th Midwest Symposium on Circuits and Systems (1983); P. Moreno, A. Ramirez, "Implementation
of the numerical Laplace transform: a review", IEEE Trans. Power Delivery 23 (2008). The blur and interpolation
bounds: convolution of a corner with a Gaussian, and the linear-interpolation remainder dt^2 max|x''| / 8.

Grids chosen from the response (ACCURACY of each probe's peak-to-peak, measured on the response itself; no grid
is coarsened to fit a sample count, only split when it would not fit in memory):
1. First level: dt = T_e / 16 over a quiet span (the longest round trip, or less where the cable's own loss
   rounds every edge sooner: once it has attenuated the edge's main frequency 1 / T_e to ACCURACY) and 8 T_e,
   doubled while it or its finer levels are still needed within its last quiet span: later sharp waves arrive
   within a round trip of earlier ones, or rounded. Transform sizes are 2^a 3^b 5^c (fast FFT lengths).
2. Finer levels dt / 2 ... T_e / MAX_SAMPLES_PER_EDGE, each up to one T_e past the last time the coarser level
   errs by more than ACCURACY. The first level's error is taken as twice what doubling its blur changes (a
   corner's blur error is proportional to the blur, and samples can straddle the corner, where the change seen
   falls to 0.55 of its peak); a finer level's, as twice its change from the coarser one; plus the level's own
   interpolation error.
3. Later levels, each TAIL_FACTOR x longer and as coarse as the previous level's last quiet span allows (what the
   coarser grid would get wrong there: the previous samples blurred to its width, plus its interpolation error),
   until every probe is within `tolerance` of its settled level (exact DC solve) over the second half of a level
   past 6 one-way delays, or max_time_s is covered. A level spans at least twice the time before it: where
   MAX_LEVEL_VALUES (memory) allows no finer spacing for that, the level takes the finest that fits.
Every sample of a level is kept where that level is used: finest first, each coarser one after the finer ends.
"""

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from functools import partial

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.line import propagation_constant_per_m
from pairline.engine.plan import BusInputError, Problem
from pairline.engine.solve import (
    Branching,
    NetworkVariants,
    Probe,
    ProbePoints,
    Topology,
    branching,
    build_topology,
    node_probe,
    nominal_variant,
    probe_points,
    probe_spectra,
    resolve_driver_names,
    settled_and_front,
    solve_network,
)
from pairline.engine.units import delay_s, propagation_velocity_m_per_s

ACCURACY = 4e-3  # of each probe's peak-to-peak: error allowed from blur and interpolation
FIRST_SAMPLES_PER_EDGE = 16
MAX_SAMPLES_PER_EDGE = 128
FINE_LOWPASS = 0.5  # Gaussian width / Nyquist where dt <= T_e / 16: the ramp is resolved, little reaches Nyquist
COARSE_LOWPASS = 0.2  # elsewhere: nothing sharper than the grid may alias
DAMPING = float(np.log(1e8))  # c T of every level
MIN_SAMPLES = 256
FIRST_MIN_SAMPLES = 1024
MAX_LEVEL_VALUES = 1 << 24  # probe x sample values of one level at most (memory); a longer level is split
LATER_SAMPLES = 2048  # N of a later level when its spacing allows
TAIL_FACTOR = 4
MAX_LATER_LEVELS = 40
SHARP_NEPERS = float(np.log(1.0 / 4e-3))  # attenuation of the edge's main frequency to ACCURACY: rounded
PTP_FLOOR = 0.01  # of V_oc: relative accuracy is held against at least this swing
NETWORK_BUDGET_VALUES = 4_000_000  # junction/branch x Laplace-point values per network solve
SPECTRUM_BUDGET_VALUES = 2_000_000  # probe spectra held at once (drivers are processed in groups)


@dataclass(frozen=True, slots=True)
class StepResponses:
    """Response of every probe to one rising driver edge 0 -> open_circuit_v starting at t = 0.

    Probe p of driver d is sampled at absolute times start_s[d, p] + time_s (its own frame, module docstring);
    before start_s it is exactly 0. After the last sample it equals v_final_v when `settled`. Read it at any
    time with `at`: linear interpolation of the samples, within ACCURACY of the probe's peak-to-peak.
    """

    time_s: np.ndarray  # (n_t,) local time, ascending from 0
    start_s: np.ndarray  # (n_drivers, n_probes) absolute time of local 0: the path delay
    driver_names: tuple[str, ...]
    receiver_names: tuple[str, ...]  # probe labels (a node probe is labelled with the node's name)
    probes: tuple[Probe, ...]
    v_diff_v: np.ndarray  # (n_drivers, n_probes, n_t)
    v_final_v: np.ndarray  # (n_drivers, n_probes) settled level from the DC solve
    front_v: np.ndarray  # (n_drivers, n_probes) height of the exact ramp the front carries
    open_circuit_v: float
    rise_time_s: float  # 10-90 % of the driver ramp
    settled: bool
    levels: tuple[tuple[float, int, int, int], ...] = ()  # the grid: (dt, N, first, end) of each level's samples

    def at(self, time_s: np.ndarray) -> np.ndarray:
        """Values at absolute times, (n_drivers, n_probes, n_times): 0 before each probe's start; after the last
        sample the settled level if settled, else the last value."""
        t = np.asarray(time_s, dtype=float)
        n_d, n_p = self.v_final_v.shape
        out = np.empty((n_d, n_p, *t.shape))
        for d in range(n_d):
            for p in range(n_p):
                right = self.v_final_v[d, p] if self.settled else self.v_diff_v[d, p, -1]
                out[d, p] = np.interp(t - self.start_s[d, p], self.time_s, self.v_diff_v[d, p], left=0.0, right=right)
        return out

    def for_driver(self, name: str) -> "StepResponses":
        """The responses of one driver out of a batch computed for several."""
        i = self.driver_names.index(name)
        one = slice(i, i + 1)
        return replace(
            self,
            driver_names=(name,),
            start_s=self.start_s[one],
            v_diff_v=self.v_diff_v[one],
            v_final_v=self.v_final_v[one],
            front_v=self.front_v[one],
        )


def edge_duration_s(rise_time_s: float) -> float:
    """0-100 % duration of the linear ramp whose 10-90 % time is rise_time_s: T_e = t_r / 0.8."""
    return rise_time_s / 0.8


def longest_delay_s(bus: Bus) -> float:
    """One-way delay of the trunk plus the longest stub or branch twice: an upper bound on any single path."""
    plan = bus.plan
    stubs = [n.stub_length_m for n in plan.nodes] + [plan.driver.stub_length_m]
    own = [p for p in map(bus.layout.place, plan.nodes) if p is not None]  # (branch, along, own stub)
    stubs += [b.length_m + max((s for c, _, s in own if c is b), default=0.0) for b in bus.layout.branches]
    return delay_s(plan.trunk_length_m + 2.0 * max(stubs), bus.cable.velocity_factor)


def lowpass_fraction(dt_s: float, t_edge_s: float) -> float:
    return FINE_LOWPASS if dt_s <= t_edge_s / 16.0 * (1.0 + 1e-9) else COARSE_LOWPASS


def edge_spectrum(s: np.ndarray, v_oc: float, t_edge_s: float) -> np.ndarray:
    """Laplace transform of the ramp 0 -> v_oc over t_edge_s: v_oc (1 - exp(-s T)) / (s^2 T)."""
    return np.asarray(-v_oc * np.expm1(-s * t_edge_s) / (s * s * t_edge_s))


class _Levels:
    """Transforms one level at a time for fixed drivers and probes (the remainder after the front), for n_v
    variants of the bus at once (engine.solve.NetworkVariants; variants sharing a network are solved once)."""

    def __init__(
        self,
        bus: Bus,
        topo: Topology,
        names: tuple[str, ...],
        points: ProbePoints,
        front: np.ndarray,
        t_edges_s: np.ndarray,
        grid_edge_s: float,
        kinds: Branching,
        variants: NetworkVariants | None = None,
        network_of: np.ndarray | None = None,
    ):
        self.bus, self.topo, self.names, self.points, self.kinds = bus, topo, names, points, kinds
        self.front = front  # (n_v, n_d, n_p) per volt of drive
        self.t_edges = np.asarray(t_edges_s, dtype=float)  # (n_v,) each variant's ramp
        self.t_edge = grid_edge_s  # the ramp the grids are chosen for (the fastest)
        self.variants = variants  # n_u distinct networks; None: the plan itself
        self.network_of = np.zeros(self.t_edges.size, dtype=int) if network_of is None else network_of  # (n_v,)
        self.v_oc = bus.driver.open_circuit_v
        n_u = 1 if variants is None else len(variants.cables)
        sizes = (5 * topo.n_junctions + 3 * topo.branch_stub_m.size) * n_u
        self.points_per_solve = max(16, NETWORK_BUDGET_VALUES // sizes)

    def remainder(self, dt: float, n: int, lo: int, hi: int, out: np.ndarray | None = None) -> np.ndarray:
        """Remainder samples k dt for k in [lo, hi), (n_v, n_d, n_p, hi - lo); hi <= n // 2 + 1. out: where to
        write them (a view of the caller's array), else a new array."""
        lowpass = lowpass_fraction(dt, self.t_edge)
        window = n * dt
        f = np.arange(n // 2 + 1) / window
        s = DAMPING / window + 2j * np.pi * f
        weight = np.exp(-0.5 * (f * 2.0 * dt / lowpass) ** 2)
        edges, edge_of = np.unique(self.t_edges, return_inverse=True)
        x_edge = np.stack([edge_spectrum(s, self.v_oc, t) * weight for t in edges])[edge_of.ravel()]  # (n_v, n_s)
        k = np.arange(lo, hi)
        blur_s = dt / (np.pi * lowpass)  # the low-pass of the damped signal also scales it by exp((c blur)^2 / 2)
        gain = np.exp(DAMPING * k / n - 0.5 * (DAMPING / window * blur_s) ** 2) / dt
        n_v, n_p = self.t_edges.size, len(self.points.probes)
        out = np.empty((n_v, len(self.names), n_p, hi - lo)) if out is None else out
        per_pass = max(1, SPECTRUM_BUDGET_VALUES // max(1, s.size * n_p * n_v))
        for d0 in range(0, len(self.names), per_pass):
            group = self.names[d0 : d0 + per_pass]
            spectra = np.empty((n_v, len(group), n_p, s.size), dtype=complex)
            for p0 in range(0, s.size, self.points_per_solve):
                part = slice(p0, p0 + self.points_per_solve)
                net = solve_network(self.bus, s[part], self.topo, group, self.variants, self.kinds)
                spectra[..., part] = probe_spectra(net, group, self.points, advanced=True)[self.network_of]
            spectra -= self.front[:, d0 : d0 + len(group), :, None]
            spectra *= x_edge[:, None, None, :]
            # a few probes at a time: the transform's full window of samples is held for those only
            per_block = max(1, SPECTRUM_BUDGET_VALUES // (n * n_v * len(group)))
            for p0 in range(0, n_p, per_block):
                block = slice(p0, p0 + per_block)
                out[:, d0 : d0 + len(group), block] = (
                    np.fft.irfft(spectra[:, :, block], n=n, axis=-1)[..., lo:hi] * gain
                )
        return out

    def total(self, remainder: np.ndarray, u_s: np.ndarray) -> np.ndarray:
        return np.asarray(remainder + self._front_ramp(u_s))

    def add_front(self, remainder: np.ndarray, u_s: np.ndarray) -> None:
        """total() in place."""
        remainder += self._front_ramp(u_s)

    def _front_ramp(self, u_s: np.ndarray) -> np.ndarray:
        ramp = np.clip(u_s[None, :] / self.t_edges[:, None], 0.0, 1.0)  # (n_v, n_t)
        return np.asarray(self.v_oc * self.front[..., None] * ramp[:, None, None, :])


def _blur_s(dt_s: float, t_edge_s: float) -> float:
    """Width (standard deviation, s) of the Gaussian blur of a level of spacing dt_s."""
    return dt_s / (np.pi * lowpass_fraction(dt_s, t_edge_s))


def _bend(x: np.ndarray, dt_s: float, dt_read_s: float) -> np.ndarray:
    """Linear-interpolation error at spacing dt_read_s of samples x spaced dt_s: dt_read^2 |x''| / 8, x'' from the
    means of neighbouring samples (the transform leaves a faint alternation at the Nyquist frequency, the
    low-pass not being zero there, which carries no waveform but would dominate every second difference)."""
    pairs = 0.5 * (x[..., 1:] + x[..., :-1])
    out = np.zeros(x.shape)
    out[..., 1:-2] = np.abs(pairs[..., 2:] - 2.0 * pairs[..., 1:-1] + pairs[..., :-2]) / dt_s**2
    return np.asarray(out * dt_read_s**2 / 8.0)


def _coarsening_error(x: np.ndarray, dt_s: float, extra_blur_s: float, dt_read_s: float) -> np.ndarray:
    """What a level of spacing dt_read_s, blurring extra_blur_s more than these samples, would get wrong here:
    |x - G * x| + its interpolation error. The Gaussian is applied to the samples (edges held)."""
    out = _bend(x, dt_s, dt_read_s)
    if extra_blur_s <= 0.0:
        return out
    half = int(np.ceil(4.0 * extra_blur_s / dt_s))
    n = _fft_size(x.shape[-1] + 2 * half, 2)  # the right edge is held the longer, to a fast transform length
    right = n - half - x.shape[-1]
    padded = np.concatenate([np.repeat(x[..., :1], half, -1), x, np.repeat(x[..., -1:], right, -1)], axis=-1)
    f = np.fft.rfftfreq(n, dt_s)
    smooth = np.fft.irfft(np.fft.rfft(padded, axis=-1) * np.exp(-2.0 * (np.pi * f * extra_blur_s) ** 2), n=n, axis=-1)
    return np.asarray(out + np.abs(x - smooth[..., half : half + x.shape[-1]]))


def _relative(error_v: np.ndarray, ptp: np.ndarray) -> np.ndarray:
    """Worst over drivers and probes of an error relative to each probe's peak-to-peak, (n_t,)."""
    return np.asarray((error_v / ptp[..., None]).max(axis=(0, 1)))


def _worst_relative_per_time(error: Callable[[np.ndarray], np.ndarray], x: np.ndarray, ptp: np.ndarray) -> np.ndarray:
    """_relative(error(x), ptp), (n_t,), worked out a block of probes at a time (SPECTRUM_BUDGET_VALUES), so the
    error's transforms and temporaries hold those probes only."""
    per_block = max(1, SPECTRUM_BUDGET_VALUES // max(1, x.shape[-1]))
    worst = np.zeros(x.shape[-1])
    for d in range(x.shape[0]):
        for p0 in range(0, x.shape[1], per_block):
            block = (slice(d, d + 1), slice(p0, p0 + per_block))
            np.maximum(worst, _relative(error(x[block]), ptp[block]), out=worst)
    return worst


def _finer_levels(
    levels: _Levels, x: np.ndarray, dt0: float, dt_min: float, ptp: np.ndarray, budget: int
) -> tuple[list[tuple[float, int, np.ndarray]], float]:
    """Levels finer than the first one, each up to one T_e past the last time the coarser one errs by more than
    ACCURACY; returns them (local times, values; finest last) and the last local time any level still erred.

    The first level's own error is what doubling its blur changes (a corner's blur error is proportional to the
    blur); each finer level's, its change from the coarser one (what is left after halving dt is at most the
    change it made). Either change is seen only at samples, which can straddle a corner by half a sample, where
    it has fallen to 0.55 of its peak for Gaussian blurs sigma and 2 sigma: hence twice the change seen; plus
    the level's own interpolation error."""
    t_edge = levels.t_edge
    fine: list[tuple[float, int, np.ndarray]] = []
    blur = np.sqrt(3.0) * _blur_s(dt0, t_edge)

    def first_level_error(xb: np.ndarray) -> np.ndarray:
        bend = _bend(xb, dt0, dt0)
        return np.asarray(2.0 * (_coarsening_error(xb, dt0, blur, dt0) - bend) + bend)

    need = _worst_relative_per_time(first_level_error, x, ptp) > ACCURACY
    dt, need_t, coarse_x = dt0, np.arange(x.shape[-1]) * dt0, x
    busy_until = float(need_t[np.flatnonzero(need)[-1]]) if need.any() else 0.0
    while need.any() and dt > dt_min * (1.0 + 1e-9):
        end = min(float(need_t[np.flatnonzero(need)[-1]]) + t_edge, (coarse_x.shape[-1] - 1) * dt)
        hi = int(np.floor(end / (dt / 2.0) + 1e-9)) + 1
        if hi > budget // 2:
            break
        dt /= 2.0
        n = _fft_size(2.0 * (hi - 1), MIN_SAMPLES)
        xf = levels.remainder(dt, n, 0, hi)[0]
        uf = np.arange(hi) * dt
        fine.append((dt, n, levels.total(xf[None], uf)[0]))
        change = 2.0 * np.abs(xf[..., ::2] - coarse_x[..., : (hi + 1) // 2])
        bend = _bend(xf, dt, dt)
        odd = np.zeros(change.shape)
        odd[..., : bend[..., 1::2].shape[-1]] = bend[..., 1::2]
        need = _relative(change + np.maximum(bend[..., ::2], odd), ptp) > ACCURACY
        need_t, coarse_x = uf[::2], xf
        busy_until = max(busy_until, float(need_t[np.flatnonzero(need)[-1]]) if need.any() else 0.0)
    return fine, busy_until


def _sharp_for_s(bus: Bus, t_edge_s: float) -> float:
    """How long a wave stays as sharp as the driver's edge: until the cable has attenuated the edge's main
    frequency 1 / T_e to ACCURACY (every wave reaching a probe at local time u has run at least u v of cable past
    the direct path); unbounded on a cable without frequency-dependent loss."""
    alpha = float(propagation_constant_per_m(bus.cable, 1.0 / t_edge_s)[0].real)
    dc_alpha = float(propagation_constant_per_m(bus.cable, 1e-3 / t_edge_s)[0].real)
    dispersive = bus.cable.skin_effect_onset_hz is not None or bus.cable.dielectric_loss_tangent > 0.0
    if not dispersive or alpha <= dc_alpha:
        return float("inf")
    return SHARP_NEPERS / (alpha * propagation_velocity_m_per_s(bus.cable.velocity_factor))


def _fft_size(n: float, floor: int) -> int:
    """The smallest even size of the form 2^a 3^b 5^c (fast for the FFT) at least n, and at least floor."""
    target = max(floor, int(np.ceil(n)))
    best = 1 << int(np.ceil(np.log2(target)))
    for three in (1, 3, 9, 27):
        for five in (1, 5, 25):
            base = three * five
            size = base * (1 << max(1, int(np.ceil(np.log2(target / base)))))
            if size >= target:
                best = min(best, size)
    return best


def step_responses(
    bus: Bus,
    driver_names: "tuple[str, ...] | list[str] | None" = None,
    *,
    max_time_s: float | None = None,
    tolerance: float = 1e-3,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
    probes: "tuple[Probe, ...] | list[Probe] | None" = None,
) -> StepResponses:
    """Edge response at every probe for each driver; method in the module docstring.

    Probes: `probes` if given, else the named receivers, else every plan node (receiver input), in plan order.
    max_time_s: stop once this span of local time is covered even if not settled (None: go on until settled).
    tolerance: settled when within tolerance * open_circuit_v of the DC level over a level's second half.
    Only the probes' spectra and transforms are computed; the whole bus is always solved.
    """
    names = resolve_driver_names(bus, driver_names)
    if max_time_s is not None and not (np.isfinite(max_time_s) and max_time_s > 0):
        raise BusInputError(
            [
                Problem(
                    "max_time_s",
                    "Simulated time",
                    max_time_s,
                    {"min": 0.0, "min_exclusive": True, "unit": "s"},
                    f"The simulated time must be a finite positive number of seconds; got {max_time_s}.",
                )
            ]
        )
    chosen = _chosen_probes(bus, receiver_names, probes)
    junctions = [p.position_m for p in chosen if p.kind == "junction" and p.position_m is not None]
    topo = build_topology(bus, junctions)
    points = probe_points(bus, topo, chosen)
    v_oc = bus.driver.open_circuit_v
    t_edge = edge_duration_s(bus.driver.rise_time_s)
    kinds = branching(topo, nominal_variant(bus, topo))  # shared by every solve below
    dt_min = t_edge / MAX_SAMPLES_PER_EDGE
    ends = settled_and_front(bus, topo, names, points, np.pi * FINE_LOWPASS / dt_min, kinds=kinds)
    v_final, start, front = v_oc * ends.settled[0], ends.delay_s[0], ends.front
    levels = _Levels(bus, topo, names, points, front, np.array([t_edge]), t_edge, kinds)

    horizon = t_edge + 6.0 * longest_delay_s(bus)  # settled is only declared past this
    round_trip = t_edge + 2.0 * longest_delay_s(bus)
    budget = max(MIN_SAMPLES, MAX_LEVEL_VALUES // max(1, len(names) * len(chosen)))
    # 1-2. first level and its finer levels, doubled while they still need a finer grid in the last round trip;
    # it spans two round trips, or less where the cable itself rounds every edge sooner
    dt0 = t_edge / FIRST_SAMPLES_PER_EDGE
    quiet_s = min(round_trip, _sharp_for_s(bus, t_edge))  # a later wave arrives within this, or rounded
    n0 = _fft_size(2.0 * (quiet_s + 8.0 * t_edge) / dt0, FIRST_MIN_SAMPLES)
    while True:
        u = np.arange(n0 // 2 + 1) * dt0
        x = levels.remainder(dt0, n0, 0, u.size)[0]
        v = levels.total(x[None], u)[0]
        ptp = np.maximum(np.maximum(v.max(axis=-1), v_final) - np.minimum(v.min(axis=-1), 0.0), PTP_FLOOR * v_oc)
        fine, busy_until = _finer_levels(levels, x, dt0, dt_min, ptp, budget)
        covered = max_time_s is not None and u[-1] >= max_time_s
        if busy_until < u[-1] - quiet_s or covered or 2 * n0 > budget:
            break
        n0 *= 2
    used: list[tuple[float, int, int, int]] = []  # (dt, N, first, end) of the samples kept, in time order
    values = []
    k_next = 0.0  # local time the next level's samples start after
    for dt_f, n_f, vf in [*reversed(fine), (dt0, n0, v)]:
        first = int(np.floor(k_next / dt_f + 1e-9)) + 1 if used else 0
        if first < vf.shape[-1]:
            used.append((dt_f, n_f, first, vf.shape[-1]))
            values.append(vf[..., first:])
            k_next = (vf.shape[-1] - 1) * dt_f

    # 3. later levels, each TAIL_FACTOR x longer and as coarse as the previous level's last quiet span allows
    end, dt = float(u[-1]), dt0
    settled = end >= horizon and _flat(v[..., u.size // 2 :], v_final, tolerance * v_oc)
    for _ in range(MAX_LATER_LEVELS):
        if settled or (max_time_s is not None and end >= max_time_s):
            break
        late = u >= end - quiet_s
        dt_next = 2.0 * TAIL_FACTOR * end / LATER_SAMPLES
        while dt_next > dt * (1.0 + 1e-9):
            extra = np.sqrt(max(_blur_s(dt_next, t_edge) ** 2 - _blur_s(dt, t_edge) ** 2, 0.0))
            coarsened = partial(_coarsening_error, dt_s=dt, extra_blur_s=extra, dt_read_s=dt_next)
            coarser = _worst_relative_per_time(coarsened, x[..., late], ptp)
            if coarser.max(initial=0.0) <= ACCURACY:
                break
            dt_next /= 2.0
        # at least doubling the span within the memory budget, even where that is coarser than the check asked
        dt_next = max(dt_next, dt, 4.0 * end / budget)
        new_end = min(TAIL_FACTOR * end, 0.5 * budget * dt_next)
        n = _fft_size(2.0 * new_end / dt_next, MIN_SAMPLES)
        lo, hi = int(np.floor(end / dt_next)) + 1, int(np.floor(new_end / dt_next + 1e-9)) + 1
        u = np.arange(lo, hi) * dt_next
        x = levels.remainder(dt_next, n, lo, hi)[0]
        v = levels.total(x[None], u)[0]
        used.append((dt_next, n, lo, hi))
        values.append(v)
        end, dt = float(u[-1]), dt_next
        settled = end >= horizon and _flat(v[..., u.size // 2 :], v_final, tolerance * v_oc)
    return StepResponses(
        time_s=_grid_times(used),
        start_s=start,
        driver_names=names,
        receiver_names=tuple(p.name for p in chosen),
        probes=tuple(chosen),
        v_diff_v=np.concatenate(values, axis=-1),
        v_final_v=v_final,
        front_v=v_oc * front[0],
        open_circuit_v=v_oc,
        rise_time_s=bus.driver.rise_time_s,
        settled=bool(settled),
        levels=tuple(used),
    )


def _grid_times(levels: "list[tuple[float, int, int, int]] | tuple[tuple[float, int, int, int], ...]") -> np.ndarray:
    return np.concatenate([np.arange(first, end) * dt for dt, _, first, end in levels])


def grid_index(levels: "tuple[tuple[float, int, int, int], ...]", time_s: np.ndarray) -> np.ndarray:
    """Per local time, the index of the last sample of the grid `levels` makes (StepResponses.levels) at or before
    it, clipped to [0, n_t - 2]: np.searchsorted(time_s, t, "right") - 1 on that grid, worked out from each level's
    spacing instead of searched (a level's samples are k dt, k = first .. end - 1; a time on a sample may land
    on the one before it, with interpolation weight 1)."""
    dt = np.array([lv[0] for lv in levels])
    first = np.array([lv[2] for lv in levels])
    count = np.array([lv[3] - lv[2] for lv in levels])
    offset = np.concatenate([[0], np.cumsum(count)[:-1]])
    level = np.clip(np.searchsorted(first * dt, time_s, side="right") - 1, 0, dt.size - 1)
    within = np.clip(np.floor(time_s / dt[level]) - first[level], 0, count[level] - 1)
    return np.asarray(np.clip(offset[level] + within.astype(np.int64), 0, int(count.sum()) - 2))


def variant_step_responses(
    bus: Bus,
    grid: StepResponses,
    variants: NetworkVariants,
    network_of: np.ndarray,
    rise_times_s: np.ndarray,
) -> StepResponses:
    """The edge responses of n_v variants of the bus on the grid another run chose (grid.levels), in one batch.

    variants: distinct networks of the same layout; network_of (n_v,) picks each variant's network and
    rise_times_s (n_v,) its driver edge. The grid should come from the sharpest variant (the fastest edge).
    The grid's first driver drives. Returns one StepResponses whose probes are variant-major: probe i of variant v
    is row v * n_probes + i (labelled "v:name"); settled as the grid run was.
    """
    chosen = list(grid.probes)
    junctions = [p.position_m for p in chosen if p.kind == "junction" and p.position_m is not None]
    topo = build_topology(bus, junctions)
    points = probe_points(bus, topo, chosen)
    names = grid.driver_names[:1]
    v_oc = bus.driver.open_circuit_v
    t_edges = np.asarray(rise_times_s, dtype=float) / 0.8
    grid_edge = edge_duration_s(grid.rise_time_s)
    kinds = branching(topo, variants)  # shared by every solve below
    dt_min = grid_edge / MAX_SAMPLES_PER_EDGE
    ends = settled_and_front(bus, topo, names, points, np.pi * FINE_LOWPASS / dt_min, variants, kinds)
    v_final = v_oc * ends.settled[network_of]  # (n_v, 1, n_p)
    start, front = ends.delay_s[network_of], ends.front[network_of]
    levels = _Levels(bus, topo, names, points, front, t_edges, grid_edge, kinds, variants, network_of)
    n_v, n_p = t_edges.size, len(chosen)
    values = np.empty((n_v, 1, n_p, sum(end - first for _, _, first, end in grid.levels)))  # (n_v, 1, n_p, n_t)
    at = 0
    for dt, n, first, end in grid.levels:  # each level written in place: no second copy of the whole
        level = values[..., at : at + end - first]
        levels.remainder(dt, n, first, end, out=level)
        levels.add_front(level, np.arange(first, end) * dt)
        at += end - first
    return replace(
        grid,
        time_s=_grid_times(grid.levels),
        start_s=start.reshape(1, n_v * n_p),
        driver_names=names,
        receiver_names=tuple(f"{v}:{p.name}" for v in range(n_v) for p in chosen),
        probes=tuple(chosen) * n_v,
        v_diff_v=values.reshape(1, n_v * n_p, -1),
        v_final_v=v_final.reshape(1, n_v * n_p),
        front_v=v_oc * front.reshape(1, n_v * n_p),
    )


def _flat(v: np.ndarray, v_final: np.ndarray, tol_v: float) -> bool:
    return bool(np.max(np.abs(v - v_final[..., None]), initial=0.0) <= tol_v)


def _chosen_probes(
    bus: Bus, receiver_names: "tuple[str, ...] | list[str] | None", probes: "tuple[Probe, ...] | list[Probe] | None"
) -> list[Probe]:
    if probes is not None:
        return list(probes)
    all_names = [n.name for n in bus.plan.nodes]
    if receiver_names is None:
        return [node_probe(n) for n in all_names]
    require_known_receivers(receiver_names, all_names, "a node of this bus", "nodes")
    return [node_probe(n) for n in receiver_names]


def require_known_receivers(wanted: Sequence[str], known: Sequence[str], what: str, plural: str) -> None:
    """Raise BusInputError naming the first wanted receiver that is not among the known names."""
    unknown = [n for n in wanted if n not in known]
    if unknown:
        raise BusInputError(
            [
                Problem(
                    "receiver_names",
                    "Receivers",
                    unknown[0],
                    {"choices": list(known)},
                    f"'{unknown[0]}' is not {what}; {plural} are {', '.join(known)}.",
                )
            ]
        )
