"""SVG coordinates of a field check's overlay: the capture, the plan's aligned prediction and the fitted
installation against capture time, with the compared regions shaded behind them. Templates only place them."""

from dataclasses import dataclass

import numpy as np
from pairline.server.plots import (
    MARGIN_B,
    MARGIN_L,
    MARGIN_R,
    MARGIN_T,
    MAX_POINTS,
    PLOT_H,
    PLOT_W,
    Y_LABEL,
    AxisTick,
    _linear_ticks,
    _time_scale,
    decimate,
)

OVERLAY_H = PLOT_H + 40.0


@dataclass(frozen=True, slots=True)
class RegionBand:
    region: str
    x: float
    width: float


@dataclass(frozen=True, slots=True)
class OverlayPlot:
    width: float
    height: float
    x0: float
    x1: float
    y0: float
    y1: float
    measured: str  # SVG polyline points
    predicted: str
    fitted: str
    bands: tuple[RegionBand, ...]
    x_ticks: tuple[AxisTick, ...]
    y_ticks: tuple[AxisTick, ...]
    x_label: str
    y_label: str = Y_LABEL


def overlay_plot(
    time_s: np.ndarray,  # (n,)
    measured_v: np.ndarray,  # (n,)
    predicted_v: np.ndarray,  # (n,)
    fitted_v: np.ndarray,  # (n,)
    region: np.ndarray,  # (n,) index into regions
    regions: tuple[str, ...],
) -> OverlayPlot:
    """The three curves on one time axis (capture time, from the first compared sample) and shared volts."""
    x0, x1, y0, y1 = MARGIN_L, PLOT_W - MARGIN_R, MARGIN_T, OVERLAY_H - MARGIN_B
    t_lo, t_hi = float(time_s[0]), float(time_s[-1])
    curves = np.stack([measured_v, predicted_v, fitted_v])
    v_lo, v_hi = float(curves.min()), float(curves.max())
    pad = 0.06 * max(v_hi - v_lo, 1e-3)
    v_lo, v_hi = v_lo - pad, v_hi + pad
    scale, unit = _time_scale(t_hi - t_lo)

    def px(t: np.ndarray | float) -> np.ndarray:
        return np.asarray(x0 + (x1 - x0) * (np.asarray(t) - t_lo) / max(t_hi - t_lo, 1e-30))

    def py(v: np.ndarray | float) -> np.ndarray:
        return np.asarray(y0 + (y1 - y0) * (v_hi - np.asarray(v)) / (v_hi - v_lo))

    def polyline(v: np.ndarray) -> str:
        td, vd = decimate(time_s, v, MAX_POINTS // 2)
        return " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(px(td), py(vd), strict=True))

    changes = np.flatnonzero(np.diff(region)) + 1
    starts, stops = np.r_[0, changes], np.r_[changes, region.size]
    bands = tuple(
        RegionBand(
            regions[int(region[a])],
            float(px(time_s[a])),
            float(px(time_s[min(b, region.size - 1)]) - px(time_s[a])),
        )
        for a, b in zip(starts, stops, strict=True)
    )
    x_ticks = tuple(AxisTick(float(px(k * scale)), f"{k:g}") for k in _linear_ticks(t_lo / scale, t_hi / scale))
    y_ticks = tuple(AxisTick(float(py(k)), f"{k:g}") for k in _linear_ticks(v_lo, v_hi, 6))
    return OverlayPlot(
        width=PLOT_W,
        height=OVERLAY_H,
        x0=x0,
        x1=x1,
        y0=y0,
        y1=y1,
        measured=polyline(measured_v),
        predicted=polyline(predicted_v),
        fitted=polyline(fitted_v),
        bands=bands,
        x_ticks=x_ticks,
        y_ticks=y_ticks,
        x_label=f"capture time ({unit})",
    )
