"""Signal verdict inputs at every receiver: levels, overshoot, ringback, false threshold crossings, settling,
the margin over a sampling window, eye opening, delay and jitter, read from the pattern waveforms.

Conventions (all differential, V_AB):
- The receiver decides 1 at V >= +threshold and 0 at V <= -threshold; between lies the undefined band
  (+/-200 mV for TIA-485-A and TIA-422-B receivers, the default `threshold_v`).
- Each receiver is read in its own frame (engine.transient): bit n's window is [n T, (n + 1) T) after the
  receiver's path delay, so ringing is charged to the bit that caused it. The driven side of bit n is
  s_n = +1 for a 1, -1 for a 0.
- Crossing: when s_n V rises through 0 V in an edge's window, for good: the last rise through 0 V before the
  level first clears 2 x ACCURACY of the settled level (engine.transient), so a touch of 0 V smaller than the
  waveforms' own error, which a slow or RC-terminated edge can show, is no crossing. Delay (propagation_delay_s,
  DELAY_DEFINITION): the median over the pattern's edges of the receiver's 0 V crossing minus the driver's own
  (n T + T_e / 2); jitter_s: the spread (max - min) of those crossings.
- Sampling (SamplingWindow): a UART samples each bit at its start edge as its input shows it plus centre_ui of a
  bit (8/16 by default: mid-bit on the 16x clock), and the phase is uncertain by a sample clock either way, so
  the level must hold over centre +/- half_width_ui (2/16 by default, 0.375 to 0.625 of the bit). The start edge
  is taken at the receiver's median 0 V crossing. Sources: mid-bit sampling at 8 of 16 sample clocks after the
  start edge and majority voting over samples 7, 8 and 9, Microchip "UART start detection and data sampling" and
  TI MSPM0 G-series TRM (SLAU846A), UART oversampling; the +/-2/16 window width: common practice.
- min_sample_v: the lowest s_n V over the sampling window of any bit; margin_v = min_sample_v - threshold;
  sample_errors: bits whose window dips below the threshold.
- amplitude_v: the settled level |V| after a long run of equal bits (exact DC solve), one polarity.
- overshoot_v: how far s_n V rises above the settled level, worst over the pattern.
- undershoot_v: ringback: after s_n V has reached the settled level inside a window, how far it then drops
  below it (0 when the approach is monotonic).
- threshold_recrossings: times, over the pattern, that s_n V falls back below +threshold after having
  passed it inside the same window: each can make the receiver output a false extra bit. A fall counts once it
  goes below the threshold by more than the waveform's accuracy (engine.transient.ACCURACY of the swing).
- settle_time_s: worst time from a window's start (the edge's arrival) until s_n V stays at or above the
  threshold up to the sampling instant; inf if it is not there at the sampling instant. settle_margin_s is
  the sampling instant minus that.
- eye_height_v: at the sampling instant, min over 1 bits minus max over 0 bits of V (inner eye).
- eye_width_s: the contiguous span around the sampling instant in which every 1 bit is >= +threshold and
  every 0 bit <= -threshold.
"""

from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.transient import ACCURACY
from pairline.engine.waveform import (
    DEFAULT_PATTERN_BITS,
    LocalPatterns,
    StepResponses,
    default_pattern,
    local_patterns,
    step_responses,
)

RECEIVER_THRESHOLD_V = 0.2  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity, +/-200 mV
RECEIVERS_PER_PASS = 16  # receivers whose pattern waveforms are held at once (small blocks stay in cache)
DRIVERS_PER_PASS = 8  # drivers whose step responses are held at once
DELAY_DEFINITION = (
    "from the driver's 0 V crossing to the receiver's 0 V crossing (the rise through 0 V that goes on to clear "
    f"{2 * ACCURACY:.0%} of the settled level), median over the pattern's edges"
)


@dataclass(frozen=True, slots=True)
class SamplingWindow:
    """Where in each bit a receiver's level must hold, in bits after its start edge (module docstring)."""

    centre_ui: float = 0.5
    half_width_ui: float = 0.125


def plan_window(bus: Bus) -> SamplingWindow:
    """The plan's sampling window (its defaults when the plan does not set one)."""
    spec = bus.plan.sampling_window
    return SamplingWindow(spec.centre_ui, spec.half_width_ui)


@dataclass(frozen=True, slots=True)
class ReceiverMetrics:
    """What the signal looks like at one receiver for one driver and bit pattern (conventions above)."""

    receiver: str
    driver: str
    amplitude_v: float
    peak_v: float  # largest |V| anywhere in the pattern
    overshoot_v: float
    overshoot_ratio: float  # overshoot_v / amplitude_v
    undershoot_v: float
    threshold_recrossings: int
    settle_time_s: float
    settle_margin_s: float  # sampling instant minus settle_time_s (negative: not settled when sampled)
    min_sample_v: float  # lowest s_n V over the sampling windows (below threshold: a wrong or undefined bit)
    sample_errors: int
    eye_height_v: float
    eye_width_s: float
    eye_width_ui: float  # eye_width_s / T_bit
    propagation_delay_s: float
    jitter_s: float
    jitter_ui: float  # jitter_s / T_bit
    bit_time_s: float
    threshold_v: float
    sampling_centre_ui: float = 0.5
    sampling_half_width_ui: float = 0.125

    @property
    def margin_v(self) -> float:
        """How far the lowest level over the sampling windows clears the threshold (negative: it does not)."""
        return self.min_sample_v - self.threshold_v


@dataclass(frozen=True, slots=True)
class SampledLevels:
    """A receiver's levels over the sampling windows alone (as a tolerance case is judged, engine.tolerance)."""

    min_sample_v: float  # lowest level on the driven side over every bit's window
    sample_errors: int  # bits whose window dips below the threshold
    eye_height_v: float  # at the sampling instant: lowest 1 plus lowest 0 (driven sides)
    threshold_v: float

    @property
    def margin_v(self) -> float:
        return self.min_sample_v - self.threshold_v


def crossing_time_s(step: StepResponses, fraction: float) -> np.ndarray:
    """Per driver and probe, (n_drivers, n_probes): first absolute time the step response reaches `fraction` of
    its settled level (inf if it never does). Linear interpolation between samples."""
    level = fraction * step.v_final_v[..., None]
    above = np.where(step.v_final_v[..., None] >= 0, step.v_diff_v >= level, step.v_diff_v <= level)
    first = np.argmax(above, axis=-1)  # (n_d, n_p)
    prev = np.clip(first - 1, 0, None)
    v0 = np.take_along_axis(step.v_diff_v, prev[..., None], -1)[..., 0]
    v1 = np.take_along_axis(step.v_diff_v, first[..., None], -1)[..., 0]
    t0, t1 = step.time_s[prev], step.time_s[first]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(v1 != v0, (level[..., 0] - v0) / (v1 - v0), 0.0)
    t_cross = step.start_s + t0 + np.clip(frac, 0.0, 1.0) * (t1 - t0)
    return np.asarray(np.where(np.any(above, axis=-1), t_cross, np.inf))


def receiver_metrics(
    bus: Bus,
    *,
    driver_name: str | None = None,
    pattern: str | None = None,
    threshold_v: float = RECEIVER_THRESHOLD_V,
    step: StepResponses | None = None,
    receiver_names: "tuple[str, ...] | list[str] | None" = None,
    window: SamplingWindow | None = None,
) -> tuple[ReceiverMetrics, ...]:
    """Metrics at every receiver (plan node order; or the named ones) for one driver and a bit pattern.

    pattern None: the plan's test pattern, else the default PRBS. step: the driver's StepResponses to reuse
    (covering the pattern or settled, holding the receivers). window None: the plan's sampling window.
    Receivers are processed RECEIVERS_PER_PASS at a time, so memory stays bounded on large buses.
    """
    name = bus.plan.driver.name if driver_name is None else driver_name
    bits = pattern if pattern is not None else bus.plan.test_pattern
    t_bit = 1.0 / bus.plan.bit_rate_bps
    wanted = list(receiver_names) if receiver_names is not None else [n.name for n in bus.plan.nodes]
    if step is None or name not in step.driver_names or not set(wanted) <= set(step.receiver_names):
        n_bits = len(bits) if bits is not None else DEFAULT_PATTERN_BITS
        step = step_responses(bus, [name], max_time_s=n_bits * t_bit, receiver_names=receiver_names)
    one = step.for_driver(name)
    if bits is None:
        bits = default_pattern(one, t_bit)
    sampling = plan_window(bus) if window is None else window
    out: list[ReceiverMetrics] = []
    for r0 in range(0, len(wanted), RECEIVERS_PER_PASS):
        local = local_patterns(one, bits, t_bit, wanted[r0 : r0 + RECEIVERS_PER_PASS])
        out.extend(pattern_metrics(local, threshold_v, sampling))
    return tuple(out)


def _crossings(local: LocalPatterns, sv: np.ndarray, edge: np.ndarray, clear_v: np.ndarray) -> np.ndarray:
    """Local time of the 0 V crossing in each edge window, (n_rx, n_edges): the last rise through 0 V before the
    level first reaches clear_v (n_rx,) on the driven side; inf where it never does."""
    u = local.offsets_s
    rows = sv[:, edge, :]
    cleared = rows >= clear_v[:, None, None]
    first_clear = np.argmax(cleared, axis=2)
    below = (rows < 0.0) & (np.arange(u.size) < first_clear[..., None])
    last_below = np.where(below.any(axis=2), u.size - 1 - np.argmax(below[..., ::-1], axis=2), -1)
    first = last_below + 1
    k = np.clip(first, 1, u.size - 1)
    va = np.take_along_axis(rows, (k - 1)[..., None], 2)[..., 0]
    vb = np.take_along_axis(rows, k[..., None], 2)[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(vb != va, u[k - 1] - va * (u[k] - u[k - 1]) / (vb - va), u[k])
    t = np.where(first == 0, u[0], t)
    bits_idx = np.flatnonzero(edge)
    return np.asarray(np.where(cleared.any(axis=2), bits_idx[None, :] * local.bit_time_s + t, np.inf))


def pattern_metrics(
    local: LocalPatterns, threshold_v: float = RECEIVER_THRESHOLD_V, window: SamplingWindow | None = None
) -> list[ReceiverMetrics]:
    """Metrics of every receiver in a LocalPatterns, vectorised over receivers; conventions in the module
    docstring."""
    sampling = SamplingWindow() if window is None else window
    t_bit = local.bit_time_s
    v = local.v_diff_v  # (n_rx, n_bits, n_off)
    n_rx, n_bits, n_off = v.shape
    u = local.offsets_s
    level = np.where(np.frombuffer(local.bits.encode(), dtype=np.uint8) == ord("1"), 1.0, -1.0)
    edge = np.r_[False, level[1:] != level[:-1]]
    amp = np.abs(local.v_final_v)[:, None, None]
    sv = level[None, :, None] * v

    # crossings: delay and jitter; the sampling phase is the median crossing within its bit
    cross = _crossings(local, sv, edge, 2.0 * ACCURACY * amp[:, 0, 0])  # (n_rx, n_edges) local
    within = cross - np.flatnonzero(edge)[None, :] * t_bit
    finite = np.isfinite(within)
    has = finite.any(axis=1)
    known = np.where(finite, within, np.nan)
    with np.errstate(all="ignore"):
        phase = np.where(has, _row_nanmedian(np.where(has[:, None], known, 0.0)), 0.5 * local.edge_s)
        spread = np.where(
            finite.sum(axis=1) >= 2,
            np.nanmax(known, axis=1, initial=-np.inf) - np.nanmin(known, axis=1, initial=np.inf),
            0.0,
        )
    delay = np.where(has, local.start_s + phase - 0.5 * local.edge_s, np.inf)

    # levels along each bit from its sampling phase: S[r, n, j] = s_n V(n T + phase + tau_rj), tau in [0, T): the
    # offsets rotated to start at the phase, read from bit n or n + 1 as they are (no interpolation)
    centre, half = sampling.centre_ui * t_bit, sampling.half_width_ui * t_bit
    n_s = n_bits - 1  # the last bit's window runs past the pattern
    k = np.minimum(np.searchsorted(u, phase), n_off)  # (n_rx,) the first offset at or after the phase
    flat = v.reshape(n_rx, -1)
    ends = np.column_stack([u[k - 1] - phase, u[np.minimum(k, n_off - 1)] - phase + t_bit])  # one past each end
    ends[:, 0] = np.where(k > 0, ends[:, 0], u[-1] - t_bit - phase)
    marks = np.array([centre - half, centre, centre + half])
    extra_tau = np.concatenate([np.repeat(marks[None], n_rx, 0), ends], axis=1)  # (n_rx, 5)
    at = np.arange(n_s)[None, :, None] * t_bit + phase[:, None, None] + extra_tau[:, None, :]
    extra = level[None, :n_s, None] * _interp_rows(at.reshape(n_rx, -1), local.local_time_s(), flat).reshape(
        n_rx, n_s, 5
    )
    s_marks = extra[..., :3]  # (n_rx, n_s, 3): window start, centre, window end
    along = np.arange(n_off)[None, :]
    # each receiver's offsets rotated to start at its phase; its levels read from bit n at offsets k.. and from
    # bit n + 1 at those before k (one contiguous run of the flattened pattern from offset k of bit 0 on)
    tau = np.empty((n_rx, n_off + 2))
    tau[:, 1:-1] = np.concatenate([u, u + t_bit])[k[:, None] + along] - phase[:, None]
    tau[:, 0], tau[:, -1] = ends[:, 0], ends[:, 1]
    s_rows = np.empty((n_rx, n_s, n_off + 2))
    run = np.stack([flat[r, k[r] : k[r] + n_s * n_off] for r in range(n_rx)]).reshape(n_rx, n_s, n_off)
    s_rows[:, :, 1:-1] = level[None, :n_s, None] * run
    s_rows[:, :, 0] = extra[..., 3]
    s_rows[:, :, -1] = extra[..., 4]
    # the rows of tau ascend, so a count of those below a time is where it sorts in: the window's own samples
    # are a_r <= j < b_r
    a = np.count_nonzero(tau < centre - half, axis=1)
    b = np.count_nonzero(tau <= centre + half, axis=1)
    window_min = s_marks.min(axis=2)  # (n_rx, n_s)
    for row in np.flatnonzero(b > a):
        window_min[row] = np.minimum(window_min[row], s_rows[row, :, a[row] : b[row]].min(axis=1))
    min_sample = window_min.min(axis=1)
    errors = np.count_nonzero(window_min < threshold_v, axis=1)
    at_centre = s_marks[..., 1]  # (n_rx, n_s)
    ones, zeros = level[:n_s] > 0, level[:n_s] < 0
    if ones.any() and zeros.any():
        eye_height = at_centre[:, ones].min(axis=1) + at_centre[:, zeros].min(axis=1)
    else:
        eye_height = 2.0 * at_centre.min(axis=1)
    j_c = np.clip(np.count_nonzero(tau < centre, axis=1), 1, tau.shape[1] - 2)
    widths = np.where(at_centre.min(axis=1) < threshold_v, 0.0, _eye_width_s(tau, s_rows.min(axis=1), threshold_v, j_c))

    # settling: in each edge bit, the last rise through the threshold before the sampling instant (interpolated)
    edges_s = np.flatnonzero(edge[:n_s])
    at_edges = s_rows[:, edges_s, :]  # (n_rx, n_edges, n_off + 2)
    upto = j_c + 1  # (n_rx,) samples up to the sampling instant
    before = np.arange(n_off + 2)[None, None, :] < upto[:, None, None]
    bad = (at_edges < threshold_v) & before
    last = np.where(bad.any(axis=2), n_off + 1 - np.argmax(bad[..., ::-1], axis=2), -1)  # (n_rx, n_edges)
    i = np.clip(last, 0, (upto - 2)[:, None])
    s0 = np.take_along_axis(at_edges, i[..., None], 2)[..., 0]
    s1 = np.take_along_axis(at_edges, i[..., None] + 1, 2)[..., 0]
    t0, t1 = np.take_along_axis(tau, i, 1), np.take_along_axis(tau, i + 1, 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        rise = np.where(s1 != s0, t0 + (threshold_v - s0) / (s1 - s0) * (t1 - t0), t1)
    settle = np.where(last < 0, 0.0, rise).max(axis=1, initial=0.0)
    settle = phase + settle
    failed_at_centre = s_marks[:, edge[:n_s], 1] < threshold_v
    settle = np.where(failed_at_centre.any(axis=1), np.inf, settle)

    # overshoot, ringback and false crossings inside each bit's own window
    # (rounding is monotonic, so the largest of x - a is the largest x less a, and so on)
    overshoot = np.maximum(0.0, sv.max(axis=(1, 2)) - amp[:, 0, 0])
    peak = np.maximum(v.max(axis=(1, 2)), -v.min(axis=(1, 2)))
    reaches = sv >= amp
    first_reach = np.argmax(reaches, axis=2)  # (n_rx, n_bits)
    after_reach = np.arange(n_off) >= first_reach[..., None]
    dip = amp[..., 0] - np.where(after_reach, sv, np.inf).min(axis=2)  # the lowest level once it has reached it
    undershoot = np.maximum(0.0, np.where(reaches.any(axis=2), dip, 0.0).max(axis=1))
    recross = _recrossings(sv, threshold_v, threshold_v - 2.0 * ACCURACY * amp[..., 0])

    out = []
    for r in range(n_rx):
        a = float(amp[r, 0, 0])
        out.append(
            ReceiverMetrics(
                receiver=local.receiver_names[r],
                driver=local.driver_name,
                amplitude_v=a,
                peak_v=float(peak[r]),
                overshoot_v=float(overshoot[r]),
                overshoot_ratio=float(overshoot[r]) / a if a > 0 else float("inf"),
                undershoot_v=float(undershoot[r]),
                threshold_recrossings=int(recross[r]),
                settle_time_s=float(settle[r]),
                settle_margin_s=float(phase[r] + centre - settle[r]),
                min_sample_v=float(min_sample[r]),
                sample_errors=int(errors[r]),
                eye_height_v=float(eye_height[r]),
                eye_width_s=float(widths[r]),
                eye_width_ui=float(widths[r]) / t_bit,
                propagation_delay_s=float(delay[r]),
                jitter_s=float(spread[r]),
                jitter_ui=float(spread[r]) / t_bit,
                bit_time_s=t_bit,
                threshold_v=threshold_v,
                sampling_centre_ui=sampling.centre_ui,
                sampling_half_width_ui=sampling.half_width_ui,
            )
        )
    return out


def _row_nanmedian(x: np.ndarray) -> np.ndarray:
    """The median of each row's values that are not NaN, (n_rows,): the middle one, or the mean of the middle two
    (as np.nanmedian, without its masked-array path); NaN for a row of none."""
    if x.shape[1] == 0:
        return np.full(x.shape[0], np.nan)
    ordered = np.sort(x, axis=1)  # NaN last
    count = np.count_nonzero(~np.isnan(x), axis=1)
    rows = np.arange(x.shape[0])
    low = ordered[rows, np.maximum((count - 1) // 2, 0)]
    high = ordered[rows, count // 2]
    return np.asarray(np.where(count % 2 == 1, low, (low + high) / 2.0))


def _recrossings(sv: np.ndarray, threshold_v: float, below_v: np.ndarray) -> np.ndarray:
    """Per row, (n_rows,): falls of sv (n_rows, n_windows, n_off) from >= threshold_v to below below_v (n_rows, 1),
    counted once each (hysteresis), within each window. Only windows that go below after being above are walked."""
    hi = sv >= threshold_v
    lo = sv < below_v[..., None]
    n_off = sv.shape[2]
    first_hi = np.where(hi.any(axis=2), np.argmax(hi, axis=2), n_off)
    last_lo = np.where(lo.any(axis=2), n_off - 1 - np.argmax(lo[..., ::-1], axis=2), -1)
    out = np.zeros(sv.shape[0], dtype=int)
    for r, n in zip(*np.nonzero(first_hi < last_lo), strict=True):
        state = np.where(hi[r, n], 1, np.where(lo[r, n], -1, 0))
        held = state[state != 0]  # the band between is no change of state
        out[r] += int(np.count_nonzero((held[:-1] == 1) & (held[1:] == -1)))
    return out


def _interp_rows(at: np.ndarray, grid: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Linear interpolation of each row of values (n_rows, n_grid) at its own times at (n_rows, n_at); ends held."""
    idx = np.clip(np.searchsorted(grid, at, side="right") - 1, 0, grid.size - 2)
    t0, t1 = grid[idx], grid[idx + 1]
    w = np.clip((at - t0) / (t1 - t0), 0.0, 1.0)
    v0 = np.take_along_axis(values, idx, 1)
    v1 = np.take_along_axis(values, idx + 1, 1)
    return np.asarray(v0 + (v1 - v0) * w)


def _eye_width_s(tau: np.ndarray, worst: np.ndarray, threshold_v: float, j_c: np.ndarray) -> np.ndarray:
    """Per row, (n_rows,): the contiguous span around tau[r, j_c] where the worst driven-side level over all bits,
    worst (n_rows, n_tau), is at or above the threshold, its ends interpolated linearly; 0 when closed there."""
    n_rows, n_tau = worst.shape
    rows = np.arange(n_rows)
    col = np.arange(n_tau)[None, :]
    below = worst < threshold_v
    left = np.where(below & (col < j_c[:, None]), col, -1).max(axis=1)  # last closed sample left of the centre
    right = np.where(below & (col > j_c[:, None]), col, n_tau).min(axis=1)
    li, ri = np.clip(left, 0, n_tau - 2), np.clip(right, 1, n_tau - 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_left = np.where(
            left >= 0,
            tau[rows, li]
            + (threshold_v - worst[rows, li])
            / (worst[rows, li + 1] - worst[rows, li])
            * (tau[rows, li + 1] - tau[rows, li]),
            tau[:, 0],
        )
        t_right = np.where(
            right < n_tau,
            tau[rows, ri - 1]
            + (worst[rows, ri - 1] - threshold_v)
            / (worst[rows, ri - 1] - worst[rows, ri])
            * (tau[rows, ri] - tau[rows, ri - 1]),
            tau[:, -1],
        )
    return np.asarray(np.minimum(t_right - t_left, tau[:, -2] - tau[:, 0]))


def driver_metrics(
    bus: Bus,
    driver_names: "tuple[str, ...] | list[str] | None" = None,
    *,
    pattern: str | None = None,
    threshold_v: float = RECEIVER_THRESHOLD_V,
) -> dict[str, tuple[ReceiverMetrics, ...]]:
    """receiver_metrics for several drivers (None: every node that may drive), step responses batched over
    DRIVERS_PER_PASS drivers at a time so memory stays bounded however many transceivers the bus has."""
    names = tuple(bus.drivers_possible if bus.plan.standard == "rs485" else [bus.plan.driver.name])
    names = names if driver_names is None else tuple(driver_names)
    n_bits = len(pattern or bus.plan.test_pattern or "x" * DEFAULT_PATTERN_BITS)
    out: dict[str, tuple[ReceiverMetrics, ...]] = {}
    for d0 in range(0, len(names), DRIVERS_PER_PASS):
        group = names[d0 : d0 + DRIVERS_PER_PASS]
        steps = step_responses(bus, group, max_time_s=n_bits / bus.plan.bit_rate_bps)
        for name in group:
            out[name] = receiver_metrics(
                bus, driver_name=name, pattern=pattern, threshold_v=threshold_v, step=steps.for_driver(name)
            )
    return out
