"""Receiver metrics against closed forms: matched line, lattice-diagram ringing, DC levels, the sampling window."""

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.metrics import RECEIVER_THRESHOLD_V, SamplingWindow, driver_metrics, receiver_metrics
from pairline.engine.plan import load_plan
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S
from pairline.engine.waveform import edge_duration_s, prbs_bits

from tests.engine.lines import VF, probed_line

T_E = edge_duration_s(10e-9)
DELAY_S = 100.0 / (VF * SPEED_OF_LIGHT_M_PER_S)


def _line(source_ohm, far_ohm=None, bit_rate_bps=100e3):
    return probed_line(source_ohm, far_ohm, bit_rate_bps=bit_rate_bps)


def _edges(bits: str) -> int:
    return sum(a != b for a, b in zip(bits, bits[1:], strict=False))


def test_receiver_threshold_is_200_mv():
    # Source: TIA/EIA-485-A receiver input sensitivity, +/-200 mV.
    assert pytest.approx(0.2) == RECEIVER_THRESHOLD_V


def test_default_window_is_the_uart_mid_bit_and_two_sixteenths():
    # Source: UART 16x oversampling, bit sampled 8 of 16 sample clocks after its start edge, majority of samples
    # 7, 8, 9 (Microchip "UART start detection and data sampling"; TI SLAU846A); +/-2/16 of a bit: common practice.
    window = SamplingWindow()
    assert window.centre_ui == pytest.approx(8 / 16)
    assert window.half_width_ui == pytest.approx(2 / 16)


def test_matched_line_has_a_clean_wide_open_eye():
    # Source: closed form, source = load = Z0: V_far = V_oc / 2 = 1 V, no reflection (Johnson & Graham,
    # High-Speed Digital Design, ch. 4); a bit swings -1 V -> +1 V, so the inner eye is 2 V high.
    far = receiver_metrics(_line(120.0, 120.0))[1]
    assert far.amplitude_v == pytest.approx(1.0, rel=1e-6)
    assert far.overshoot_v == pytest.approx(0.0, abs=0.002)  # volts
    assert far.undershoot_v == pytest.approx(0.0, abs=0.002)  # volts
    assert far.threshold_recrossings == 0
    assert far.sample_errors == 0
    assert far.eye_height_v == pytest.approx(2.0, abs=2e-3)  # volts
    assert far.min_sample_v == pytest.approx(1.0, abs=2e-3)  # volts
    assert far.margin_v == pytest.approx(0.8, abs=2e-3)  # volts
    assert far.jitter_s == pytest.approx(0.0, abs=T_E / 100)
    # Source: closed form, the eye is open except while a ramp crosses the +/-200 mV band, 20 % of T_e each edge.
    assert far.eye_width_s == pytest.approx(far.bit_time_s - 0.2 * T_E, abs=T_E / 100)
    # Source: closed form, the ramp from -1 V reaches +0.2 V 60 % into its 0-100 % time, counted from its start;
    # the sampling instant is half a bit after the 0 V crossing (50 % of the ramp).
    assert far.settle_time_s == pytest.approx(0.6 * T_E, abs=T_E / 100)
    assert far.settle_margin_s == pytest.approx(0.5 * T_E + 0.5 * far.bit_time_s - 0.6 * T_E, abs=T_E / 100)


def test_delay_is_from_the_drivers_0v_crossing_to_the_receivers():
    # Source: definition of velocity factor, t = l / (VF c0); on a matched line the far end's 0 V crossing (the
    # middle of its -V -> +V ramp) trails the driver's by exactly that.
    near, far = receiver_metrics(_line(120.0, 120.0))
    assert near.propagation_delay_s == pytest.approx(0.0, abs=T_E / 200)
    assert far.propagation_delay_s == pytest.approx(DELAY_S, abs=T_E / 200)


def test_a_dip_inside_the_sampling_window_fails_what_the_mid_bit_sample_passes():
    # Source: lattice diagram (Johnson & Graham, High-Speed Digital Design, ch. 4): R_s = 10 ohm (G_S = -11/13) on
    # 120 ohm, open far end: a -2 V -> +2 V edge gives far-end plateaus of 2 round trips each, 5.385, -0.865,
    # 4.422 V ... (-2 + 2 x 3.692, 0.568, 3.211 V). A bit of 9 one-way delays puts the UART's mid-bit sample on
    # the 4.422 V plateau (a pass), while its +/-2/16 window reaches back into the -0.865 V one (a fail).
    bus = probed_line(10.0, None, bit_rate_bps=1.0 / (9.0 * DELAY_S))
    far = receiver_metrics(bus, pattern="011")[1]
    assert far.sample_errors == 1
    assert far.min_sample_v == pytest.approx(-0.865, abs=0.01)  # volts
    assert far.margin_v < 0.0
    # Source: same diagram; at the instant alone (no window) the 1 sits on the 4.422 V plateau and the 0 before
    # it at rest, -2 V, so nothing fails and the inner eye there is 4.422 + 2 V.
    point = receiver_metrics(bus, pattern="011", window=SamplingWindow(0.5, 0.0))[1]
    assert point.sample_errors == 0
    assert point.eye_height_v == pytest.approx(4.422 + 2.0, abs=0.01)  # volts
    assert far.eye_height_v == pytest.approx(4.422 + 2.0, abs=0.01)  # volts: the same instant


def test_open_line_overshoot_and_ringback_follow_the_lattice_diagram():
    # Source: lattice diagram (Johnson & Graham, High-Speed Digital Design, ch. 4): R_s = 40 ohm on 120 ohm,
    # open end: far-end step plateaus 3, 1.5, 2.25 ... V, settling at 2 V. A -2 V -> +2 V bit doubles the
    # step: peak -2 + 2 * 3 = 4 V (overshoot 2 V), then -2 + 2 * 1.5 = 1 V (ringback 1 V below 2 V),
    # never back through +0.2 V. 10 kbit/s lets every bit settle (52 round trips to mid-bit).
    far = receiver_metrics(_line(40.0, bit_rate_bps=10e3))[1]
    assert far.amplitude_v == pytest.approx(2.0, rel=1e-6)
    assert far.overshoot_v == pytest.approx(2.0, abs=0.01)  # volts
    assert far.undershoot_v == pytest.approx(1.0, abs=0.01)  # volts
    assert far.threshold_recrossings == 0
    assert far.eye_height_v == pytest.approx(4.0, abs=2e-3)  # volts, settled: +/- 2 V


def test_ringing_back_through_the_threshold_counts_false_bits():
    # Source: lattice diagram as above with R_s = 10 ohm (G_S = -110/130), open end: far-end step plateaus
    # 3.692, 0.568, 3.211, 0.975, 2.867, 1.266 V ...; a -2 V -> +2 V bit gives 5.38, -0.86, 4.42, -0.05, 3.73,
    # 0.53 V: twice per edge the signal falls back below +0.2 V, each a possible false bit.
    bits = prbs_bits()
    far = receiver_metrics(_line(10.0, bit_rate_bps=10e3), pattern=bits)[1]
    assert far.threshold_recrossings == 2 * _edges(bits)
    assert far.overshoot_v == pytest.approx(2 * 3.692 - 2 - 2.0, abs=0.01)  # volts


def test_sampled_levels_follow_the_dc_divider():
    # Source: closed form, DC divider V_oc R_L / (R_s + R_L) = 2 * 360 / 400 = 1.8 V for a settled bit; at
    # 10 kbit/s the ringing (x 1/4 per 0.95 us round trip) is long gone by the window's start.
    far = receiver_metrics(_line(40.0, 360.0, bit_rate_bps=10e3))[1]
    assert far.min_sample_v == pytest.approx(1.8, abs=2e-3)  # volts
    assert far.sample_errors == 0
    assert far.settle_margin_s > 0


def test_too_fast_for_the_line_closes_the_eye():
    # Source: lattice diagram, R_s = 10 ohm, R_L = 30 ohm on 120 ohm: the far end's first step is only
    # 2 * (2 * 120 / 130) * (1 - 0.6) = 0.738 V of the 1.5 V final, so a -1.5 V -> +1.5 V bit first reaches
    # -0.02 V, inside the undefined band: at 2 Mbit/s (500 ns bits, 476 ns line delay) bits are lost.
    far = receiver_metrics(_line(10.0, 30.0, bit_rate_bps=2e6))[1]
    assert far.sample_errors > 0
    assert far.eye_height_v < 2 * RECEIVER_THRESHOLD_V
    assert np.isinf(far.settle_time_s)


def test_every_driver_gets_metrics_equal_to_its_own_run():
    # Source: linearity; batching drivers only stacks independent solves. Node "far" may drive (RS-485).
    doc = _line(40.0, 120.0).plan.model_dump(mode="json")
    doc["nodes"][1]["may_drive"] = True
    bus = build_bus(load_plan(doc))
    both = driver_metrics(bus)
    assert tuple(both) == ("driver", "far")
    alone = receiver_metrics(bus, driver_name="far")
    for a, b in zip(both["far"], alone, strict=True):
        assert a.receiver == b.receiver
        assert a.eye_height_v == pytest.approx(b.eye_height_v, abs=2e-3)  # volts
        assert a.overshoot_v == pytest.approx(b.overshoot_v, abs=2e-3)  # volts
    # Source: closed form, the far node drives through its own terminal into the 120 ohm terminator, with the
    # listening primary driver's receiver (2 x 12 kOhm / 0.25 UL across the pair, TIA-485-A unit load per line)
    # across the lossless line: V = V_oc R / (40 + R), R = 120 || 96 kOhm.
    r_load = 1.0 / (1.0 / 120.0 + 1.0 / 96_000.0)
    assert both["far"][1].amplitude_v == pytest.approx(2.0 * r_load / (40.0 + r_load), rel=1e-6)


def test_settled_level_is_one_polarity_and_the_eye_spans_both():
    # Unterminated 12 m RS-422 line, one 1/4-UL receiver at the far end, 1200 bit/s, 100 ns driver.
    bus = build_bus(
        load_plan(
            {
                "standard": "rs422",
                "bit_rate_bps": 1200.0,
                "trunk_length_m": 12.0,
                "cable": {"class_key": "tia422-reference"},
                "driver": {"rise_time_s": 100e-9, "open_circuit_v": 4.0, "source_ohm": 40.0},
                "nodes": [{"name": "rx", "position_m": 12.0, "unit_loads": 0.25}],
            }
        )
    )
    (rx,) = receiver_metrics(bus)
    # Source: closed form, DC divider V_oc R_in / (R_s + R_loop + R_in) with R_in = 2 x 12 kOhm / 0.25 UL = 96 kOhm
    # across the pair (TIA/EIA-485-A unit load, 12 kOhm per line) and R_loop = 2 * 12 m * 0.0842 Ohm/m (ASTM B258
    # 24 AWG).
    settled_v = 4.0 * 96_000.0 / (96_000.0 + 40.0 + 2.0 * 12.0 * 0.0842)
    assert rx.amplitude_v == pytest.approx(settled_v, rel=1e-4)
    assert rx.min_sample_v == pytest.approx(settled_v, abs=2e-3)  # volts: 1200 bit/s settles long before mid-bit
    # Source: definition of the inner eye with 1 -> +V and 0 -> -V: a settled eye is 2 x the settled level.
    assert rx.eye_height_v == pytest.approx(2.0 * settled_v, abs=4e-3)  # volts
