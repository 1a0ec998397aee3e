"""Plot coordinates: the ±200 mV band, sampling instants, decimation that keeps peaks, the curve's point."""

import numpy as np
import pytest
from pairline.server.plots import curve_plot, decimate, waveform_plot


def test_waveform_band_and_samples_sit_where_the_voltages_are():
    t = np.linspace(0.0, 10e-6, 5001)
    v = np.where(t < 5e-6, 1.0, -1.0)
    plot = waveform_plot(t, v, [2.5e-6, 7.5e-6], "far")
    scale = (plot.y1 - plot.y0) / (2 * 1.1)  # pixels per volt: range ±1.1 V for a 1 V signal
    # Source: TIA/EIA-485-A receiver input sensitivity, ±200 mV.
    assert plot.zero_y - plot.band_top == pytest.approx(0.2 * scale, rel=1e-9)
    assert plot.band_bottom - plot.zero_y == pytest.approx(0.2 * scale, rel=1e-9)
    (x1, y1, v1), (x2, y2, v2) = plot.samples
    assert (v1, v2) == (1.0, -1.0)
    assert x1 == pytest.approx(plot.x0 + 0.25 * (plot.x1 - plot.x0), rel=1e-9)
    assert y1 < plot.zero_y < y2
    assert plot.x_label == "time (µs)"


def test_decimation_keeps_every_peak():
    rng = np.random.default_rng(7)
    t = np.arange(100_000, dtype=float)
    v = rng.normal(size=t.size)
    td, vd = decimate(t, v, 300)
    assert td.size <= 600
    assert vd.max() == v.max() and vd.min() == v.min()
    assert np.all(np.diff(td) >= 0)
    # Source: construction: a rising ramp keeps each slice's first and last sample, in order.
    ramp_t, ramp_v = decimate(t, t.copy(), 300)
    assert np.all(np.diff(ramp_v) >= 0) and ramp_v[0] == 0.0 and ramp_v[-1] == t[-1]


def test_curve_point_inside_and_outside():
    rates = np.logspace(3, 7, 9)
    lengths = np.minimum(1200.0, 1e8 / rates)  # common practice: length x rate <= 1e8, capped at 1200 m
    inside = curve_plot(rates, lengths, 100e3, 500.0, "metric")
    outside = curve_plot(rates, lengths, 1e6, 500.0, "metric")
    assert inside.point_inside and not outside.point_inside
    assert inside.point_y == pytest.approx(outside.point_y) and inside.point_x < outside.point_x
    assert "500 m" in inside.point_label
    assert len(inside.curve.split()) == 9


def test_long_patterns_are_plotted_over_their_first_bits_only():
    bit_s = 1e-6
    t = np.linspace(0.0, 100 * bit_s, 10_001)
    v = np.sign(np.sin(np.pi * t / bit_s))
    plot = waveform_plot(t, v, (np.arange(100) + 0.5) * bit_s, "rx", bit_s, max_bits=24)
    assert plot.bits_total == 100 and plot.bits_shown == 24
    assert plot.x_ticks[-1].label in {"20", "24"}


def test_eye_diagram_overlays_every_inner_bit_centred_on_its_sample():
    from pairline.server.plots import eye_plot

    bit_s = 1e-6
    t = np.linspace(0.0, 10 * bit_s, 2001)
    v = np.where((t // bit_s) % 2 == 0, 1.0, -1.0)
    eye = eye_plot(t, v, (np.arange(10) + 0.5) * bit_s, bit_s, "rx")
    assert len(eye.traces) == 8  # the first and last bit lack a full bit time on one side
    centre = [float(p.split(",")[1]) for p in (trace.split()[16] for trace in eye.traces)]
    # Source: TIA/EIA-485-A ±200 mV; each trace is at +1 V or -1 V at its sampling instant, outside the band.
    assert all(y < eye.band_top or y > eye.band_bottom for y in centre)
    assert eye.sample_x == pytest.approx((eye.x0 + eye.x1) / 2)


def _label_box(plot):
    from pairline.server.plots import LABEL_CHAR_PX, LABEL_HEIGHT_PX

    width = LABEL_CHAR_PX * len(plot.point_label)
    left = plot.label_x if plot.label_anchor == "start" else plot.label_x - width
    return left, left + width, plot.label_y - LABEL_HEIGHT_PX + 3.0, plot.label_y + 3.0


@pytest.mark.parametrize("plan_rate_bps", [5e6, 9e7, 2e3])
def test_the_plan_label_stays_inside_the_plot_and_off_the_curve(plan_rate_bps):
    rates = np.logspace(3, 8, 21)
    lengths = np.minimum(1200.0, 1e8 / rates)  # common practice: length x rate <= 1e8, capped at 1200 m
    plan_length_m = 0.7 * float(np.interp(np.log10(plan_rate_bps), np.log10(rates), lengths))  # just under it
    plot = curve_plot(rates, lengths, plan_rate_bps, plan_length_m, "metric")
    left, right, top, bottom = _label_box(plot)
    assert plot.x0 <= left and right <= plot.x1 and plot.y0 <= top and bottom <= plot.y1
    xy = np.array([[float(a) for a in p.split(",")] for p in plot.curve.split()])
    # The curve's vertices and the midpoints of its segments stay out of the label's box.
    probe = np.vstack([xy, (xy[1:] + xy[:-1]) / 2])
    hit = (probe[:, 0] >= left) & (probe[:, 0] <= right) & (probe[:, 1] >= top) & (probe[:, 1] <= bottom)
    assert not hit.any()
    assert not (left <= plot.point_x <= right and top <= plot.point_y <= bottom)


def test_both_voltage_plots_name_their_axis_in_volts():
    from pairline.server.plots import eye_plot

    t = np.linspace(0.0, 4e-6, 401)
    v = np.where((t // 1e-6) % 2 == 0, 1.0, -1.0)
    assert eye_plot(t, v, [1.5e-6, 2.5e-6], 1e-6, "rx").y_label.endswith("(V)")
    assert waveform_plot(t, v, [1.5e-6], "rx").y_label.endswith("(V)")
