"""Length versus bit rate for the plan's cable and driver: the longest trunk at which the worst receiver still
gets a usable signal, at each bit rate, plus where this plan sits.

The swept bus is the plan reduced to its worst case: the plan's driver at 0 m on no stub, every receiver's
unit loads lumped at the far end (the worst receiver for loss and delay) with the largest node input
capacitance, and, when the plan has terminators, terminators of the plan's mean terminator value at the
cable ends that need them (both for RS-485, the far end for RS-422). Each trunk length of a geometric grid
is simulated once (one edge response, engine.waveform.step_responses; criterion "tia422" needs only a closed
form); every bit rate is then judged from that, and the longest passing length is interpolated on a log scale
between grid points.

Criteria (pick one):
- "eye" (default): the worst-case eye at the far receiver is open beyond the receiver threshold. The
  worst case comes from peak distortion analysis of the edge response: with p(t) = s(t) - s(t - T_bit) the
  response to one bit, the worst received level at sampling phase u is p(u + cT) - sum_{k != c} |p(u + kT)|
  (c the main cursor), maximised over u. It must reach the threshold, 200 mV (TIA-485-A / TIA-422-B
  receiver sensitivity). Source: B. K. Casper et al., "An accurate and efficient analysis method for
  multi-Gb/s chip-to-chip signaling schemes", Symp. VLSI Circuits 2002 (peak distortion analysis).
- "tia422": the TIA/EIA-422-B Annex A criteria on the cable model the Annex's curve implies: the signal's
  10-90 % rise time at the load at most half a bit, and a voltage loss between generator (the driver's
  terminals) and load of at most 66 %. The rise time is the cable's whole capacitance (C' L plus the load's
  input capacitance) charged through the source resistance in parallel with the load resistance,
  t_cable = ln 9 (R_s || R_load) C, combined with the driver's own rise time as root-sum-square:
  t_load = sqrt(t_driver^2 + t_cable^2). This lumped model makes t_load grow linearly with length, which is
  the Annex curve's straight fall of slope -1 on its log-log axes (1200 m near 100 kbit/s to about 12 m at
  10 Mbit/s); with R_s = 40 Ohm and the Annex's 100 Ohm load and 52.5 pF/m it gives 15 m at 10 Mbit/s.
  Source: rise time of a single-pole RC, t_10-90 = ln 9 RC; cascaded rise times add as root-sum-square
  (H. Johnson, M. Graham, High-Speed Digital Design, 1993, ch. 1 and 4).
  The Annex's loss limit is also quoted as 6 dB; that reading cannot reach the curve's own 1200 m on 24 AWG
  (6 dB allows a loop resistance of only one load resistance, about 600 m), so the 66 % reading is used.
- "tia422-line": the same two criteria applied to the simulated far-end signal of the transmission line.
  A 12-60 m line is electrically long against a 50 ns half bit (one-way delay 63-315 ns), so its capacitance
  is not charged as a lump: a terminated line passes the driver's edge on at Z0, and only the cable's
  frequency-dependent loss slows it. This physical curve runs about four times above the Annex's at high
  rates (about 64 m at 10 Mbit/s with a 10 ns driver) and shows how conservative the Annex's slope is.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus, build_bus
from pairline.engine.metrics import RECEIVER_THRESHOLD_V, crossing_time_s
from pairline.engine.plan import MAX_TRUNK_M, BusPlan, DeviceSpec, NodeSpec, TerminationSpec
from pairline.engine.rules.cable_ends import required_ends_m
from pairline.engine.waveform import step_responses

MIN_LENGTH_M = 1.0
LENGTH_POINTS = 20  # geometric grid from MIN_LENGTH_M to MAX_TRUNK_M (about 55 % apart; a plot, ~3 % in length)
PHASES = 16  # sampling phases tried per bit
MAX_CURSORS = 256  # bits of the edge response summed one by one; the rest bounded by the remaining drift
TIA422_MAX_LOSS = 0.66
SWEEP_SOURCES = {
    "eye": "Simulated far-end eye (peak distortion analysis) against the ±200 mV receiver threshold of "
    "TIA/EIA-485-A and TIA/EIA-422-B",
    "tia422": "TIA/EIA-422-B Annex A criteria (rise time at the load <= half a bit; voltage loss <= 66 %) "
    "with the cable's capacitance charged as a lump through the source and load resistances",
    "tia422-line": "TIA/EIA-422-B Annex A criteria (rise time at the load <= half a bit; voltage loss <= 66 %) "
    "applied to the simulated far-end signal of the transmission line",
}


@dataclass(frozen=True, slots=True)
class LengthRateCurve:
    """Longest trunk per bit rate for the plan's cable and driver, and the plan's own point."""

    bit_rate_bps: np.ndarray  # (n_rates,) ascending
    max_length_m: np.ndarray  # (n_rates,) 0 when even MIN_LENGTH_M fails; MAX_TRUNK_M when everything passes
    criterion: str  # "eye", "tia422" or "tia422-line"
    plan_bit_rate_bps: float
    plan_length_m: float
    plan_max_length_m: float  # the curve at the plan's bit rate
    plan_inside: bool  # the plan's trunk is no longer than the curve allows at its rate
    source: str


def default_bit_rates_bps(bus: Bus) -> np.ndarray:
    """1 kbit/s up to the rate whose bit equals the driver's rise time, 4 points per decade."""
    top = max(1e4, min(100e6, 1.0 / bus.driver.rise_time_s))
    n = int(math.ceil(4 * math.log10(top / 1e3))) + 1
    return np.geomspace(1e3, top, n)


def sweep_bus(bus: Bus, length_m: float) -> Bus:
    """The plan reduced to its worst case at a trunk length (module docstring)."""
    plan = bus.plan
    devices = [bus.devices[n.name] for n in plan.nodes]
    unit_loads = min(32.0, sum(d.unit_loads for d in devices))
    cap_f = max(d.input_capacitance_f for d in devices)
    lumped = DeviceSpec(class_key=None, unit_loads=unit_loads, input_capacitance_f=cap_f)
    node = NodeSpec(name="far-end", position_m=length_m, device=lumped)
    driver = plan.driver.model_copy(update={"position_m": 0.0, "stub_length_m": 0.0})
    swept: BusPlan = plan.model_copy(
        update={"trunk_length_m": length_m, "driver": driver, "nodes": [node], "terminations": [], "bias": []}
    )
    if plan.terminations:
        r_t = float(np.mean([t.resistance_ohm for t in plan.terminations]))
        ends = required_ends_m(build_bus(swept))
        terms = [TerminationSpec(position_m=e, resistance_ohm=r_t) for e in ends]
        swept = swept.model_copy(update={"terminations": terms})
    return build_bus(swept)


def _worst_eye_half_v(time_s: np.ndarray, v: np.ndarray, v_final: float, bit_s: np.ndarray) -> np.ndarray:
    """Worst-case received level (V) at the best sampling phase, per bit time: peak distortion analysis."""
    out = np.empty(bit_s.size)
    for i, t_bit in enumerate(bit_s):
        n_k = int(min(MAX_CURSORS, math.ceil(time_s[-1] / t_bit) + 2))
        u = (np.arange(PHASES) + 0.5) / PHASES * t_bit
        t = u[:, None] + np.arange(n_k)[None, :] * t_bit  # (phases, k)
        s_now = np.interp(t, time_s, v, left=0.0, right=v_final)
        s_prev = np.interp(t - t_bit, time_s, v, left=0.0, right=v_final)
        s_prev[t - t_bit < 0.0] = 0.0
        p = s_now - s_prev
        cursor = p.max(axis=1)
        residual = np.abs(p).sum(axis=1) - np.abs(cursor)
        tail = np.abs(v_final - s_now[:, -1])  # drift left after the summed bits (exact for a monotone tail)
        out[i] = float((cursor - residual - tail).max())
    return out


def _far_end_loss(bus: Bus) -> float:
    """Voltage loss generator -> load at DC on the swept bus: R_loop / (R_loop + R_far) (closed form)."""
    plan = bus.plan
    r_loop = 2.0 * bus.cable.resistance_ohm_per_m * plan.trunk_length_m
    g_far = 1.0 / bus.devices[plan.nodes[0].name].budget_input_ohm
    g_far += sum(1.0 / t.resistance_ohm for t in plan.terminations if t.position_m == plan.trunk_length_m)
    return r_loop / (r_loop + 1.0 / g_far)


def lumped_rise_time_s(bus: Bus) -> float:
    """10-90 % rise time at the far load of a swept bus with the cable as one lumped capacitance (criterion
    "tia422"): sqrt(t_driver^2 + (ln 9 (R_s || R_load) (C' L + C_in))^2), R_load the far receiver's input
    resistance in parallel with any terminator at the far end."""
    plan = bus.plan
    far = bus.devices[plan.nodes[0].name]
    g_far = 1.0 / far.budget_input_ohm
    g_far += sum(1.0 / t.resistance_ohm for t in plan.terminations if t.position_m == plan.trunk_length_m)
    r_th = 1.0 / (1.0 / bus.driver.source_ohm + g_far)
    c_total_f = bus.cable.capacitance_f_per_m * plan.trunk_length_m + far.input_capacitance_f
    return math.hypot(bus.driver.rise_time_s, math.log(9.0) * r_th * c_total_f)


def _longest(lengths_m: np.ndarray, margin: np.ndarray) -> float:
    """Longest length whose margin is >= 0, interpolated (log length) to the first failing grid point."""
    ok = margin >= 0.0
    if not ok[0]:
        return 0.0
    if ok.all():
        return float(lengths_m[-1])
    j = int(np.argmin(ok))  # first failing point; the one before passes
    a, b = margin[j - 1], margin[j]
    frac = a / (a - b) if a != b else 0.0
    return float(np.exp(np.log(lengths_m[j - 1]) + frac * (np.log(lengths_m[j]) - np.log(lengths_m[j - 1]))))


def _margin_at(swept: Bus, criterion: str, bit_s: np.ndarray, threshold_v: float) -> np.ndarray:
    """Per bit time, how far the swept bus passes (>= 0) or fails (< 0) the criterion."""
    if criterion == "tia422":
        rise_s = lumped_rise_time_s(swept)
    else:
        step = step_responses(swept)
        if criterion == "eye":
            v_final = float(step.v_final_v[0, 0])
            time_s = step.start_s[0, 0] + step.time_s
            return _worst_eye_half_v(time_s, step.v_diff_v[0, 0], v_final, bit_s) - threshold_v
        rise_s = float(crossing_time_s(step, 0.9)[0, 0] - crossing_time_s(step, 0.1)[0, 0])
    loss_ok = TIA422_MAX_LOSS - _far_end_loss(swept)
    # both must hold: margin is the smaller, in relative terms
    return np.asarray(np.minimum(0.5 * bit_s / rise_s - 1.0, loss_ok / TIA422_MAX_LOSS))


def length_rate_curve(
    bus: Bus,
    bit_rates_bps: np.ndarray | None = None,
    *,
    criterion: str = "eye",
    threshold_v: float = RECEIVER_THRESHOLD_V,
) -> LengthRateCurve:
    """The longest trunk (m) at each bit rate for the plan's cable and driver; method in the module docstring."""
    if criterion not in SWEEP_SOURCES:
        raise ValueError(f"criterion must be one of {sorted(SWEEP_SOURCES)}, got {criterion!r}")
    rates = default_bit_rates_bps(bus) if bit_rates_bps is None else np.asarray(bit_rates_bps, dtype=float)
    plan_rate = bus.plan.bit_rate_bps
    all_rates = np.unique(np.append(rates, plan_rate))
    bit_s = 1.0 / all_rates
    lengths = np.geomspace(MIN_LENGTH_M, MAX_TRUNK_M, LENGTH_POINTS)
    margin = np.full((lengths.size, all_rates.size), -np.inf)
    for i, length in enumerate(lengths):
        margin[i] = _margin_at(sweep_bus(bus, float(length)), criterion, bit_s, threshold_v)
        if np.all(np.any(margin[: i + 1] < 0.0, axis=0)):
            break  # every rate has failed at some length: _longest never looks past a rate's first failure
    max_len = np.array([_longest(lengths, margin[:, k]) for k in range(all_rates.size)])
    at_plan = float(max_len[int(np.searchsorted(all_rates, plan_rate))])
    keep = np.isin(all_rates, rates)
    return LengthRateCurve(
        bit_rate_bps=all_rates[keep],
        max_length_m=max_len[keep],
        criterion=criterion,
        plan_bit_rate_bps=plan_rate,
        plan_length_m=bus.plan.trunk_length_m,
        plan_max_length_m=at_plan,
        plan_inside=bus.plan.trunk_length_m <= at_plan,
        source=SWEEP_SOURCES[criterion],
    )
