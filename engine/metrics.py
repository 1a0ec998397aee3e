"""Signal verdict inputs at every receiver: levels, overshoot, ringback, false threshold crossings, settling,
eye opening, propagation delay and jitter, read from the pattern waveforms.

Conventions (all differential, V_AB):
- The receiver decides 1 at V >= +threshold and 0 at V <= -threshold; between lies the undefined band
  (+/-200 mV for TIA-485-A and TIA-422-B receivers, the default `threshold_v`).
- Each receiver is judged in its own time frame: bit n's window starts at n T_bit + t_pd, the moment the
  edge starts arriving there (t_pd is that receiver's propagation delay: the step response's 50 % crossing
  minus the driver ramp's 50 % point), and a UART-style receiver samples mid-window. A window that the
  pattern's end cuts short is left out. The "driven side" of window n is s_n = +1 for a 1 bit, -1 for a 0.
- amplitude_v: the settled level |V| after a long run of equal bits (exact DC solve).
- overshoot_v: how far s_n V rises above the settled level, worst over the pattern.
- undershoot_v: ringback: after s_n V has reached the settled level inside a window, how far it then drops
  below it (0 when the approach is monotonic).
- threshold_recrossings: times, over the pattern, that s_n V falls back below +threshold after having
  passed it inside the same window: each can make the receiver output a false extra bit.
- settle_time_s: worst time from a window's start (the edge's arrival) until s_n V stays at or above the
  threshold up to the sampling instant; inf if it is not there at the sampling instant.
- eye_height_v: at the sampling instant, min over 1 bits minus max over 0 bits of V (inner eye).
- eye_width_s: the contiguous span around the sampling instant in which every 1 bit is >= +threshold and
  every 0 bit <= -threshold.
- jitter_s: peak-to-peak spread of the 0 V crossing times of all edges (data-dependent jitter / ISI).
- sample_errors: sampled bits not on their driven side beyond the threshold.
"""

from dataclasses import dataclass

import numpy as np

from engine.bus import Bus
from engine.waveform import StepResponses, Waveforms, edge_duration_s, simulate_pattern, step_responses

RECEIVER_THRESHOLD_V = 0.2  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity, +/-200 mV
RECEIVERS_PER_PASS = 32  # receivers whose pattern waveforms are held at once


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
    settle_margin_s: float  # half a bit minus settle_time_s (negative: not settled when sampled)
    min_sample_v: float  # smallest s_n V at the sampling instants (below threshold: a wrong or undefined bit)
    sample_errors: int
    eye_height_v: float
    eye_width_s: float
    eye_width_ui: float  # eye_width_s / T_bit
    propagation_delay_s: float
    jitter_s: float
    jitter_ui: float  # jitter_s / T_bit
    bit_time_s: float
    threshold_v: float


def propagation_delay_s(step: StepResponses) -> np.ndarray:
    """Per driver and receiver, (n_drivers, n_receivers): first time the step response reaches half its settled
    level, minus the driver ramp's own half-way time T_e / 2. Linear interpolation between samples."""
    half = 0.5 * step.v_final_v[..., None]
    above = np.where(step.v_final_v[..., None] >= 0, step.v_diff_v >= half, step.v_diff_v <= half)
    first = np.argmax(above, axis=-1)  # (n_d, n_rx)
    prev = np.clip(first - 1, 0, None)
    v0 = np.take_along_axis(step.v_diff_v, prev[..., None], -1)[..., 0]
    v1 = np.take_along_axis(step.v_diff_v, first[..., None], -1)[..., 0]
    t0, t1 = step.time_s[prev], step.time_s[first]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(v1 != v0, (half[..., 0] - v0) / (v1 - v0), 0.0)
    t_half = t0 + np.clip(frac, 0.0, 1.0) * (t1 - t0)
    t_half = np.where(np.any(above, axis=-1), t_half, np.inf)
    return np.asarray(t_half - 0.5 * edge_duration_s(step.rise_time_s))


def receiver_metrics(
    bus: Bus,
    *,
    driver_name: str | None = None,
    pattern: str | None = None,
    threshold_v: float = RECEIVER_THRESHOLD_V,
    step: StepResponses | None = None,
) -> tuple[ReceiverMetrics, ...]:
    """Metrics at every receiver (plan node order) for one driver and a bit pattern (see simulate_pattern).

    Receivers are processed RECEIVERS_PER_PASS at a time, so memory stays bounded on large buses.
    step: the driver's StepResponses to reuse (covering the pattern or settled).
    """
    names = (bus.plan.driver.name,) if driver_name is None else (driver_name,)
    bits = pattern if pattern is not None else bus.plan.test_pattern
    if step is None or step.driver_names[:1] != names:
        duration_s = len(bits or "x" * 127) / bus.plan.bit_rate_bps
        step = step_responses(bus, names, max_time_s=duration_s)
    delays = propagation_delay_s(step)[0]
    out: list[ReceiverMetrics] = []
    all_rx = step.receiver_names
    for r0 in range(0, len(all_rx), RECEIVERS_PER_PASS):
        chunk = all_rx[r0 : r0 + RECEIVERS_PER_PASS]
        wave = simulate_pattern(bus, bits, driver_name, receiver_names=chunk, step=step)
        for i, name in enumerate(chunk):
            r = r0 + i
            out.append(
                waveform_metrics(
                    wave,
                    i,
                    float(delays[r]),
                    abs(float(step.v_final_v[0, r])),
                    edge_duration_s(step.rise_time_s),
                    threshold_v,
                    name,
                    names[0],
                )
            )
    return tuple(out)


def waveform_metrics(
    wave: Waveforms,
    index: int,
    delay_s: float,
    amplitude_v: float,
    edge_s: float,
    threshold_v: float = RECEIVER_THRESHOLD_V,
    receiver: str = "",
    driver: str = "",
) -> ReceiverMetrics:
    """Metrics of one receiver's pattern waveform (row `index` of wave.v_diff_v); conventions in the module.

    delay_s: the receiver's propagation delay; amplitude_v: its settled level; edge_s: the driver ramp's 0-100 %
    duration.
    """
    t_bit = wave.bit_time_s
    v_all = wave.v_diff_v[index]
    n_off = wave.offsets_s.size
    level = np.where(np.frombuffer(wave.bits.encode(), dtype=np.uint8) == ord("1"), 1.0, -1.0)
    shift = delay_s if np.isfinite(delay_s) else 0.0
    # re-bin into receiver windows: the grid repeats every bit, so window n is a contiguous run of samples
    start = int(np.searchsorted(wave.time_s, shift, side="left"))
    n_win = (v_all.size - start) // n_off
    if n_win < 1:
        start, n_win = 0, v_all.size // n_off
    tau = wave.time_s[start : start + n_off] - shift  # local offsets in [0, T_bit)
    v = v_all[start : start + n_win * n_off].reshape(n_win, n_off)
    s = level[:n_win, None]
    sv = s * v  # driven-side voltage, (n_win, n_off)
    edge = np.r_[False, level[1:n_win] != level[: n_win - 1]]

    # sampling instant: mid-window, interpolated between the two neighbouring samples
    i_mid = int(np.clip(np.searchsorted(tau, 0.5 * t_bit) - 1, 0, n_off - 2))
    w = (0.5 * t_bit - tau[i_mid]) / (tau[i_mid + 1] - tau[i_mid])
    v_mid = v[:, i_mid] * (1.0 - w) + v[:, i_mid + 1] * w
    sv_mid = level[:n_win] * v_mid

    # the window ends where the next edge arrives; the transform's low-pass lets that edge lean back by a few
    # hundredths of its ramp, so the last 10 % of a ramp-time is left to the next window
    inside = tau < t_bit - 0.1 * edge_s
    sv = np.where(inside[None, :], sv, np.inf)
    valid = sv >= threshold_v
    entered = np.maximum.accumulate(valid, axis=1)
    drops = entered[:, 1:] & valid[:, :-1] & ~valid[:, 1:]
    recrossings = int(np.count_nonzero(drops))

    reached = np.maximum.accumulate(sv >= amplitude_v, axis=1)
    ringback = np.where(reached, amplitude_v - sv, 0.0)
    undershoot = float(max(0.0, ringback.max(initial=0.0)))
    overshoot = float(max(0.0, np.where(inside[None, :], sv - amplitude_v, 0.0).max(initial=0.0)))

    settle = _settle_time_s(tau, valid[edge], sv_mid[edge] >= threshold_v, i_mid)
    ones, zeros = v_mid[level[:n_win] > 0], v_mid[level[:n_win] < 0]
    eye_height = float((ones.min() if ones.size else np.inf) - (zeros.max() if zeros.size else -np.inf))
    if not np.isfinite(eye_height):
        eye_height = float(2.0 * np.abs(v_mid).min())
    eye_width = _eye_width_s(tau, v, level[:n_win], threshold_v, t_bit)
    jitter = _crossing_spread_s(wave, v_all, level, delay_s)
    return ReceiverMetrics(
        receiver=receiver,
        driver=driver,
        amplitude_v=amplitude_v,
        peak_v=float(np.abs(v_all).max()),
        overshoot_v=overshoot,
        overshoot_ratio=overshoot / amplitude_v if amplitude_v > 0 else float("inf"),
        undershoot_v=undershoot,
        threshold_recrossings=recrossings,
        settle_time_s=settle,
        settle_margin_s=0.5 * t_bit - settle,
        min_sample_v=float(sv_mid.min()),
        sample_errors=int(np.count_nonzero(sv_mid < threshold_v)),
        eye_height_v=eye_height,
        eye_width_s=eye_width,
        eye_width_ui=eye_width / t_bit,
        propagation_delay_s=delay_s,
        jitter_s=jitter,
        jitter_ui=jitter / t_bit,
        bit_time_s=t_bit,
        threshold_v=threshold_v,
    )


def _settle_time_s(tau: np.ndarray, valid: np.ndarray, valid_at_mid: np.ndarray, i_mid: int) -> float:
    """Worst over edge windows: the time after which the signal stays valid up to the sampling instant."""
    if valid.shape[0] == 0:
        return 0.0
    if not np.all(valid_at_mid):
        return float("inf")
    head = valid[:, : i_mid + 1]
    invalid = ~head
    # last invalid sample before mid, per window; the signal is valid from the next sample on
    last_bad = np.where(invalid.any(axis=1), head.shape[1] - 1 - np.argmax(invalid[:, ::-1], axis=1), -1)
    worst = int(last_bad.max())
    return 0.0 if worst < 0 else float(tau[min(worst + 1, tau.size - 1)])


def _eye_width_s(tau: np.ndarray, v: np.ndarray, level: np.ndarray, threshold_v: float, t_bit: float) -> float:
    """Contiguous span around mid-window where all 1s are >= +threshold and all 0s <= -threshold.

    The eye of bit n may reach into window n + 1 (until the next edge has crossed the band there), so the
    right side continues over the next window with bit n's level.
    """

    def open_at(rows: np.ndarray, lv: np.ndarray) -> np.ndarray:
        ones, zeros = lv > 0, lv < 0
        low_of_ones = rows[ones].min(axis=0) if ones.any() else np.full(tau.size, np.inf)
        high_of_zeros = rows[zeros].max(axis=0) if zeros.any() else np.full(tau.size, -np.inf)
        return np.asarray((low_of_ones >= threshold_v) & (high_of_zeros <= -threshold_v))

    here = open_at(v[:-1], level[:-1]) if v.shape[0] > 1 else open_at(v, level)
    after = open_at(v[1:], level[:-1]) if v.shape[0] > 1 else np.zeros(tau.size, dtype=bool)
    mid = int(np.clip(np.searchsorted(tau, 0.5 * t_bit), 0, tau.size - 1))
    if not here[mid]:
        return 0.0
    left_closed = np.flatnonzero(~here[:mid])
    t_left = tau[left_closed[-1] + 1] if left_closed.size else 0.0
    right_closed = np.flatnonzero(~here[mid:])
    if right_closed.size:
        t_right = tau[mid + right_closed[0] - 1]
    else:
        closed_after = np.flatnonzero(~after)
        t_right = t_bit + (tau[closed_after[0] - 1] if closed_after.size and closed_after[0] > 0 else 0.0)
        if not closed_after.size:
            t_right = 2.0 * t_bit
    return float(min(t_bit, max(0.0, t_right - t_left)))


def _crossing_spread_s(wave: Waveforms, v_all: np.ndarray, level: np.ndarray, delay_s: float) -> float:
    """Peak-to-peak spread, over all edges, of the first 0 V crossing in the edge's direction after the edge
    leaves the driver and before the next bit reaches the receiver."""
    t_bit = wave.bit_time_s
    edges = np.flatnonzero(level[1:] != level[:-1]) + 1
    k = np.flatnonzero(np.sign(v_all[1:]) * np.sign(v_all[:-1]) < 0)  # a crossing between samples k and k+1
    if edges.size < 2 or k.size == 0:
        return 0.0
    t = wave.time_s
    t_cross = t[k] - v_all[k] * (t[k + 1] - t[k]) / (v_all[k + 1] - v_all[k])
    rising = v_all[k + 1] > v_all[k]
    late = (delay_s if np.isfinite(delay_s) else 0.0) + t_bit
    times = []
    for want_rising in (True, False):
        pool = t_cross[rising == want_rising]
        n = edges[(level[edges] > 0) == want_rising]
        if pool.size == 0 or n.size == 0:
            continue
        idx = np.searchsorted(pool, n * t_bit)
        ok = idx < pool.size
        found = pool[idx[ok]] - n[ok] * t_bit
        times.append(found[found <= late])
    spread = np.concatenate(times) if times else np.empty(0)
    return float(spread.max() - spread.min()) if spread.size >= 2 else 0.0
