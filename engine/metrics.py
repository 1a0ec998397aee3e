"""Signal verdict inputs at every receiver: levels, overshoot, ringback, false threshold crossings, settling,
eye opening, propagation delay and jitter, read from the pattern waveforms.

Conventions (all differential, V_AB):
- The receiver decides 1 at V >= +threshold and 0 at V <= -threshold; between lies the undefined band
  (+/-200 mV for TIA-485-A and TIA-422-B receivers, the default `threshold_v`).
- Each receiver is judged in its own time frame: bit n's window runs from the moment edge n starts to arrive
  there (n T_bit + t_a, t_a the step response's 2 % crossing) to the moment edge n + 1 does, so ringing is
  charged to the bit that caused it. A UART-style receiver samples half a bit after the 50 % crossing it
  synchronised on (n T_bit + t_50 + T_bit / 2). propagation_delay_s is t_50 minus the driver ramp's own
  50 % point. A window that the pattern's end cuts short is left out.
  The "driven side" of window n is s_n = +1 for a 1 bit, -1 for a 0.
- amplitude_v: the settled level |V| after a long run of equal bits (exact DC solve), one polarity: the
  differential signal swings between -amplitude_v and +amplitude_v, so a settled eye is 2 x amplitude_v.
- overshoot_v: how far s_n V rises above the settled level, worst over the pattern.
- undershoot_v: ringback: after s_n V has reached the settled level inside a window, how far it then drops
  below it (0 when the approach is monotonic).
- threshold_recrossings: times, over the pattern, that s_n V falls back below +threshold after having
  passed it inside the same window: each can make the receiver output a false extra bit.
- settle_time_s: worst time from a window's start (the edge's arrival) until s_n V stays at or above the
  threshold up to the sampling instant; inf if it is not there at the sampling instant. settle_margin_s is
  the sampling instant minus that, in the same frame.
- eye_height_v: at the sampling instant, min over 1 bits minus max over 0 bits of V (inner eye).
- eye_width_s: the contiguous span around the sampling instant in which every 1 bit is >= +threshold and
  every 0 bit <= -threshold.
- jitter_s: peak-to-peak spread of the 0 V crossing times of all edges (data-dependent jitter / ISI).
- sample_errors: sampled bits not on their driven side beyond the threshold.
"""

from dataclasses import dataclass, replace

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.waveform import (
    DEFAULT_PATTERN_BITS,
    StepResponses,
    Waveforms,
    default_pattern,
    edge_duration_s,
    simulate_pattern,
    step_responses,
)

RECEIVER_THRESHOLD_V = 0.2  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity, +/-200 mV
RECEIVERS_PER_PASS = 16  # receivers whose pattern waveforms are held at once (small blocks stay in cache)
ARRIVAL_FRACTION = 0.02  # of the settled level: an edge has started to arrive
DRIVERS_PER_PASS = 8  # drivers whose step responses are held at once


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


def crossing_time_s(step: StepResponses, fraction: float) -> np.ndarray:
    """Per driver and receiver, (n_drivers, n_receivers): first time the step response reaches `fraction` of its
    settled level (inf if it never does). Linear interpolation between samples."""
    level = fraction * step.v_final_v[..., None]
    above = np.where(step.v_final_v[..., None] >= 0, step.v_diff_v >= level, step.v_diff_v <= level)
    first = np.argmax(above, axis=-1)  # (n_d, n_rx)
    prev = np.clip(first - 1, 0, None)
    v0 = np.take_along_axis(step.v_diff_v, prev[..., None], -1)[..., 0]
    v1 = np.take_along_axis(step.v_diff_v, first[..., None], -1)[..., 0]
    t0, t1 = step.time_s[prev], step.time_s[first]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(v1 != v0, (level[..., 0] - v0) / (v1 - v0), 0.0)
    t_cross = t0 + np.clip(frac, 0.0, 1.0) * (t1 - t0)
    return np.asarray(np.where(np.any(above, axis=-1), t_cross, np.inf))


def propagation_delay_s(step: StepResponses) -> np.ndarray:
    """Per driver and receiver, (n_drivers, n_receivers): the step response's 50 % crossing minus the driver
    ramp's own 50 % point T_e / 2."""
    return np.asarray(crossing_time_s(step, 0.5) - 0.5 * edge_duration_s(step.rise_time_s))


def arrival_time_s(step: StepResponses) -> np.ndarray:
    """Per driver and receiver: when an edge starts to arrive, the step response's ARRIVAL_FRACTION crossing."""
    return crossing_time_s(step, ARRIVAL_FRACTION)


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
        n_bits = len(bits) if bits is not None else DEFAULT_PATTERN_BITS
        step = step_responses(bus, names, max_time_s=n_bits / bus.plan.bit_rate_bps)
    if bits is None:
        bits = default_pattern(step, 1.0 / bus.plan.bit_rate_bps)
    delays = propagation_delay_s(step)[0]
    arrivals = arrival_time_s(step)[0]
    amplitudes = np.abs(step.v_final_v[0])
    edge_s = edge_duration_s(step.rise_time_s)
    out: list[ReceiverMetrics] = []
    all_rx = step.receiver_names
    for r0 in range(0, len(all_rx), RECEIVERS_PER_PASS):
        chunk = slice(r0, r0 + RECEIVERS_PER_PASS)
        wave = simulate_pattern(bus, bits, driver_name, receiver_names=all_rx[chunk], step=step)
        out.extend(pattern_metrics(wave, delays[chunk], arrivals[chunk], amplitudes[chunk], edge_s, threshold_v))
    return tuple(out)


def pattern_metrics(
    wave: Waveforms,
    delay_s: np.ndarray,
    arrival_s: np.ndarray,
    amplitude_v: np.ndarray,
    edge_s: float,
    threshold_v: float = RECEIVER_THRESHOLD_V,
) -> list[ReceiverMetrics]:
    """Metrics of every receiver in a Waveforms, vectorised over receivers; conventions in the module docstring.

    delay_s, arrival_s, amplitude_v: (n_receivers,) propagation delays, arrival times and settled levels from
    the step response; edge_s: the driver ramp's 0-100 % duration.
    """
    t_bit = wave.bit_time_s
    n_rx, n_off = wave.v_diff_v.shape[0], wave.offsets_s.size
    n_bits = len(wave.bits)
    level = np.where(np.frombuffer(wave.bits.encode(), dtype=np.uint8) == ord("1"), 1.0, -1.0)
    shift = np.where(np.isfinite(arrival_s), arrival_s, 0.0)
    # re-bin into receiver windows: the grid repeats every bit, so window n of receiver r is a contiguous run
    start = np.searchsorted(wave.time_s, shift, side="left")
    n_win = int(max(1, (n_bits * n_off - start.max()) // n_off))
    start = np.minimum(start, n_bits * n_off - n_win * n_off)
    rows = np.arange(n_rx)[:, None]
    v = wave.v_diff_v[rows, start[:, None] + np.arange(n_win * n_off)[None, :]].reshape(n_rx, n_win, n_off)
    tau = wave.time_s[start[:, None] + np.arange(n_off)[None, :]] - shift[:, None]  # (n_rx, n_off) local offsets
    lv = level[:n_win]
    edge = np.r_[False, lv[1:] != lv[:-1]]
    amp = amplitude_v[:, None, None]

    # sampling instant: half a bit after the 50 % crossing the receiver synchronised on, interpolated
    t_half = np.where(np.isfinite(delay_s), delay_s + 0.5 * edge_s, shift)
    t_sample = np.clip(t_half - shift + 0.5 * t_bit, tau[:, 0], tau[:, -1])  # (n_rx,) local
    i_mid = np.clip(np.array([np.searchsorted(t, ts) for t, ts in zip(tau, t_sample, strict=True)]) - 1, 0, n_off - 2)
    t0 = np.take_along_axis(tau, i_mid[:, None], 1)
    t1 = np.take_along_axis(tau, i_mid[:, None] + 1, 1)
    w = ((t_sample[:, None] - t0) / (t1 - t0))[:, :, None]  # (n_rx, 1, 1)
    v0 = np.take_along_axis(v, i_mid[:, None, None] * np.ones((1, n_win, 1), dtype=int), 2)
    v1 = np.take_along_axis(v, i_mid[:, None, None] * np.ones((1, n_win, 1), dtype=int) + 1, 2)
    v_mid = (v0 * (1.0 - w) + v1 * w)[..., 0]  # (n_rx, n_win)
    sv_mid = lv[None, :] * v_mid

    # the window ends where the next edge arrives; the transform's low-pass lets that edge lean back by a few
    # hundredths of its ramp, so the last 10 % of a ramp-time is left to the next window
    inside = (tau < t_bit - 0.1 * edge_s)[:, None, :]
    sv_raw = lv[None, :, None] * v
    sv = np.where(inside, sv_raw, np.inf)
    valid = sv >= threshold_v
    entered = np.maximum.accumulate(valid, axis=2)
    recross = np.count_nonzero(entered[..., 1:] & valid[..., :-1] & ~valid[..., 1:], axis=(1, 2))
    reached = np.maximum.accumulate(sv >= amp, axis=2) & inside
    undershoot = np.maximum(0.0, np.where(reached, amp - sv, 0.0).max(axis=(1, 2)))
    overshoot = np.maximum(0.0, np.where(inside, sv_raw - amp, 0.0).max(axis=(1, 2)))

    # settling: in edge windows, the last invalid sample before the sampling instant
    col = np.arange(n_off)[None, None, :]
    bad = ~valid[:, edge, :] & (col <= i_mid[:, None, None])
    last_bad = np.where(bad.any(axis=2), n_off - 1 - np.argmax(bad[..., ::-1], axis=2), -1).max(axis=1, initial=-1)
    settle = np.where(last_bad < 0, 0.0, np.take_along_axis(tau, np.clip(last_bad + 1, 0, n_off - 1)[:, None], 1)[:, 0])
    settle = np.where((sv_mid[:, edge] < threshold_v).any(axis=1), np.inf, settle)

    ones, zeros = lv > 0, lv < 0
    eye_height = np.where(
        ones.any() and zeros.any(),
        v_mid[:, ones].min(axis=1, initial=np.inf) - v_mid[:, zeros].max(axis=1, initial=-np.inf),
        2.0 * np.abs(v_mid).min(axis=1),
    )

    # jitter: the 0 V crossing of each edge window (driven-side voltage turning positive)
    pos = sv_raw[:, edge, :] >= 0.0
    first = np.argmax(pos, axis=2)  # (n_rx, n_edges)
    has = pos.any(axis=2) & (first > 0)
    k = np.clip(first, 1, n_off - 1)
    ta = np.take_along_axis(tau[:, None, :], (k - 1)[..., None], 2)[..., 0]
    tb = np.take_along_axis(tau[:, None, :], k[..., None], 2)[..., 0]
    va = np.take_along_axis(sv_raw[:, edge, :], (k - 1)[..., None], 2)[..., 0]
    vb = np.take_along_axis(sv_raw[:, edge, :], k[..., None], 2)[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        t_cross = np.where(vb != va, ta - va * (tb - ta) / (vb - va), ta)
    hi = np.where(has, t_cross, -np.inf).max(axis=1, initial=-np.inf)
    lo = np.where(has, t_cross, np.inf).min(axis=1, initial=np.inf)
    jitter = np.where(has.sum(axis=1) >= 2, hi - lo, 0.0)

    widths = _eye_width_s(tau, v, lv, threshold_v, t_bit, t_sample)
    out = []
    for r in range(n_rx):
        width = float(widths[r])
        a = float(amplitude_v[r])
        out.append(
            ReceiverMetrics(
                receiver=wave.receiver_names[r],
                driver=wave.driver_name,
                amplitude_v=a,
                peak_v=float(np.abs(wave.v_diff_v[r]).max()),
                overshoot_v=float(overshoot[r]),
                overshoot_ratio=float(overshoot[r]) / a if a > 0 else float("inf"),
                undershoot_v=float(undershoot[r]),
                threshold_recrossings=int(recross[r]),
                settle_time_s=float(settle[r]),
                settle_margin_s=float(t_sample[r] - settle[r]),
                min_sample_v=float(sv_mid[r].min()),
                sample_errors=int(np.count_nonzero(sv_mid[r] < threshold_v)),
                eye_height_v=float(eye_height[r]),
                eye_width_s=width,
                eye_width_ui=width / t_bit,
                propagation_delay_s=float(delay_s[r]),
                jitter_s=float(jitter[r]),
                jitter_ui=float(jitter[r]) / t_bit,
                bit_time_s=t_bit,
                threshold_v=threshold_v,
            )
        )
    return out


def _eye_width_s(
    tau: np.ndarray, v: np.ndarray, level: np.ndarray, threshold_v: float, t_bit: float, t_sample: np.ndarray
) -> np.ndarray:
    """Per receiver, (n_rx,): the contiguous span around the sampling instant where all 1s are >= +threshold
    and all 0s <= -threshold. tau (n_rx, n_off) local offsets, v (n_rx, n_win, n_off), t_sample (n_rx,).

    The eye of bit n may reach into window n + 1 (until the next edge has crossed the band there), so the
    right side continues over the next window with bit n's level.
    """
    n_rx, n_off = tau.shape

    def open_at(rows: np.ndarray, lv: np.ndarray) -> np.ndarray:  # rows (n_rx, n, n_off) -> (n_rx, n_off)
        ones, zeros = lv > 0, lv < 0
        low_of_ones = rows[:, ones].min(axis=1) if ones.any() else np.full((n_rx, n_off), np.inf)
        high_of_zeros = rows[:, zeros].max(axis=1) if zeros.any() else np.full((n_rx, n_off), -np.inf)
        return np.asarray((low_of_ones >= threshold_v) & (high_of_zeros <= -threshold_v))

    several = v.shape[1] > 1
    here = open_at(v[:, :-1], level[:-1]) if several else open_at(v, level)
    after = open_at(v[:, 1:], level[:-1]) if several else np.zeros((n_rx, n_off), dtype=bool)
    rows = np.arange(n_rx)
    col = np.arange(n_off)[None, :]
    mid = np.clip(np.count_nonzero(tau < t_sample[:, None], axis=1), 0, n_off - 1)[:, None]
    last_left = np.where(~here & (col < mid), col, -1).max(axis=1)
    t_left = np.where(last_left >= 0, tau[rows, np.clip(last_left + 1, 0, n_off - 1)], 0.0)
    first_right = np.where(~here & (col >= mid), col, n_off).min(axis=1)
    t_right_here = tau[rows, np.clip(first_right - 1, 0, n_off - 1)]
    first_after = np.where(~after, col, n_off).min(axis=1)
    t_right_after = np.where(
        first_after < n_off,
        t_bit + np.where(first_after > 0, tau[rows, np.clip(first_after - 1, 0, n_off - 1)], 0.0),
        2.0 * t_bit,
    )
    t_right = np.where(first_right < n_off, t_right_here, t_right_after)
    width = np.minimum(t_bit, np.maximum(0.0, t_right - t_left))
    return np.asarray(np.where(here[rows, mid[:, 0]], width, 0.0))


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
        for i, name in enumerate(group):
            one = replace(
                steps,
                driver_names=(name,),
                v_diff_v=steps.v_diff_v[i : i + 1],
                v_final_v=steps.v_final_v[i : i + 1],
            )
            out[name] = receiver_metrics(bus, driver_name=name, pattern=pattern, threshold_v=threshold_v, step=one)
    return out
