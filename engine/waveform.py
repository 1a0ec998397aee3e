"""Waveforms for a bit pattern at every probe, by superposing edge responses (engine.transient).

The bus is linear and time-invariant, so one rising edge describes it completely. Bits b_n in {0, 1} are driven
as -V / +V, the ramp of bit n starting at n T_bit, the line at rest at the first bit's level before t = 0.
Probe p is read in its own frame (local time u = t - tau_p, engine.transient), where bit n's window is
[n T_bit, (n + 1) T_bit). With D(u) = step(u) - v_final (zero once settled) and b_{-1} = b_0:
    v(n T_bit + u) = v_final (2 b_n - 1) + sum_{m >= 0} 2 (b_{n-m} - b_{n-m-1}) D(m T_bit + u).
That is a convolution along the bit index at offsets u within a bit, common to every probe: one matrix product
per probe with the edges' Toeplitz matrix when short (or shifted adds, or an FFT over bits when the memory is
long), no further solve.

Offsets: every sample of the edge response folded into one bit (so the ramp's corners, at local 0 and T_e, are
offsets exactly), refined to those where linear interpolation between neighbours would miss some probe's D at some
bit lag by more than REFINE_TOLERANCE of that probe's peak-to-peak, plus UNIFORM_OFFSETS per bit. The tolerance
is fixed: the number of offsets follows the waveform, and memory is bounded by processing probes in blocks.
"""

from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.plan import BusInputError, Problem
from pairline.engine.solve import Probe, driver_pin_probe, junction_probe, node_probe, resolve_driver_names
from pairline.engine.transient import (
    StepResponses,
    edge_duration_s,
    longest_delay_s,
    require_known_receivers,
    step_responses,
)

__all__ = [
    "DEFAULT_PATTERN_BITS",
    "LocalPatterns",
    "StepResponses",
    "Waveforms",
    "default_pattern",
    "edge_duration_s",
    "edge_matrix",
    "local_patterns",
    "longest_delay_s",
    "pattern_at",
    "pattern_memory_bits",
    "plan_probes",
    "prbs_bits",
    "probe_waveforms",
    "simulate_pattern",
    "step_responses",
]

# maximal-length feedback polynomials x^a + x^b + 1 (orders 7, 9, 11, 15 as in ITU-T O.150; the short ones
# from the standard tables of primitive trinomials)
PRBS_TAPS = {4: (4, 3), 5: (5, 3), 6: (6, 5), 7: (7, 6), 9: (9, 5), 11: (11, 9), 15: (15, 14)}
DEFAULT_PATTERN_BITS = 127
MIN_DEFAULT_ORDER, MAX_DEFAULT_ORDER = 5, 7
REFINE_TOLERANCE = 1e-3  # of each probe's peak-to-peak: linear interpolation error allowed between offsets
UNIFORM_OFFSETS = 32  # per bit, always present
REFINE_BUDGET_VALUES = 2_000_000  # lag x offset values examined at once while refining
DIRECT_PRODUCT_VALUES = 1 << 18  # bits x lags x offsets of one probe's direct product (one BLAS thread), at most
MEMORY_FRACTION = 0.01  # of V_oc: an edge's tail below this no longer shapes an eye or a threshold crossing


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


def memory_bits(step: StepResponses, bit_time_s: float) -> int:
    """How many bit times an edge keeps mattering: until every probe is within 1 % of V_oc of its settled level
    for good (in its own frame), in bits, plus the bit itself."""
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


def check_bits(bits: str) -> None:
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


@dataclass(frozen=True, slots=True)
class LocalPatterns:
    """One driver's bit pattern at some probes, each in its own frame: bit n of probe r sits at absolute times
    start_s[r] + n bit_time_s + offsets_s."""

    offsets_s: np.ndarray  # (n_off,) ascending in [0, bit_time_s)
    start_s: np.ndarray  # (n_rx,)
    v_diff_v: np.ndarray  # (n_rx, n_bits, n_off)
    v_final_v: np.ndarray  # (n_rx,) settled level of a long run of 1s
    receiver_names: tuple[str, ...]
    bits: str
    bit_time_s: float
    edge_s: float  # the driver ramp's 0-100 % duration
    driver_name: str

    def local_time_s(self) -> np.ndarray:
        """(n_bits * n_off,) local times of the flattened samples."""
        n_bits = len(self.bits)
        return np.asarray((np.arange(n_bits)[:, None] * self.bit_time_s + self.offsets_s[None, :]).ravel())


def _receiver_index(step: StepResponses, wanted: "tuple[str, ...] | list[str] | None") -> np.ndarray:
    if wanted is None:
        return np.arange(len(step.receiver_names))
    require_known_receivers(wanted, step.receiver_names, "a probe of this simulation", "probes")
    return np.array([step.receiver_names.index(n) for n in wanted], dtype=int)


def _deviation_at(
    step: StepResponses, rows: np.ndarray, local_s: np.ndarray, dev: np.ndarray | None = None
) -> np.ndarray:
    """D = step - v_final of driver 0 at probes `rows` and local times (n_rows, n_times); D = -v_final before 0
    and, past the last sample, 0 when settled (else the last deviation). dev: D at the samples, (n_rows, n_t),
    when the caller holds it."""
    t = step.time_s
    idx = np.clip(np.searchsorted(t, local_s, side="right") - 1, 0, t.size - 2)
    w = np.clip((local_s - t[idx]) / (t[idx + 1] - t[idx]), 0.0, 1.0)
    dev = _deviation(step, rows) if dev is None else dev
    out = dev[:, idx] * (1.0 - w) + dev[:, idx + 1] * w
    out[:, local_s > t[-1]] = 0.0 if step.settled else dev[:, -1:]
    out[:, local_s < 0.0] = -step.v_final_v[0][rows, None]
    return np.asarray(out)


def _deviation(step: StepResponses, rows: np.ndarray) -> np.ndarray:
    """D = step - v_final of driver 0 at probes `rows` at the step's own samples, (n_rows, n_t)."""
    return np.asarray(step.v_diff_v[0][rows] - step.v_final_v[0][rows, None])


def pattern_memory_bits(step: StepResponses, bit_time_s: float, n_bits: int) -> int:
    """Bits back whose edges still shape a pattern of n_bits (the edge response's span, or the whole pattern when
    it has not settled), counting the bit itself."""
    horizon_s = step.time_s[-1] if step.settled else max(step.time_s[-1], n_bits * bit_time_s)
    return int(min(n_bits, np.floor(horizon_s / bit_time_s) + 1))


def pattern_offsets_s(
    step: StepResponses, bits: str, bit_time_s: float, tolerance: float = REFINE_TOLERANCE
) -> np.ndarray:
    """The offsets refined for every probe of the step's first driver (to share with variants of the bus), to
    `tolerance` of each probe's peak-to-peak."""
    rows = np.arange(len(step.receiver_names))
    return _offsets(step, rows, bit_time_s, pattern_memory_bits(step, bit_time_s, len(bits)), tolerance)[0]


def _offsets(
    step: StepResponses, rows: np.ndarray, bit_time_s: float, n_mem: int, tolerance: float = REFINE_TOLERANCE
) -> tuple[np.ndarray, np.ndarray | None]:
    """Offsets within a bit (module docstring), common to the probes `rows`; and D at them, (n_rows, n_mem,
    n_off), when the refinement evaluated every row at once (else None)."""
    t = step.time_s
    uniform = np.arange(UNIFORM_OFFSETS) * (bit_time_s / UNIFORM_OFFSETS)
    cand = np.unique(np.concatenate([np.mod(t[t < n_mem * bit_time_s], bit_time_s), uniform]))
    if cand.size <= 2 * UNIFORM_OFFSETS:
        return cand, None
    fixed = np.isin(cand, uniform)
    v = step.v_diff_v[0][rows]
    ptp = np.maximum(np.ptp(v, axis=-1), np.abs(step.v_final_v[0][rows])) + 1e-30
    lags = np.arange(n_mem)[:, None] * bit_time_s
    per_block = max(1, REFINE_BUDGET_VALUES // (n_mem * cand.size))
    keep = fixed.copy()
    for r0 in range(0, rows.size, per_block):
        block = rows[r0 : r0 + per_block]
        vals = _Deviations(step, block, lags, cand)
        tol = np.repeat(tolerance * ptp[r0 : r0 + per_block], n_mem)
        keep |= _refine(cand, vals, fixed, tol)
    at_kept = vals.at(np.flatnonzero(keep)).reshape(rows.size, n_mem, -1) if 0 < rows.size <= per_block else None
    return np.asarray(cand[keep]), at_kept


class _Deviations:
    """D of some probes at every lag plus each candidate offset, (n_rows * n_mem, n_cand), each candidate's column
    evaluated the first time the refinement reads it: bisection reads only some of them."""

    def __init__(self, step: StepResponses, rows: np.ndarray, lags: np.ndarray, cand: np.ndarray):
        self.step, self.rows, self.lags, self.cand = step, rows, lags, cand
        self.dev = _deviation(step, rows)
        self.by_column = np.empty((cand.size, rows.size * lags.size))  # a candidate's values are one row here
        self.known = np.zeros(cand.size, dtype=bool)

    def at(self, columns: np.ndarray) -> np.ndarray:
        missing = np.unique(columns[~self.known[columns]])
        if missing.size:
            local_s = (self.lags + self.cand[None, missing]).ravel()
            at_s = _deviation_at(self.step, self.rows, local_s, self.dev)
            self.by_column[missing] = at_s.reshape(-1, missing.size).T
            self.known[missing] = True
        return np.asarray(self.by_column[columns].T)


def _refine(cand: np.ndarray, vals: _Deviations, fixed: np.ndarray, tol: np.ndarray) -> np.ndarray:
    """Bisect between kept candidates wherever linear interpolation misses a row by more than its tolerance."""
    keep = fixed.copy()
    keep[[0, -1]] = True
    keep[:: max(1, cand.size // UNIFORM_OFFSETS)] = True
    for _ in range(64):
        kept = np.flatnonzero(keep)
        left, right = kept[:-1], kept[1:]
        gap = (right - left) > 1
        left, right = left[gap], right[gap]
        if left.size == 0:
            break
        mid = (left + right) // 2
        w = (cand[mid] - cand[left]) / (cand[right] - cand[left])
        at = vals.at(np.concatenate([left, mid, right])).reshape(-1, 3, mid.size)
        err = (np.abs(at[:, 1] - (at[:, 0] * (1.0 - w) + at[:, 2] * w)) / tol[:, None]).max(axis=0)
        if not np.any(err > 1.0):
            break
        keep[mid[err > 1.0]] = True
    # a kept point's neighbours on the candidate grid are kept too, so peaks are not cut between samples
    kept = np.flatnonzero(keep)
    keep[np.clip(kept - 1, 0, None)] = True
    keep[np.clip(kept + 1, None, cand.size - 1)] = True
    return keep


def edge_matrix(edges: np.ndarray, n_mem: int) -> np.ndarray:
    """The convolution along the bit index as a matrix, (n_bits, n_mem): entry (n, m) is edges[n - m], 0 before the
    first bit; times D at lags 0 .. n_mem - 1 it sums the edges' responses in each bit."""
    lag = np.arange(edges.size)[:, None] - np.arange(n_mem)[None, :]
    return np.asarray(np.where(lag >= 0, edges[np.maximum(lag, 0)], 0.0))


def local_patterns(
    step: StepResponses,
    bits: str,
    bit_time_s: float,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
    *,
    rows: np.ndarray | None = None,
    offsets_s: np.ndarray | None = None,
) -> LocalPatterns:
    """The pattern at the named probes (None: all; or the probe indices `rows`) of the step's first driver, each
    in its own frame. offsets_s: the offsets to use (else refined for these probes, module docstring)."""
    check_bits(bits)
    rows = _receiver_index(step, receiver_names) if rows is None else np.asarray(rows, dtype=int)
    n_bits = len(bits)
    n_mem = pattern_memory_bits(step, bit_time_s, n_bits)
    offsets, d_mem = _offsets(step, rows, bit_time_s, n_mem) if offsets_s is None else (offsets_s, None)
    if d_mem is None:  # the refinement's own values serve when it evaluated every row at once
        d_mem = _deviation_at(step, rows, (np.arange(n_mem)[:, None] * bit_time_s + offsets[None, :]).ravel())
        d_mem = d_mem.reshape(rows.size, n_mem, offsets.size)
    b = np.array([1.0 if c == "1" else 0.0 for c in bits])
    edges = 2.0 * np.diff(b, prepend=b[0])  # (n_bits,) in units of one 0 -> V_oc step; the first bit at rest
    # the convolution along the bit index: a product with the edges' Toeplitz matrix while each probe's product is
    # small, shifted adds for a short memory, else by FFT over bits (exact to rounding); no temporaries beyond
    # the output's size
    if n_bits * n_mem * offsets.size <= DIRECT_PRODUCT_VALUES:
        v = np.matmul(edge_matrix(edges, n_mem), d_mem)  # (n_rx, n_bits, n_off)
    elif n_mem <= 8:
        v = edges[None, :, None] * d_mem[:, :1, :]
        for m in range(1, n_mem):
            v[:, m:, :] += edges[None, : n_bits - m, None] * d_mem[:, m : m + 1, :]
    else:
        n_fft = 1 << int(np.ceil(np.log2(n_bits + n_mem - 1)))
        along_bits = np.zeros((rows.size, offsets.size, n_fft))  # transforms run on contiguous, zero-padded rows
        along_bits[..., :n_mem] = np.swapaxes(d_mem, 1, 2)
        spectrum = np.fft.rfft(along_bits, axis=-1) * np.fft.rfft(edges, n=n_fft)
        v = np.ascontiguousarray(np.swapaxes(np.fft.irfft(spectrum, n=n_fft, axis=-1)[..., :n_bits], 1, 2))
    v_final = step.v_final_v[0][rows]
    v += (2.0 * b - 1.0)[None, :, None] * v_final[:, None, None]
    return LocalPatterns(
        offsets_s=offsets,
        start_s=step.start_s[0][rows],
        v_diff_v=v,
        v_final_v=v_final,
        receiver_names=tuple(step.receiver_names[i] for i in rows),
        bits=bits,
        bit_time_s=bit_time_s,
        edge_s=edge_duration_s(step.rise_time_s),
        driver_name=step.driver_names[0],
    )


@dataclass(frozen=True, slots=True)
class Waveforms:
    """Differential voltage at some probes for a bit pattern, on one absolute time grid."""

    time_s: np.ndarray  # (n_t,) ascending
    receiver_names: tuple[str, ...]
    v_diff_v: np.ndarray  # (n_receivers, n_t)
    bits: str
    bit_time_s: float
    sample_times_s: np.ndarray  # (n_bits,) the driver's 0 V crossing of each bit plus half a bit
    driver_name: str


def pattern_duration_s(bus: Bus, bits: str | None) -> float:
    """How long the pattern (None: at most the default PRBS length) lasts at the plan's bit rate."""
    return (len(bits) if bits else DEFAULT_PATTERN_BITS) / bus.plan.bit_rate_bps


def simulate_pattern(
    bus: Bus,
    pattern: str | None = None,
    driver_name: str | None = None,
    *,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
    step: StepResponses | None = None,
    probes: "tuple[Probe, ...] | list[Probe] | None" = None,
) -> Waveforms:
    """Waveform at every receiver (or the named ones, or the given probes) for a bit pattern at the plan's rate.

    pattern: "0"/"1" string; None = the plan's test_pattern, else default_pattern() (PRBS-5 to PRBS-7, seed 1).
    driver_name: None = the primary driver. step: that driver's StepResponses to reuse (reaching at least the
    pattern's duration, or settled), holding the probes asked for. Method in the module docstring.
    """
    driver = resolve_driver_names(bus, None if driver_name is None else [driver_name])
    bit_time_s = 1.0 / bus.plan.bit_rate_bps
    bits = pattern if pattern is not None else bus.plan.test_pattern
    wanted = [p.name for p in probes] if probes is not None else receiver_names or [n.name for n in bus.plan.nodes]
    if step is None or driver[0] not in step.driver_names or not set(wanted) <= set(step.receiver_names):
        max_time = pattern_duration_s(bus, bits)
        step = step_responses(bus, driver, max_time_s=max_time, receiver_names=receiver_names, probes=probes)
    if bits is None:
        bits = default_pattern(step, bit_time_s)
    local = local_patterns(step.for_driver(driver[0]), bits, bit_time_s, list(wanted))
    return absolute_waveforms(local)


def absolute_waveforms(local: LocalPatterns) -> Waveforms:
    """Local patterns on one absolute time grid: the union of every probe's sample times."""
    t_local = local.local_time_s()
    grid = np.unique((local.start_s[:, None] + t_local[None, :]).ravel())
    flat = local.v_diff_v.reshape(local.v_diff_v.shape[0], -1)
    rest = (1.0 if local.bits[0] == "1" else -1.0) * local.v_final_v  # the first bit's level, before any edge
    v = np.stack([np.interp(grid - local.start_s[r], t_local, flat[r], left=rest[r]) for r in range(flat.shape[0])])
    n_bits = len(local.bits)
    return Waveforms(
        time_s=grid,
        receiver_names=local.receiver_names,
        v_diff_v=v,
        bits=local.bits,
        bit_time_s=local.bit_time_s,
        sample_times_s=(np.arange(n_bits) + 0.5) * local.bit_time_s + 0.5 * local.edge_s,
        driver_name=local.driver_name,
    )


def plan_probes(bus: Bus) -> list[Probe]:
    """The probes the plan asks for (plan.probes); none asked: the driver's pins and every node."""
    specs = bus.plan.probes
    if not specs:
        return [driver_pin_probe()] + [node_probe(n.name) for n in bus.plan.nodes]
    out = []
    for spec in specs:
        if spec.kind == "node" and spec.node is not None:
            out.append(node_probe(spec.node))
        elif spec.kind == "junction" and spec.position_m is not None:
            out.append(junction_probe(spec.position_m))
        else:
            out.append(driver_pin_probe())
    return out


def probe_waveforms(bus: Bus, probes: "list[Probe] | None" = None, pattern: str | None = None) -> Waveforms:
    """What a scope would show at the plan's probes (plan_probes) for the plan's probe signal: the bit pattern
    (simulate_pattern; pattern None: the plan's, else the default), or a single step from 0 V to high
    (plan.probe_signal "step"; bits then "", one edge at 0). Probes: a node's receiver input, a trunk position, or
    the driver's pins behind its stub."""
    chosen = plan_probes(bus) if probes is None else probes
    if bus.plan.probe_signal == "pattern":
        return simulate_pattern(bus, pattern, probes=chosen)
    step = step_responses(bus, probes=chosen)
    grid = np.unique((step.start_s[0][:, None] + step.time_s[None, :]).ravel())
    return Waveforms(
        time_s=grid,
        receiver_names=step.receiver_names,
        v_diff_v=step.at(grid)[0],
        bits="",
        bit_time_s=1.0 / bus.plan.bit_rate_bps,
        sample_times_s=np.empty(0),
        driver_name=step.driver_names[0],
    )


def pattern_at(step: StepResponses, bits: str, bit_time_s: float, time_s: np.ndarray) -> np.ndarray:
    """The pattern at every probe of the step's first driver at absolute times, (n_probes, n_times), by direct
    superposition of the edge responses (no offset grid): for comparisons at another simulator's time points."""
    check_bits(bits)
    t = np.asarray(time_s, dtype=float)
    b = np.array([1.0 if c == "1" else 0.0 for c in bits])
    one = step.for_driver(step.driver_names[0])
    out = np.repeat(((2.0 * b[0] - 1.0) * one.v_final_v[0])[:, None], t.size, axis=1)
    for n in np.flatnonzero(np.diff(b, prepend=b[0])):
        out += 2.0 * (b[n] - b[n - 1]) * one.at(t - n * bit_time_s)[0]
    return out
