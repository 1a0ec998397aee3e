"""Time-domain waveforms at every receiver: the edge (step) response, then any bit pattern by superposition.

The bus is linear and time-invariant, so one rising edge describes it completely. The driver edge is a linear
ramp from 0 to open_circuit_v whose 10-90 % time is rise_time_s (0-100 % lasts T_e = rise_time_s / 0.8); its
Laplace transform is E(s) = V (1 - exp(-s T_e)) / (s^2 T_e).

Step response by a multi-resolution damped Fourier inversion (numerical inverse Laplace transform):
level l uses N samples spaced dt_l = dt_0 * 4^l (dt_0 = T_e / 32) over a window T_l = N dt_l, evaluates the
bus at s_k = sigma_l + j 2 pi k / T_l with sigma_l T_l = ln(1e8), and inverts with one real FFT:
x(n dt) = exp(sigma n dt) * irfft(X(s_k) W_k) / dt. The damping makes the response's own tail (which never
decays: it settles at the DC level) vanish before it wraps around, so the first half of each window is
accurate to about 1e-8 of the swing; W_k is a Gaussian low-pass (sigma_f = Nyquist / 5) so nothing aliases.
Level 0 covers [0, T_0/2], level l the span (T_{l-1}/2, T_l/2]: the grid is dense at the edge and widens as
the response slows down, and levels are added until every receiver has settled within `tolerance` of its DC
level (from the exact DC solve) or the requested horizon is covered. After that the response *is* its DC level.
Source: the method is the numerical Laplace transform of L. M. Wedepohl, "Power system transients: errors
incurred in the numerical inversion of the Laplace transform", Proc. 26th Midwest Symposium on Circuits and
Systems (1983); see also P. Moreno, A. Ramirez, "Implementation of the numerical Laplace transform: a review",
IEEE Trans. Power Delivery 23 (2008).

A bit pattern then costs no further solve: with bit b_n in {0, 1} driven as -V / +V, the waveform is
v(t) = v_final * (2 b_{-1} - 1) + sum_n (b_n - b_{n-1}) * 2 * step(t - n T_bit), evaluated per bit window at
offsets that are dense near the bit start (where the edges and their early echoes are) and at mid-bit.
"""

from dataclasses import dataclass

import numpy as np

from engine.bus import Bus
from engine.line import propagation_constant_per_m
from engine.solve import build_topology, driver_transfer, resolve_driver_names, solve_network
from engine.units import delay_s, propagation_velocity_m_per_s

SAMPLES_PER_LEVEL = 1024  # N, a power of two
LEVEL_FACTOR = 4  # dt grows by this from one level to the next
SAMPLES_PER_EDGE = 32  # dt_0 = T_e / SAMPLES_PER_EDGE
KEEP_EVERY = 4  # stored samples: every 4th of the transform grid (T_e / 8 at the edge)
DAMPING = float(np.log(1e8))  # sigma_l * T_l
LOWPASS_FRACTION = 0.2  # Gaussian sigma_f as a fraction of the Nyquist frequency
MAX_LEVELS = 28
MAX_FIRST_LEVEL = 16384  # samples of level 0 at most
MEMORY_BUDGET_COMPLEX = 4_000_000  # transfer values held at once (drivers are processed in chunks)


@dataclass(frozen=True, slots=True)
class StepResponses:
    """Response of every receiver to one rising driver edge 0 -> open_circuit_v.

    time_s is non-uniform (dense at the edge, sparser later) and starts at 0, the start of the edge ramp.
    After time_s[-1] each response equals v_final_v (exactly, from the DC solve) when `settled` is true.
    """

    time_s: np.ndarray  # (n_t,)
    driver_names: tuple[str, ...]
    receiver_names: tuple[str, ...]
    v_diff_v: np.ndarray  # (n_drivers, n_receivers, n_t)
    v_final_v: np.ndarray  # (n_drivers, n_receivers) settled level from the DC solve
    open_circuit_v: float
    rise_time_s: float  # 10-90 % of the driver ramp
    settled: bool


def edge_duration_s(rise_time_s: float) -> float:
    """0-100 % duration of the linear ramp whose 10-90 % time is rise_time_s: T_e = t_r / 0.8."""
    return rise_time_s / 0.8


def longest_delay_s(bus: Bus) -> float:
    """One-way delay of the trunk plus the longest stub twice: an upper bound on any single path."""
    plan = bus.plan
    stubs = [n.stub_length_m for n in plan.nodes] + [plan.driver.stub_length_m]
    return delay_s(plan.trunk_length_m + 2.0 * max(stubs), bus.cable.velocity_factor)


def step_responses(
    bus: Bus,
    driver_names: "tuple[str, ...] | list[str] | None" = None,
    *,
    max_time_s: float | None = None,
    tolerance: float = 1e-4,
) -> StepResponses:
    """Step (edge) response at every receiver for each driver; see the module docstring for the method.

    max_time_s: stop once this span is covered even if not settled (None: go on until settled).
    tolerance: settled when within tolerance * open_circuit_v of the DC level over the last level's span.
    """
    names = resolve_driver_names(bus, driver_names)
    topo = build_topology(bus)
    v_oc = bus.driver.open_circuit_v
    t_edge = edge_duration_s(bus.driver.rise_time_s)
    n_rx = topo.receiver_branch.size
    v_final = v_oc * driver_transfer(solve_network(bus, np.zeros(1), topo), names)[:, 0, :].real
    t_min = t_edge + 6.0 * longest_delay_s(bus)
    if max_time_s is not None:
        t_min = min(t_min, max_time_s)
    schedule = _level_schedule(bus, t_edge, t_min)

    ring_period_s = t_edge + 2.0 * delay_s(bus.plan.trunk_length_m, bus.cable.velocity_factor)
    times: list[np.ndarray] = []
    values: list[np.ndarray] = []
    settled = stop = False
    level = 0
    batch = 1 + next((i for i, (dt, n, _) in enumerate(schedule) if n * dt / 2.0 >= t_min), len(schedule) - 1)
    while level < len(schedule):
        levels = schedule[level : level + batch]
        grids = [_level_grid(dt, n) for dt, n, _ in levels]
        bounds = np.cumsum([0] + [g[0].size for g in grids])
        s_all = np.concatenate([g[0] for g in grids])
        x_all = _edge_spectrum(s_all, v_oc, t_edge) * np.concatenate([g[1] for g in grids])
        net = solve_network(bus, s_all, topo)
        kept = [np.arange(first + (-first) % KEEP_EVERY, n // 2 + 1, KEEP_EVERY) for _, n, first in levels]
        level_values = [np.empty((len(names), n_rx, k.size)) for k in kept]
        for i, (dt, n, _) in enumerate(levels):
            rows = slice(bounds[i], bounds[i + 1])
            sigma = DAMPING / (n * dt)
            blur_s = dt / (np.pi * LOWPASS_FRACTION)  # Gaussian time width of the low-pass
            gain = np.exp(sigma * kept[i] * dt - 0.5 * (sigma * blur_s) ** 2) / dt
            chunk = max(1, MEMORY_BUDGET_COMPLEX // max(1, (n // 2 + 1) * n_rx))
            for start in range(0, len(names), chunk):
                h = driver_transfer(net, names[start : start + chunk], rows) * x_all[rows, None]
                x_t = np.fft.irfft(np.swapaxes(h, 1, 2), n=n, axis=-1)[..., kept[i]]
                level_values[i][start : start + chunk] = x_t * gain
        for i, (dt, _, _) in enumerate(levels):
            t = kept[i] * dt
            v = level_values[i]
            times.append(t)
            values.append(v)
            level += 1
            tail = v[..., v.shape[-1] // 2 :]
            if t[-1] >= t_min and np.max(np.abs(tail - v_final[..., None]), initial=0.0) <= tolerance * v_oc:
                # a flat tail only proves settling while the level still resolves the trunk's ringing
                settled = dt / (np.pi * LOWPASS_FRACTION) <= ring_period_s / 8.0
                stop = True
                break
            if max_time_s is not None and t[-1] >= max_time_s:
                stop = True
                break
        if stop:
            break
        batch = 2
    return StepResponses(
        time_s=np.concatenate(times),
        driver_names=names,
        receiver_names=topo.receiver_names,
        v_diff_v=np.concatenate(values, axis=-1),
        v_final_v=v_final,
        open_circuit_v=v_oc,
        rise_time_s=bus.driver.rise_time_s,
        settled=settled,
    )


def _level_schedule(bus: Bus, t_edge_s: float, t_min_s: float) -> list[tuple[float, int, int]]:
    """(dt, N, first index used) of every level. Level 0 resolves the edge (dt_0 = T_e / 32) and is long enough
    to keep edges sharp while the cable has not yet dispersed them: up to 3 / (alpha(1/T_e) v), the time in
    which the cable attenuates the edge's main frequency by 3 Np (capped by the minimum horizon and by
    MAX_FIRST_LEVEL samples). Each later level spans 4x the previous end with the same N."""
    dt0 = t_edge_s / SAMPLES_PER_EDGE
    alpha = float(propagation_constant_per_m(bus.cable, 1.0 / t_edge_s)[0].real)
    speed = propagation_velocity_m_per_s(bus.cable.velocity_factor)
    t_sharp = t_min_s if alpha <= 0.0 else min(t_min_s, 3.0 / (alpha * speed))
    n0 = SAMPLES_PER_LEVEL
    while n0 * dt0 / 2.0 < t_sharp and n0 < MAX_FIRST_LEVEL:
        n0 *= 2
    schedule = [(dt0, n0, 0)]
    end = n0 * dt0 / 2.0
    n = n0  # later levels keep level 0's sample count, so a sharp edge stays as sharp relative to elapsed time
    for _ in range(MAX_LEVELS - 1):
        dt = end * 2.0 * LEVEL_FACTOR / n
        schedule.append((dt, n, n // (2 * LEVEL_FACTOR) + 1))
        end = n * dt / 2.0
    return schedule


def _level_grid(dt_s: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Laplace points, spacing and low-pass weights of one level: s_k = sigma + j 2 pi k / (n dt)."""
    window_s = n * dt_s
    k = np.arange(n // 2 + 1)
    f = k / window_s
    s = DAMPING / window_s + 2j * np.pi * f
    f_nyquist = 0.5 / dt_s
    weight = np.exp(-0.5 * (f / (LOWPASS_FRACTION * f_nyquist)) ** 2)
    return s, weight


def _edge_spectrum(s: np.ndarray, v_oc: float, t_edge_s: float) -> np.ndarray:
    """Laplace transform of the ramp 0 -> v_oc over t_edge_s: v_oc (1 - exp(-s T)) / (s^2 T)."""
    return -v_oc * np.expm1(-s * t_edge_s) / (s * s * t_edge_s)
