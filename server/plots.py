"""SVG coordinates of the plots: a receiver's waveform with the ±200 mV band and sampling instants, and the
length-versus-bit-rate curve (log-log) with this plan's point. Templates only place what this module computes.
"""

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from pairline.server.quantities import UnitSystem, length_in, length_unit, number_text

PLOT_W = 520.0  # narrow enough that text stays legible when a phone shows the plot 340 px wide
PLOT_H = 260.0
MARGIN_L = 64.0
MARGIN_R = 16.0
MARGIN_T = 14.0
MARGIN_B = 40.0
MAX_BITS_SHOWN = 24  # a longer pattern is plotted over its first bits; margins still cover every bit
MAX_POINTS = 1200  # a polyline longer than this is decimated to min/max pairs per pixel column
Y_LABEL = "differential voltage A−B (V)"  # both voltage plots
RECEIVER_THRESHOLD_V = 0.2  # TIA-485-A / TIA-422-B receiver input sensitivity, ±200 mV


@dataclass(frozen=True, slots=True)
class AxisTick:
    pos: float  # pixel along the axis
    label: str


@dataclass(frozen=True, slots=True)
class WaveformPlot:
    width: float
    height: float
    x0: float
    x1: float
    y0: float  # top of the plot area
    y1: float  # bottom
    points: str  # SVG polyline "x,y x,y ..."
    band_top: float  # y pixel of +200 mV
    band_bottom: float  # y pixel of -200 mV
    zero_y: float
    samples: tuple[tuple[float, float, float], ...]  # (x, y, volts) at each sampling instant
    x_ticks: tuple[AxisTick, ...]
    y_ticks: tuple[AxisTick, ...]
    x_label: str
    receiver: str
    bits_shown: int  # sampling instants inside the plotted window
    bits_total: int
    y_label: str = Y_LABEL


def _time_scale(span_s: float) -> tuple[float, str]:
    for scale, unit in ((1e-9, "ns"), (1e-6, "µs"), (1e-3, "ms")):
        if span_s < 2000 * scale:
            return scale, unit
    return 1.0, "s"


def _linear_ticks(lo: float, hi: float, target: int = 6) -> list[float]:
    span = hi - lo
    if span <= 0:
        return [lo]
    raw = span / target
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if raw <= m * mag)
    first = math.ceil(lo / step - 1e-9) * step
    return [first + k * step for k in range(int((hi - first) / step + 1e-9) + 1)]


def decimate(x: np.ndarray, y: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """Keep the min and max of y in each of `columns` equal slices of the samples, so peaks survive; each pair
    is placed at its slice's first x, in the order the signal moves (min then max when rising)."""
    n = x.size
    if n <= 2 * columns:
        return x, y
    starts = np.linspace(0, n, columns + 1).astype(int)[:-1]  # (columns,)
    lows = np.minimum.reduceat(y, starts)
    highs = np.maximum.reduceat(y, starts)
    ends = np.append(starts[1:], n) - 1
    rising = y[ends] >= y[starts]
    first = np.where(rising, lows, highs)
    second = np.where(rising, highs, lows)
    return np.repeat(x[starts], 2), np.column_stack([first, second]).ravel()


def waveform_plot(
    time_s: np.ndarray,  # (n_t,)
    v_diff_v: np.ndarray,  # (n_t,)
    sample_times_s: "Sequence[float] | np.ndarray",
    receiver: str,
    bit_time_s: float | None = None,
    max_bits: int = MAX_BITS_SHOWN,
) -> WaveformPlot:
    """One receiver's differential voltage against time, the ±200 mV band and the sampling instants.

    With `bit_time_s` given, only the first `max_bits` bits are drawn, so each bit stays wide enough to read."""
    t_all = np.asarray(time_s, dtype=float)
    v_all = np.asarray(v_diff_v, dtype=float)
    t_end = float(t_all[-1])
    if bit_time_s is not None:
        t_end = min(t_end, float(t_all[0]) + max_bits * bit_time_s)
    keep = t_all <= t_end
    t, v = t_all[keep], v_all[keep]
    x0, x1, y0, y1 = MARGIN_L, PLOT_W - MARGIN_R, MARGIN_T, PLOT_H - MARGIN_B
    t_lo, t_hi = float(t[0]), float(t[-1])
    v_max = max(0.5, float(np.max(np.abs(v))) * 1.1)
    scale, unit = _time_scale(t_hi - t_lo)

    def px(time: np.ndarray | float) -> np.ndarray | float:
        return x0 + (x1 - x0) * (np.asarray(time) - t_lo) / (t_hi - t_lo)

    def py(volts: np.ndarray | float) -> np.ndarray | float:
        return y0 + (y1 - y0) * (v_max - np.asarray(volts)) / (2 * v_max)

    td, vd = decimate(t, v, MAX_POINTS // 2)
    xs, ys = np.asarray(px(td)), np.asarray(py(vd))
    points = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(xs, ys, strict=True))
    samples = tuple(
        (float(px(ts)), float(py(vs)), float(vs))
        for ts, vs in zip(sample_times_s, np.interp(np.asarray(sample_times_s, dtype=float), t, v), strict=True)
        if t_lo <= ts <= t_hi
    )
    x_ticks = tuple(AxisTick(float(px(k * scale)), f"{k:g}") for k in _linear_ticks(t_lo / scale, t_hi / scale))
    y_ticks = tuple(AxisTick(float(py(k)), f"{k:g}") for k in _linear_ticks(-v_max, v_max, 6))
    return WaveformPlot(
        width=PLOT_W,
        height=PLOT_H,
        x0=x0,
        x1=x1,
        y0=y0,
        y1=y1,
        points=points,
        band_top=float(py(RECEIVER_THRESHOLD_V)),
        band_bottom=float(py(-RECEIVER_THRESHOLD_V)),
        zero_y=float(py(0.0)),
        samples=samples,
        x_ticks=x_ticks,
        y_ticks=y_ticks,
        x_label=f"time ({unit})",
        receiver=receiver,
        bits_shown=len(samples),
        bits_total=len(sample_times_s),
    )


@dataclass(frozen=True, slots=True)
class CurvePlot:
    width: float
    height: float
    x0: float
    x1: float
    y0: float
    y1: float
    curve: str  # polyline points of the length limit against bit rate
    rule_curve: str  # a second limit drawn for comparison ("" when none)
    point_x: float
    point_y: float
    point_inside: bool  # the plan's length is at or under the curve at its bit rate
    point_label: str
    label_x: float  # where the label goes: inside the plot area, clear of both curves and the point
    label_y: float  # text baseline
    label_anchor: str  # "start" or "end"
    x_ticks: tuple[AxisTick, ...]
    y_ticks: tuple[AxisTick, ...]
    y_label: str


def _decades(lo: float, hi: float) -> list[float]:
    """Log-axis ticks: powers of ten, with 2 and 5 between them when fewer than three decades show."""
    powers = [10.0**k for k in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1)]
    if sum(1 for p in powers if lo <= p <= hi) >= 3:
        return powers
    return sorted(p * m for p in powers for m in (1, 2, 5))


def _rate_text(bps: float) -> str:
    for scale, prefix in ((1e6, "M"), (1e3, "k")):
        if bps >= scale:
            return f"{bps / scale:g} {prefix}"
    return f"{bps:g} "


def curve_plot(
    bit_rate_bps: "Sequence[float] | np.ndarray",
    max_length_m: "Sequence[float] | np.ndarray",
    plan_rate_bps: float,
    plan_length_m: float,
    units: UnitSystem,
    rule: "tuple[Sequence[float] | np.ndarray, Sequence[float] | np.ndarray] | None" = None,
) -> CurvePlot:
    """Log-log plot of the longest trunk against bit rate, with the plan's (rate, length) marked and, when
    given, a second (rule-of-thumb) limit for comparison."""

    def usable(r: "Sequence[float] | np.ndarray", L: "Sequence[float] | np.ndarray") -> tuple[np.ndarray, np.ndarray]:
        rr = np.asarray(r, dtype=float)
        ll = np.array([length_in(float(v), units) for v in L])
        keep = (rr > 0) & (ll > 0) & np.isfinite(ll)
        return rr[keep], ll[keep]

    rates, lengths = usable(bit_rate_bps, max_length_m)
    rule_rates, rule_lengths = usable(*rule) if rule is not None else (np.empty(0), np.empty(0))
    plan_len = length_in(plan_length_m, units)
    r_lo = min(float(rates.min()) if rates.size else 1e3, plan_rate_bps) / 1.5
    r_hi = max(float(rates.max()) if rates.size else 1e7, plan_rate_bps) * 1.5
    in_view = (rule_rates >= r_lo) & (rule_rates <= r_hi)
    rule_rates, rule_lengths = rule_rates[in_view], rule_lengths[in_view]
    every = np.concatenate([lengths, rule_lengths, [plan_len]])
    l_lo = max(float(every.min()) / 1.5, 0.5)
    l_hi = float(every.max()) * 1.5
    rule_lengths = np.clip(rule_lengths, l_lo, l_hi)
    x0, x1, y0, y1 = MARGIN_L, PLOT_W - MARGIN_R, MARGIN_T, PLOT_H - MARGIN_B
    lx0, lx1, ly0, ly1 = math.log10(r_lo), math.log10(r_hi), math.log10(l_lo), math.log10(l_hi)

    def px(rate: float) -> float:
        return x0 + (x1 - x0) * (math.log10(rate) - lx0) / (lx1 - lx0)

    def py(length: float) -> float:
        return y1 - (y1 - y0) * (math.log10(length) - ly0) / (ly1 - ly0)

    curve = " ".join(f"{px(r):.1f},{py(L):.1f}" for r, L in zip(rates, lengths, strict=True))
    rule_curve = " ".join(f"{px(r):.1f},{py(L):.1f}" for r, L in zip(rule_rates, rule_lengths, strict=True))
    label = f"this plan: {_rate_text(plan_rate_bps)}bit/s, {number_text(plan_len)} {length_unit(units)}"
    lines = [
        np.column_stack([[px(r) for r in rr], [py(L) for L in ll]])
        for rr, ll in ((rates, lengths), (rule_rates, rule_lengths))
        if rr.size
    ]
    label_x, label_y, label_anchor = place_label(label, px(plan_rate_bps), py(plan_len), (x0, x1, y0, y1), lines)
    inside = bool(rates.size) and plan_len <= float(np.interp(math.log10(plan_rate_bps), np.log10(rates), lengths))
    unit = length_unit(units)
    return CurvePlot(
        width=PLOT_W,
        height=PLOT_H,
        x0=x0,
        x1=x1,
        y0=y0,
        y1=y1,
        curve=curve,
        rule_curve=rule_curve,
        point_x=px(plan_rate_bps),
        point_y=py(plan_len),
        point_inside=inside,
        point_label=label,
        label_x=label_x,
        label_y=label_y,
        label_anchor=label_anchor,
        x_ticks=tuple(AxisTick(px(d), _rate_text(d).strip() or "1") for d in _decades(r_lo, r_hi) if r_lo <= d <= r_hi),
        y_ticks=tuple(AxisTick(py(d), f"{d:g}") for d in _decades(l_lo, l_hi) if l_lo <= d <= l_hi),
        y_label=f"trunk length ({unit})",
    )


LABEL_CHAR_PX = 8.7  # bold label text at its largest (14 px on a phone), average character width
LABEL_HEIGHT_PX = 15.0


def _densify(line: np.ndarray, step_px: float = 4.0) -> np.ndarray:
    """Points every `step_px` along a polyline (n, 2), so distances to it are distances to its segments."""
    out = [line[:1]]
    for a, b in zip(line[:-1], line[1:], strict=True):
        n = max(1, int(np.hypot(*(b - a)) / step_px))
        out.append(a + (b - a) * (np.arange(1, n + 1)[:, None] / n))
    return np.vstack(out)


def place_label(
    text: str,
    point_x: float,
    point_y: float,
    area: tuple[float, float, float, float],  # x0, x1, y0 (top), y1 (bottom)
    lines: "Sequence[np.ndarray]",  # polylines (n, 2) in pixels the label should keep clear of
) -> tuple[float, float, str]:
    """A spot for a point's label: (x, baseline y, text-anchor). Candidates sit around the point; those whose box
    stays inside the plot area win, and among them the one farthest from every line (the first on ties)."""
    x0, x1, y0, y1 = area
    width = LABEL_CHAR_PX * len(text)
    points = np.vstack([_densify(np.asarray(line, dtype=float)) for line in lines if len(line)] or [np.empty((0, 2))])
    best: tuple[float, float, float, str] | None = None
    for dy in (-10.0, 22.0, -30.0, 42.0, -50.0, 62.0, -70.0, 82.0, 4.0):
        for anchor in ("start", "end"):
            x = point_x + 10.0 if anchor == "start" else point_x - 10.0
            left = x if anchor == "start" else x - width
            top, bottom = point_y + dy - LABEL_HEIGHT_PX + 3.0, point_y + dy + 3.0
            fits = left >= x0 + 3.0 and left + width <= x1 - 3.0 and top >= y0 + 2.0 and bottom <= y1 - 2.0
            if points.size:
                gap_x = np.maximum(np.maximum(left - points[:, 0], points[:, 0] - (left + width)), 0.0)
                gap_y = np.maximum(np.maximum(top - points[:, 1], points[:, 1] - bottom), 0.0)
                clearance = float(np.min(np.hypot(gap_x, gap_y)))
            else:
                clearance = 1e9
            score = min(clearance, 12.0) + (1000.0 if fits else 0.0)  # 12 px clear is clear enough
            if best is None or score > best[0]:
                best = (score, x, point_y + dy, anchor)
    assert best is not None
    return best[1], best[2], best[3]


@dataclass(frozen=True, slots=True)
class EyePlot:
    width: float
    height: float
    x0: float
    x1: float
    y0: float
    y1: float
    traces: tuple[str, ...]  # one polyline per bit: the signal from one bit time before to one after its sample
    band_top: float
    band_bottom: float
    sample_x: float  # the sampling instant, at the centre
    x_ticks: tuple[AxisTick, ...]
    y_ticks: tuple[AxisTick, ...]
    receiver: str
    y_label: str = Y_LABEL


EYE_POINTS = 33  # points per trace
EYE_TRACES = 64  # at most this many bits overlaid (the first ones): enough to show the eye, light to draw


def eye_plot(
    time_s: np.ndarray,  # (n_t,)
    v_diff_v: np.ndarray,  # (n_t,)
    sample_times_s: "Sequence[float] | np.ndarray",  # (n_bits,)
    bit_time_s: float,
    receiver: str,
) -> EyePlot:
    """Every bit overlaid on one frame two bit times wide, centred on its sampling instant (an eye diagram)."""
    t = np.asarray(time_s, dtype=float)
    v = np.asarray(v_diff_v, dtype=float)
    centres = np.asarray(sample_times_s, dtype=float)
    centres = centres[(centres - bit_time_s >= t[0]) & (centres + bit_time_s <= t[-1])][:EYE_TRACES]
    frame = np.linspace(-bit_time_s, bit_time_s, EYE_POINTS)  # (n_points,)
    values = np.interp((centres[:, None] + frame[None, :]).ravel(), t, v).reshape(centres.size, EYE_POINTS)
    x0, x1, y0, y1 = MARGIN_L, PLOT_W / 2, MARGIN_T, PLOT_H - MARGIN_B
    v_max = max(0.5, float(np.max(np.abs(v))) * 1.1)
    xs = x0 + (x1 - x0) * (frame + bit_time_s) / (2 * bit_time_s)
    ys = y0 + (y1 - y0) * (v_max - values) / (2 * v_max)  # (n_traces, n_points)
    traces = tuple(" ".join(f"{a:.1f},{b:.1f}" for a, b in zip(xs, row, strict=True)) for row in ys)

    def py(volts: float) -> float:
        return y0 + (y1 - y0) * (v_max - volts) / (2 * v_max)

    return EyePlot(
        width=PLOT_W / 2 + MARGIN_R,
        height=PLOT_H,
        x0=x0,
        x1=x1,
        y0=y0,
        y1=y1,
        traces=traces,
        band_top=py(RECEIVER_THRESHOLD_V),
        band_bottom=py(-RECEIVER_THRESHOLD_V),
        sample_x=(x0 + x1) / 2,
        x_ticks=tuple(AxisTick(x0 + (x1 - x0) * k / 4, f"{(k - 2) / 2:g}") for k in range(5)),
        y_ticks=tuple(AxisTick(py(k), f"{k:g}") for k in _linear_ticks(-v_max, v_max, 6)),
        receiver=receiver,
    )
