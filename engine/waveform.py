"""Time-domain waveforms at every receiver: the edge (step) response, then any bit pattern by superposition.

The bus is linear and time-invariant, so one rising edge describes it completely. The driver edge is a linear
ramp from 0 to open_circuit_v whose 10-90 % time is rise_time_s (0-100 % lasts T_e = rise_time_s / 0.8); its
Laplace transform is E(s) = V (1 - exp(-s T_e)) / (s^2 T_e).

Step response by a multi-resolution damped Fourier inversion (numerical inverse Laplace transform):
level l uses N_l samples spaced dt_l over a window T_l = N_l dt_l, evaluates the bus at
s_k = sigma_l + j 2 pi k / T_l with sigma_l T_l = ln(1e8), and inverts with one real FFT:
x(n dt) = exp(sigma n dt) * irfft(X(s_k) W_k) / dt. The damping makes the response's own tail (which never
decays: it settles at the DC level) vanish before it wraps around, so the first half of each window is
accurate to about 1e-4 of the swing; W_k is a Gaussian low-pass (sigma_f = 0.2 Nyquist; 0.5 at level 0,
where the ramp itself is resolved) so nothing aliases. It rounds the ramp's corners by under 2 % of the swing
where the bare ramp is seen (the driver's own terminal; a Gaussian of 0.04 T_e at level 0), well under 1 % at
receivers behind any cable; later levels blur by 1.6 dt_l, under 1 % of the elapsed time, which a real
(dispersive) cable's own edges outgrow.
Level 0 has dt_0 = T_e / 16 and covers [0, T_0/2] for as long as the cable keeps edges sharp (until it has
attenuated the edge's main frequency 1/T_e by 3 Np; the whole minimum horizon on a nearly lossless line);
level 1 covers (T_0/2, T_1/2] = 2x the previous end with dt_1 = T_e / 8, so edges reflected late on a nearly
lossless line are still resolved, and each later level 4x the previous end. The grid is dense at the edge and widens as
the response slows down. Levels are added until every receiver is within `tolerance` of its DC level (from
the exact DC solve) over the last level's second half, or the requested horizon is covered. The response is
called settled only if that level still resolves the trunk's ringing period, or a level that did saw the
ringing die out (coarse levels can average away an undamped oscillation but not a slow smooth tail).
Source: the method is the numerical Laplace transform of L. M. Wedepohl, "Power system transients: errors
incurred in the numerical inversion of the Laplace transform", Proc. 26th Midwest Symposium on Circuits and
Systems (1983); see also P. Moreno, A. Ramirez, "Implementation of the numerical Laplace transform: a review",
IEEE Trans. Power Delivery 23 (2008).

A bit pattern then costs no further solve. Bits b_n in {0, 1} are driven as -V / +V, the ramp of bit n
starting at n T_bit, the line at rest at the first bit's level before t = 0. With D(t) = step(t) - v_final
(zero once settled):
v(n T_bit + u) = v_final (2 b_n - 1) + sum_{m >= 0} 2 (b_{n-m} - b_{n-m-1}) D(m T_bit + u).
That is a convolution along the bit index, done as one matrix product per receiver block, at offsets u
within a bit chosen adaptively: start from the step response's own grid inside one bit and keep a point
wherever linear interpolation between its neighbours would miss any receiver's waveform by more than
0.2 % of the open-circuit swing, plus mid-bit (the sampling instant) and a uniform 32 per bit.
"""

from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.line import propagation_constant_per_m
from pairline.engine.plan import BusInputError, Problem
from pairline.engine.solve import build_topology, receiver_spectra, resolve_driver_names, solve_network
from pairline.engine.units import delay_s, propagation_velocity_m_per_s

SAMPLES_PER_LEVEL = 1024  # N of level 0 at least, a power of two
LEVEL_FACTOR = 4  # dt grows by this from one level to the next
FIRST_LEVEL_FACTOR = 2  # ... except from level 0 to level 1
SAMPLES_PER_EDGE = 16  # dt_0 = T_e / SAMPLES_PER_EDGE
KEEP_EVERY = 2  # stored samples: every 2nd of the transform grid (T_e / 8 at the edge)
DAMPING = float(np.log(1e8))  # sigma_l * T_l
LOWPASS_FRACTION = 0.2  # Gaussian sigma_f as a fraction of the Nyquist frequency
FIRST_LOWPASS_FRACTION = 0.5  # level 0, where the ramp itself is resolved and barely reaches Nyquist
MAX_LEVELS = 28
MAX_FIRST_LEVEL = 16384  # samples of level 0 at most
MEMORY_BUDGET_COMPLEX = 2_000_000  # receiver spectra held at once (drivers are processed in groups)
NETWORK_BUDGET_VALUES = 4_000_000  # junction/branch x Laplace-point values per network solve
LATER_LEVEL_SAMPLES = 2048  # N of levels after the first once the cable has dispersed the edge


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
    tolerance: float = 1e-3,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
) -> StepResponses:
    """Step (edge) response at every receiver (or the named ones) for each driver; method in the module docstring.

    max_time_s: stop once this span is covered even if not settled (None: go on until settled).
    tolerance: settled when within tolerance * open_circuit_v of the DC level over the last level's span.
    receiver_names: only these receivers' spectra and transforms are computed (the whole bus is still solved);
    None = every receiver, in plan node order.
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
    topo = build_topology(bus)
    rx_index = None if receiver_names is None else _receiver_index(topo.receiver_names, receiver_names)
    v_oc = bus.driver.open_circuit_v
    t_edge = edge_duration_s(bus.driver.rise_time_s)
    n_rx = topo.receiver_branch.size if rx_index is None else rx_index.size
    v_final = v_oc * receiver_spectra(solve_network(bus, np.zeros(1), topo, names), names, rx_index)[..., 0].real
    t_min = t_edge + 6.0 * longest_delay_s(bus)
    if max_time_s is not None:
        t_min = min(t_min, max_time_s)
    schedule = _level_schedule(bus, t_edge, t_min)
    ring_period_s = t_edge + 2.0 * delay_s(bus.plan.trunk_length_m, bus.cable.velocity_factor)
    # Laplace points per network solve, and drivers per transform, so that working arrays stay bounded
    points = max(64, NETWORK_BUDGET_VALUES // (5 * topo.junction_position_m.size + 3 * topo.branch_stub_m.size))

    times: list[np.ndarray] = []
    values: list[np.ndarray] = []
    settled = ringing_over = False
    for level, (dt, n, first) in enumerate(schedule):
        lowpass = _lowpass_fraction(level)
        s_level, weight = _level_grid(dt, n, lowpass)
        x_level = _edge_spectrum(s_level, v_oc, t_edge) * weight
        kept = np.arange(first + (-first) % KEEP_EVERY, n // 2 + 1, KEEP_EVERY)
        sigma = DAMPING / (n * dt)
        blur_s = dt / (np.pi * lowpass)  # Gaussian time width of the low-pass
        span = np.arange(n // 2 + 1)
        gain = np.exp(sigma * span * dt - 0.5 * (sigma * blur_s) ** 2) / dt
        resolves_ringing = blur_s <= ring_period_s / 8.0
        half_period = max(1, int(round(0.5 * ring_period_s / dt)))
        ring_v = 0.0
        v = np.empty((len(names), n_rx, kept.size))
        drivers_per_pass = max(1, MEMORY_BUDGET_COMPLEX // max(1, s_level.size * n_rx))
        for d0 in range(0, len(names), drivers_per_pass):
            group = names[d0 : d0 + drivers_per_pass]
            spectra = np.empty((len(group), n_rx, s_level.size), dtype=complex)
            for p0 in range(0, s_level.size, points):
                part = slice(p0, p0 + points)
                spectra[..., part] = receiver_spectra(solve_network(bus, s_level[part], topo, group), group, rx_index)
            spectra *= x_level
            x_raw = np.fft.irfft(spectra, n=n, axis=-1)  # undamped; the gain is applied only where read
            v[d0 : d0 + len(group)] = x_raw[..., kept] * gain[kept]
            if resolves_ringing and 4 * half_period < span.size:
                # oscillation left in the level's last quarter: half a trunk period's second difference
                first_late = 3 * span.size // 4 - 2 * half_period
                late = x_raw[..., first_late : span.size] * gain[first_late:]
                wobble = late[..., half_period:-half_period] - 0.5 * (
                    late[..., : -2 * half_period] + late[..., 2 * half_period :]
                )
                ring_v = max(ring_v, 0.5 * float(np.abs(wobble).max(initial=0.0)))
        t = kept * dt
        times.append(t)
        values.append(v)
        if resolves_ringing:
            ringing_over = ring_v <= tolerance * v_oc
        tail = v[..., v.shape[-1] // 2 :]
        if t[-1] >= t_min and np.max(np.abs(tail - v_final[..., None]), initial=0.0) <= tolerance * v_oc:
            # a flat tail proves settling while the level resolves the trunk's ringing, or once a level that
            # did resolve it saw the ringing die out (coarser levels can then only miss a slow, smooth tail)
            settled = resolves_ringing or ringing_over
            break
        if max_time_s is not None and t[-1] >= max_time_s:
            break
    return StepResponses(
        time_s=np.concatenate(times),
        driver_names=names,
        receiver_names=topo.receiver_names if rx_index is None else tuple(topo.receiver_names[i] for i in rx_index),
        v_diff_v=np.concatenate(values, axis=-1),
        v_final_v=v_final,
        open_circuit_v=v_oc,
        rise_time_s=bus.driver.rise_time_s,
        settled=settled,
    )


def _level_schedule(bus: Bus, t_edge_s: float, t_min_s: float) -> list[tuple[float, int, int]]:
    """(dt, N, first index used) of every level. Level 0 resolves the edge (dt_0 = T_e / 16) and is long enough
    to keep edges sharp while the cable has not yet dispersed them: up to 3 / (alpha(1/T_e) v), the time in
    which the cable attenuates the edge's main frequency by 3 Np (capped by the minimum horizon and by
    MAX_FIRST_LEVEL samples). Level 1 spans 2x the previous end, each later level 4x, with LATER_LEVEL_SAMPLES
    samples once the cable has dispersed the edge, else with level 0's N."""
    dt0 = t_edge_s / SAMPLES_PER_EDGE
    alpha = float(propagation_constant_per_m(bus.cable, 1.0 / t_edge_s)[0].real)
    speed = propagation_velocity_m_per_s(bus.cable.velocity_factor)
    t_sharp = t_min_s if alpha <= 0.0 else min(t_min_s, 3.0 / (alpha * speed))
    n0 = SAMPLES_PER_LEVEL
    while n0 * dt0 / 2.0 < t_sharp and n0 < MAX_FIRST_LEVEL:
        n0 *= 2
    schedule = [(dt0, n0, 0)]
    end = n0 * dt0 / 2.0
    # On a dispersive cable, edges arriving after level 0 are already several T_e wide, so a shorter N suffices;
    # on a (nearly) lossless line they stay sharp, and later levels keep level 0's N.
    n = n0 if t_sharp >= t_min_s else min(n0, LATER_LEVEL_SAMPLES)
    for level in range(1, MAX_LEVELS):
        # level 1 only doubles dt, so it still resolves the edge (T_e / 8) where later reflections arrive sharp
        factor = FIRST_LEVEL_FACTOR if level == 1 else LEVEL_FACTOR
        dt = end * 2.0 * factor / n
        schedule.append((dt, n, n // (2 * factor) + 1))
        end = n * dt / 2.0
    return schedule


def _lowpass_fraction(level: int) -> float:
    return FIRST_LOWPASS_FRACTION if level == 0 else LOWPASS_FRACTION


def _level_grid(dt_s: float, n: int, lowpass_fraction: float) -> tuple[np.ndarray, np.ndarray]:
    """Laplace points, spacing and low-pass weights of one level: s_k = sigma + j 2 pi k / (n dt)."""
    window_s = n * dt_s
    k = np.arange(n // 2 + 1)
    f = k / window_s
    s = DAMPING / window_s + 2j * np.pi * f
    f_nyquist = 0.5 / dt_s
    weight = np.exp(-0.5 * (f / (lowpass_fraction * f_nyquist)) ** 2)
    return s, weight


def _edge_spectrum(s: np.ndarray, v_oc: float, t_edge_s: float) -> np.ndarray:
    """Laplace transform of the ramp 0 -> v_oc over t_edge_s: v_oc (1 - exp(-s T)) / (s^2 T)."""
    return np.asarray(-v_oc * np.expm1(-s * t_edge_s) / (s * s * t_edge_s))


@dataclass(frozen=True, slots=True)
class Waveforms:
    """Differential voltage at every receiver for a bit pattern; time_s is bit-major (bit n, then offsets)."""

    time_s: np.ndarray  # (n_t,) = n_bits * n_offsets, ascending
    receiver_names: tuple[str, ...]
    v_diff_v: np.ndarray  # (n_receivers, n_t)
    bits: str
    bit_time_s: float
    sample_times_s: np.ndarray  # (n_bits,) mid-bit sampling instants
    offsets_s: np.ndarray  # (n_offsets,) sample offsets within each bit, the same for every bit
    driver_name: str


# maximal-length feedback polynomials x^a + x^b + 1 (orders 7, 9, 11, 15 as in ITU-T O.150; the short ones
# from the standard tables of primitive trinomials)
PRBS_TAPS = {4: (4, 3), 5: (5, 3), 6: (6, 5), 7: (7, 6), 9: (9, 5), 11: (11, 9), 15: (15, 14)}
DEFAULT_PATTERN_BITS = 127
MIN_DEFAULT_ORDER, MAX_DEFAULT_ORDER = 5, 7
REFINE_TOLERANCE = 2e-3  # of the open-circuit swing: linear interpolation error allowed between offsets
UNIFORM_OFFSETS = 32  # per bit, always present
REFINE_BUDGET_VALUES = 1_000_000  # interpolated values per block while choosing offsets
MAX_OFFSETS = 600  # samples per bit at most
WAVEFORM_BUDGET_VALUES = 6_000_000  # receivers x bits x offsets of one Waveforms, before offsets get sparser


def prbs_bits(n_bits: int = DEFAULT_PATTERN_BITS, order: int = 7, seed: int = 1) -> str:
    """Pseudo-random bit sequence from a Fibonacci LFSR (x^7 + x^6 + 1 for order 7; ITU-T O.150).

    seed: the nonzero initial register state. Period 2^order - 1; the same seed always gives the same bits.
    """
    if order not in PRBS_TAPS:
        raise ValueError(f"PRBS order {order} not supported; choose one of {sorted(PRBS_TAPS)}")
    a, b = PRBS_TAPS[order]
    mask = (1 << order) - 1
    state = seed & mask or 1
    out = []
    for _ in range(n_bits):
        new = ((state >> (a - 1)) ^ (state >> (b - 1))) & 1
        state = ((state << 1) | new) & mask
        out.append("1" if new else "0")
    return "".join(out)


MEMORY_FRACTION = 0.01  # of V_oc: an edge's tail below this no longer shapes an eye or a threshold crossing


def memory_bits(step: StepResponses, bit_time_s: float) -> int:
    """How many bit times an edge keeps mattering: until every receiver is within 1 % of V_oc of its settled
    level for good, in bits, plus the bit itself."""
    deviation = np.abs(step.v_diff_v - step.v_final_v[..., None]).max(axis=(0, 1))
    outside = np.flatnonzero(deviation > MEMORY_FRACTION * step.open_circuit_v)
    if not step.settled and outside.size and outside[-1] == deviation.size - 1:
        return DEFAULT_PATTERN_BITS
    last_s = step.time_s[min(outside[-1] + 1, deviation.size - 1)] if outside.size else 0.0
    return int(np.floor(last_s / bit_time_s) + 1)


def default_pattern(step: StepResponses, bit_time_s: float) -> str:
    """The shortest PRBS (order 5 to 7, seed 1) holding every run of bits the bus remembers: order = memory + 2.

    A PRBS of order k contains every k-bit sequence but all-zeros, so when an edge stops mattering after
    k - 2 bits every eye and ringing case of a long random stream appears in one period.
    """
    order = int(np.clip(memory_bits(step, bit_time_s) + 2, MIN_DEFAULT_ORDER, MAX_DEFAULT_ORDER))
    return prbs_bits((1 << order) - 1, order=order)


def simulate_pattern(
    bus: Bus,
    pattern: str | None = None,
    driver_name: str | None = None,
    *,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
    step: StepResponses | None = None,
) -> Waveforms:
    """Waveform at every receiver (or the named ones) for a bit pattern at the plan's bit rate.

    pattern: "0"/"1" string; None = the plan's test_pattern, else default_pattern() (PRBS-5 to PRBS-7, seed 1).
    driver_name: None = the primary driver. step: a StepResponses for that driver to reuse (it must reach at
    least the pattern's duration or be settled). Method in the module docstring.
    """
    driver = resolve_driver_names(bus, None if driver_name is None else [driver_name])
    bit_time_s = 1.0 / bus.plan.bit_rate_bps
    bits = pattern if pattern is not None else bus.plan.test_pattern
    if bits is None:
        if step is None or step.driver_names[:1] != driver:
            step = step_responses(bus, driver, max_time_s=DEFAULT_PATTERN_BITS * bit_time_s)
        bits = default_pattern(step, bit_time_s)
    if len(bits) < 1 or set(bits) - {"0", "1"}:
        raise BusInputError(
            [
                Problem(
                    "test_pattern",
                    "Bit pattern",
                    bits[:40],
                    {"pattern": "0s and 1s"},
                    "The bit pattern may hold only 0 and 1 and must not be empty.",
                )
            ]
        )
    duration_s = len(bits) * bit_time_s
    if step is None or step.driver_names[:1] != driver:
        step = step_responses(bus, driver, max_time_s=duration_s)
    rx_index = _receiver_index(step.receiver_names, receiver_names)
    s_t = step.time_s
    deviation = step.v_diff_v[0][rx_index] - step.v_final_v[0][rx_index, None]  # (n_rx, n_t)
    n_bits = len(bits)
    horizon_s = s_t[-1] if step.settled else max(s_t[-1], duration_s)
    n_mem = int(min(n_bits, np.floor(horizon_s / bit_time_s) + 1))
    cap = int(np.clip(WAVEFORM_BUDGET_VALUES // (rx_index.size * n_bits), 2 * UNIFORM_OFFSETS + 1, MAX_OFFSETS))
    offsets = _offsets(s_t, deviation, bit_time_s, n_mem, step.open_circuit_v, cap)
    # D at m T_bit + u for every m < n_mem: (n_rx, n_mem, n_off)
    d_mem = _sample(s_t, deviation, (np.arange(n_mem)[:, None] * bit_time_s + offsets[None, :]).ravel())
    d_mem = d_mem.reshape(rx_index.size, n_mem, offsets.size)
    b = np.array([1.0 if c == "1" else 0.0 for c in bits])
    edges = 2.0 * np.diff(b, prepend=b[0])  # (n_bits,) in units of one 0 -> V_oc step; the first bit at rest
    # the convolution along the bit index: shifted adds for a short memory, else by FFT over bits (exact to
    # rounding); either way no BLAS threads and no temporaries beyond the output's size
    if n_mem <= 8:
        v = edges[None, :, None] * d_mem[:, :1, :]
        for m in range(1, n_mem):
            v[:, m:, :] += edges[None, : n_bits - m, None] * d_mem[:, m : m + 1, :]
    else:
        n_fft = 1 << int(np.ceil(np.log2(n_bits + n_mem - 1)))
        spectrum = np.fft.rfft(d_mem, n=n_fft, axis=1) * np.fft.rfft(edges, n=n_fft)[None, :, None]
        v = np.fft.irfft(spectrum, n=n_fft, axis=1)[:, :n_bits, :]
    v += (2.0 * b - 1.0)[None, :, None] * step.v_final_v[0][rx_index, None, None]
    time_s = (np.arange(n_bits)[:, None] * bit_time_s + offsets[None, :]).ravel()
    return Waveforms(
        time_s=time_s,
        receiver_names=tuple(step.receiver_names[i] for i in rx_index),
        v_diff_v=v.reshape(rx_index.size, -1),
        bits=bits,
        bit_time_s=bit_time_s,
        sample_times_s=(np.arange(n_bits) + 0.5) * bit_time_s,
        offsets_s=offsets,
        driver_name=driver[0],
    )


def _receiver_index(all_names: tuple[str, ...], wanted: "tuple[str, ...] | list[str] | None") -> np.ndarray:
    if wanted is None:
        return np.arange(len(all_names))
    unknown = [n for n in wanted if n not in all_names]
    if unknown:
        raise BusInputError(
            [
                Problem(
                    "receiver_names",
                    "Receivers",
                    unknown[0],
                    {"choices": list(all_names)},
                    f"'{unknown[0]}' is not a node of this bus; nodes are {', '.join(all_names)}.",
                )
            ]
        )
    return np.array([all_names.index(n) for n in wanted], dtype=int)


def _sample(time_s: np.ndarray, values: np.ndarray, at_s: np.ndarray) -> np.ndarray:
    """Linear interpolation of every row of values (n_rows, n_t) at times at_s; past the end the last value,
    before 0 zero (nothing has arrived)."""
    idx = np.clip(np.searchsorted(time_s, at_s, side="right") - 1, 0, time_s.size - 2)
    t0, t1 = time_s[idx], time_s[idx + 1]
    w = np.clip((at_s - t0) / (t1 - t0), 0.0, 1.0)
    out = values[:, idx] * (1.0 - w) + values[:, idx + 1] * w
    out[:, at_s > time_s[-1]] = values[:, -1:]
    out[:, at_s < 0.0] = 0.0
    return np.asarray(out)


def _offsets(
    step_t: np.ndarray, deviation: np.ndarray, bit_time_s: float, n_mem: int, swing_v: float, max_offsets: int
) -> np.ndarray:
    """Offsets within a bit where the pattern waveform is evaluated (see the module docstring).

    If more than max_offsets would be needed, the tolerance is doubled until they fit: memory stays bounded
    and the waveform keeps its largest features.
    """
    uniform = np.arange(UNIFORM_OFFSETS) * (bit_time_s / UNIFORM_OFFSETS)
    cand = np.unique(np.concatenate([step_t[step_t < bit_time_s], uniform, [0.5 * bit_time_s]]))
    fixed = np.isin(cand, uniform) | (cand == 0.5 * bit_time_s)
    if cand.size <= 2 * UNIFORM_OFFSETS:
        return cand
    lag_t = (np.arange(n_mem)[:, None] * bit_time_s + cand[None, :]).ravel()
    rows = max(1, REFINE_BUDGET_VALUES // lag_t.size)
    blocks = [
        _sample(step_t, deviation[r0 : r0 + rows], lag_t).reshape(-1, cand.size)
        for r0 in range(0, deviation.shape[0], rows)
    ]
    tol = REFINE_TOLERANCE * swing_v
    while tol < 4.0 * swing_v:  # beyond that nothing but the fixed points would be kept
        keep = _refine(cand, blocks, fixed, tol)
        if np.count_nonzero(keep) <= max_offsets:
            return np.asarray(cand[keep])
        tol *= 2.0
    return np.asarray(cand[fixed])


def _refine(cand: np.ndarray, blocks: list[np.ndarray], fixed: np.ndarray, tol: float) -> np.ndarray:
    """Bisect between kept candidates wherever linear interpolation misses any row by more than tol."""
    keep = fixed.copy()
    keep[[0, -1]] = True
    keep[:: max(1, cand.size // UNIFORM_OFFSETS)] = True
    for vals in blocks:  # (rows, n_cand): every receiver at every bit lag
        for _ in range(64):
            kept = np.flatnonzero(keep)
            left, right = kept[:-1], kept[1:]
            gap = (right - left) > 1
            left, right = left[gap], right[gap]
            if left.size == 0:
                break
            mid = (left + right) // 2
            w = (cand[mid] - cand[left]) / (cand[right] - cand[left])
            err = np.abs(vals[:, mid] - (vals[:, left] * (1.0 - w) + vals[:, right] * w)).max(axis=0)
            if not np.any(err > tol):
                break
            keep[mid[err > tol]] = True
    # a kept point's neighbours on the candidate grid are kept too, so peaks are not cut between samples
    kept = np.flatnonzero(keep)
    keep[np.clip(kept - 1, 0, None)] = True
    keep[np.clip(kept + 1, None, cand.size - 1)] = True
    return keep
