"""Overlay coordinates: three curves inside the frame, region bands tiling the time axis, ticks on the axes."""

import numpy as np
import pytest
from pairline.server.fieldplot import overlay_plot


def _points(text: str) -> np.ndarray:
    return np.array([[float(v) for v in p.split(",")] for p in text.split()])


def test_curves_stay_in_the_frame_and_bands_tile_the_axis():
    t = np.linspace(1e-6, 5e-6, 4000)
    measured = np.where(t > 2e-6, 2.0, -2.0) + 0.01 * np.sin(t * 1e8)
    region = np.where(t < 2e-6, 2, np.where(t < 2.1e-6, 0, np.where(t < 4e-6, 1, 2))).astype(np.int8)
    plot = overlay_plot(t, measured, measured * 0.9, measured * 1.01, region, ("edge", "reflections", "settled"))
    for curve in (plot.measured, plot.predicted, plot.fitted):
        xy = _points(curve)
        assert len(xy) <= 1200  # thinned to min/max pairs per pixel column
        assert xy[:, 0].min() >= plot.x0 - 1e-6 and xy[:, 0].max() <= plot.x1 + 1e-6
        assert xy[:, 1].min() >= plot.y0 - 1e-6 and xy[:, 1].max() <= plot.y1 + 1e-6
    assert [b.region for b in plot.bands] == ["settled", "edge", "reflections", "settled"]
    assert plot.bands[0].x == plot.x0
    for left, right in zip(plot.bands, plot.bands[1:], strict=False):
        assert right.x == pytest.approx(left.x + left.width)  # no gaps, no overlaps
    assert plot.bands[-1].x + plot.bands[-1].width <= plot.x1 + 1e-6
    assert all(plot.x0 - 1 <= tick.pos <= plot.x1 + 1 for tick in plot.x_ticks)
    assert plot.x_label == "capture time (µs)"
