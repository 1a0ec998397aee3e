"""Edge responses and bit-pattern waveforms: closed forms (matched line, open line, lattice diagram), at any time."""

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.plan import BusInputError, load_plan
from pairline.engine.solve import dc_transfer, driver_pin_probe, junction_probe, node_probe
from pairline.engine.transient import grid_index
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S
from pairline.engine.waveform import (
    edge_duration_s,
    pattern_at,
    prbs_bits,
    probe_waveforms,
    simulate_pattern,
    step_responses,
)

from tests.engine.lines import VF, probed_line

T_E = edge_duration_s(10e-9)


def _delay_s(length_m=100.0):
    return length_m / (VF * SPEED_OF_LIGHT_M_PER_S)


def _ramp(t_s, start_s, height_v):
    return height_v * np.clip((t_s - start_s) / T_E, 0.0, 1.0)


def test_matched_line_is_the_ramp_delayed_at_every_instant():
    # Source: closed form, source and load both equal to Z0: each point of the line sees V_oc / 2 once, delayed by
    # x / v, and nothing after (Johnson & Graham, High-Speed Digital Design, ch. 4, matched termination).
    bus = probed_line(source_ohm=120.0, far_ohm=120.0)
    probes = [driver_pin_probe(), junction_probe(40.0), node_probe("far")]
    resp = step_responses(bus, probes=probes)
    t = np.linspace(0.0, 3.0 * _delay_s(), 30_001)  # 0.16 ns apart: every ramp corner is approached closely
    ours = resp.at(t)[0]
    for k, x_m in enumerate((0.0, 40.0, 100.0)):
        # 0.2 % of the 1 V swing, corners included
        np.testing.assert_allclose(ours[k], _ramp(t, _delay_s(x_m), 1.0), atol=0.002, err_msg=probes[k].name)
    assert resp.settled


def test_open_line_doubles_the_incident_wave_after_one_delay():
    # Source: closed form, open end reflects +1: V_far = 2 V_oc Z0 / (Z0 + R_s) (Johnson & Graham,
    # High-Speed Digital Design, ch. 4); before one delay nothing has arrived.
    resp = step_responses(probed_line(source_ohm=40.0))
    incident_v = 2.0 * 120.0 / (120.0 + 40.0)
    near, far = resp.at(np.array([0.5 * _delay_s(), 0.9 * _delay_s(), _delay_s() + T_E, 1.9 * _delay_s()]))[0]
    assert far[1] == pytest.approx(0.0, abs=1e-6)  # volts
    assert far[2] == pytest.approx(2.0 * incident_v, abs=2e-3)  # volts, at the ramp's end
    assert far[3] == pytest.approx(2.0 * incident_v, abs=2e-3)  # volts
    assert near[0] == pytest.approx(incident_v, abs=2e-3)  # volts


@pytest.mark.parametrize(("source_ohm", "far_ohm"), [(40.0, 360.0), (10.0, 30.0), (300.0, None), (10.0, None)])
def test_lattice_waveform_at_every_instant(source_ohm, far_ohm):
    # Source: lattice (Bergeron) diagram of a lossless line between mismatched source and load
    # (Johnson & Graham, High-Speed Digital Design, ch. 4): incident V_oc Z0 / (Z0 + R_s), reflections
    # G_L = (R_L - Z0) / (R_L + Z0) and G_S = (R_s - Z0) / (R_s + Z0); each arrival is the driver's ramp.
    resp = step_responses(probed_line(source_ohm=source_ohm, far_ohm=far_ohm))
    z0, v_oc, t_d = 120.0, 2.0, _delay_s()
    g_l = 1.0 if far_ohm is None else (far_ohm - z0) / (far_ohm + z0)
    g_s = (source_ohm - z0) / (source_ohm + z0)
    incident = v_oc * z0 / (z0 + source_ohm)
    t = np.linspace(0.0, 24.0 * t_d, 200_001)
    far = np.zeros_like(t)
    near = _ramp(t, 0.0, incident)
    for k in range(12):
        wave = incident * (g_l * g_s) ** k
        far += _ramp(t, (2 * k + 1) * t_d, wave * (1.0 + g_l))
        near += _ramp(t, (2 * k + 2) * t_d, wave * g_l * (1.0 + g_s))
    ours = resp.at(t)[0]
    for got, want in ((ours[0], near), (ours[1], far)):
        np.testing.assert_allclose(got, want, atol=0.004 * np.ptp(want))  # 0.4 % of the swing, corners included
    # Source: closed form, DC divider V_oc R_L / (R_s + R_L); settled level from the exact DC solve
    dc = v_oc if far_ohm is None else v_oc * far_ohm / (source_ohm + far_ohm)
    np.testing.assert_allclose(resp.v_final_v[0], dc, rtol=1e-6)


def test_long_lossy_line_settles_to_the_resistive_divider():
    # Source: common practice DC budget: 24 AWG, 1200 m, loop 202 ohm, into 120 ohm -> 0.373 of the driver's
    # open-circuit voltage (ideal 0-ohm driver; 84.2 ohm/km per conductor, ASTM B258).
    bus = probed_line(
        source_ohm=0.0, far_ohm=120.0, length_m=1200.0, rise_s=100e-9, cable={"class_key": "pair-24awg-120"}
    )
    resp = step_responses(bus)
    assert resp.v_final_v[0, 1] / 2.0 == pytest.approx(0.373, abs=0.001)
    assert resp.settled
    # the computed response ends on the DC level (the transform and the DC solve agree)
    assert resp.v_diff_v[0, 1, -1] == pytest.approx(resp.v_final_v[0, 1], abs=2.0 * 1e-3)  # volts


def test_pattern_is_the_superposition_of_edges():
    # Source: linearity (superposition): bits 0,0,1,1 = rest at -V, then one 2V rising edge at 2 T_bit.
    bus = probed_line(source_ohm=40.0, far_ohm=200.0)
    step = step_responses(bus)
    wave = simulate_pattern(bus, "0011", step=step)
    t_bit = wave.bit_time_s
    expected = -step.v_final_v[0][:, None] + 2.0 * step.at(wave.time_s - 2 * t_bit)[0]
    np.testing.assert_allclose(wave.v_diff_v, expected, atol=2e-3 * 2.0)  # volts, 0.1 % of V_oc per side
    np.testing.assert_allclose(pattern_at(step, "0011", t_bit, wave.time_s), expected, atol=1e-12)


def test_slow_rate_with_fast_edges_on_a_long_line_stays_small_and_settles():
    # Source: common practice DC budget as above (0.373 of V_oc at 1200 m of 24 AWG into 120 ohm, 0-ohm driver):
    # at 1200 bit/s every mid-bit sample is settled to +/- that level.
    bus = probed_line(
        source_ohm=0.0,
        far_ohm=120.0,
        length_m=1200.0,
        rise_s=2e-9,
        cable={"class_key": "pair-24awg-120"},
        bit_rate_bps=1200.0,
    )
    wave = simulate_pattern(bus)
    # the bus settles within one bit, so the shortest default PRBS (order 5, 2^5 - 1 bits) holds every case
    assert wave.bits == prbs_bits(31, order=5)
    levels = np.where(np.array(list(wave.bits)) == "1", 1.0, -1.0)
    at_far = np.interp(wave.sample_times_s, wave.time_s, wave.v_diff_v[1])
    np.testing.assert_allclose(at_far, levels * 0.373 * 2.0, atol=0.002 * 2.0)  # volts


def test_fast_rate_short_terminated_bus_samples_at_the_dc_levels():
    # Source: closed form DC divider, line matched at both ends: +/- V_oc * R_T / (R_s + R_T) at the near end
    # from the edge on, at the far end one line delay (47.6 ns at VF 0.7) later; 2 ns driver, 20 Mbit/s.
    bus = probed_line(source_ohm=120.0, far_ohm=120.0, length_m=10.0, rise_s=2e-9, bit_rate_bps=20e6)
    wave = simulate_pattern(bus, "0101100111010")
    levels = np.where(np.array(list(wave.bits)) == "1", 1.0, -1.0)
    near = np.interp(wave.sample_times_s, wave.time_s, wave.v_diff_v[0])
    np.testing.assert_allclose(near, levels, atol=0.004)  # volts
    far = np.interp(wave.sample_times_s[:-1] + _delay_s(10.0), wave.time_s, wave.v_diff_v[1])
    np.testing.assert_allclose(far, levels[:-1], atol=0.004)  # volts


def test_every_driver_in_one_batch_equals_each_alone():
    # Source: linearity; the batch axis only stacks independent solves.
    doc = probed_line(source_ohm=40.0, far_ohm=120.0).plan.model_dump(mode="json")
    doc["nodes"][1]["may_drive"] = True
    bus = build_bus(load_plan(doc))
    both = step_responses(bus, ["driver", "far"])
    alone = step_responses(bus, ["far"])
    t = np.linspace(0.0, 2e-6, 4001)
    np.testing.assert_allclose(both.for_driver("far").at(t), alone.at(t), atol=2e-3)  # volts
    np.testing.assert_allclose(both.v_final_v, 2.0 * dc_transfer(bus, ["driver", "far"]), rtol=1e-12)


def test_watched_receivers_alone_equal_their_rows_of_the_whole_bus():
    # Source: linearity; a receiver's spectrum does not depend on which other receivers are transformed.
    bus = probed_line(source_ohm=40.0)
    every = step_responses(bus)
    far = step_responses(bus, receiver_names=["far"])
    assert far.receiver_names == ("far",)
    t = np.linspace(0.0, 3e-6, 3001)
    np.testing.assert_allclose(far.at(t)[0, 0], every.at(t)[0, 1], atol=2e-3)  # volts
    np.testing.assert_allclose(far.v_final_v[0, 0], every.v_final_v[0, 1], rtol=1e-12)


def test_driver_pin_behind_its_stub_sees_the_stub_return():
    # Source: lattice diagram at the driver's pins: a 10 m stub of Z0 into a matched trunk (two Z0 ends, Z0 / 2):
    # the pins first see V_oc Z0 / (Z0 + R_s), then after a stub round trip the reflection G = (Z0/2 - Z0) /
    # (Z0/2 + Z0) = -1/3 of it, re-reflected at the source by G_S (Johnson & Graham, High-Speed Digital Design,
    # ch. 4). R_s = Z0, so G_S = 0 and the pins settle there.
    doc = probed_line(source_ohm=120.0, far_ohm=120.0).plan.model_dump(mode="json")
    doc["driver"].update(position_m=50.0, stub_length_m=10.0)
    doc["terminations"].append({"position_m": 0.0, "resistance_ohm": 120.0})
    resp = step_responses(build_bus(load_plan(doc)), probes=[driver_pin_probe(), junction_probe(50.0)])
    round_trip = 2.0 * _delay_s(10.0)
    t = np.linspace(0.0, 2.0 * round_trip, 4001)
    pin = _ramp(t, 0.0, 1.0) + _ramp(t, round_trip, -1.0 / 3.0)
    # Source: same diagram, the trunk junction sees the stub's wave transmitted with 1 + G = 2/3, one stub delay on
    junction = _ramp(t, 0.5 * round_trip, 2.0 / 3.0)
    ours = resp.at(t)[0]
    np.testing.assert_allclose(ours[0], pin, atol=0.004)  # volts, of a 1 V swing
    np.testing.assert_allclose(ours[1], junction, atol=0.004)  # volts


@pytest.mark.parametrize("order", [4, 5, 6, 7, 9])
def test_prbs_holds_every_word_of_its_order(order):
    # Source: maximal-length sequence property (ITU-T O.150 PRBS): one period of PRBS-k holds every k-bit
    # word except all zeros exactly once.
    period = (1 << order) - 1
    bits = prbs_bits(2 * period, order=order)
    words = {bits[i : i + order] for i in range(period)}
    assert len(words) == period
    assert "0" * order not in words


def test_default_pattern_grows_with_the_bus_memory():
    # Source: maximal-length property as above: with memory m bits, PRBS-(m + 2) holds every m + 2-bit history.
    # A 200 m unterminated line at 20 Mbit/s rings over many bits: the longest default, PRBS-7.
    fast = probed_line(source_ohm=40.0, length_m=200.0, bit_rate_bps=20e6)
    assert len(simulate_pattern(fast).bits) == 127
    slow = probed_line(source_ohm=120.0, far_ohm=120.0, bit_rate_bps=9600.0)
    assert len(simulate_pattern(slow).bits) == 31


def test_prbs7_is_a_maximal_length_sequence():
    # Source: ITU-T O.150 PRBS-7 (x^7 + x^6 + 1): period 2^7 - 1 = 127 with 64 ones and 63 zeros.
    bits = prbs_bits(254, order=7, seed=1)
    assert bits[:127] == bits[127:]
    assert bits[:127].count("1") == 64
    assert prbs_bits(127, seed=1) == prbs_bits(127, seed=1)
    assert prbs_bits(127, seed=5) != prbs_bits(127, seed=1)


def test_bad_inputs_are_clear_errors():
    bus = probed_line(source_ohm=120.0, far_ohm=120.0)
    with pytest.raises(BusInputError) as err:
        step_responses(bus, max_time_s=-1.0)
    assert err.value.problems[0].field == "max_time_s"
    with pytest.raises(BusInputError) as err:
        simulate_pattern(bus, "01x1")
    assert err.value.problems[0].field == "test_pattern"
    with pytest.raises(BusInputError) as err:
        simulate_pattern(bus, "0101", receiver_names=["nowhere"])
    assert err.value.problems[0].field == "receiver_names"
    with pytest.raises(BusInputError) as err:
        simulate_pattern(bus, "0101", driver_name="far")
    assert err.value.problems[0].field == "driver_name"
    with pytest.raises(BusInputError) as err:
        step_responses(bus, probes=[junction_probe(150.0)])
    assert err.value.problems[0].field == "probes.0.position_m"


def test_lossless_ringing_that_never_decays_is_not_called_settled():
    # Source: lattice diagram, 0-ohm driver (G_S = -1) and open end (G_L = +1): |G_S G_L| = 1, so the
    # ringing never decays (Johnson & Graham, High-Speed Digital Design, ch. 4).
    resp = step_responses(probed_line(source_ohm=0.0), max_time_s=20e-6)
    assert not resp.settled


def test_slow_edge_on_a_short_line_settles():
    # Source: common practice, a line whose delay is far below the edge (TSB-89 "electrically short") shows no
    # ringing; the response settles on the DC divider well inside the run.
    resp = step_responses(probed_line(source_ohm=40.0, length_m=12.0, rise_s=2.5e-6))
    assert resp.settled
    np.testing.assert_allclose(resp.v_diff_v[0, :, -1], resp.v_final_v[0], atol=2e-3)  # volts


def test_the_plans_probes_show_a_single_step_where_it_asks():
    # Source: closed form, as for the matched line above: a single step 0 -> V_oc (plan.probe_signal "step") reads
    # V_oc / 2 at every point once the ramp has passed it, delayed by x / v (Johnson & Graham, ch. 4).
    doc = probed_line(source_ohm=120.0, far_ohm=120.0).plan.model_dump(mode="json")
    doc["probes"] = [{"kind": "driver_pin"}, {"kind": "junction", "position_m": 40.0}, {"kind": "node", "node": "far"}]
    doc["probe_signal"] = "step"
    bus = build_bus(load_plan(doc))
    waves = probe_waveforms(bus)
    assert waves.receiver_names == ("driver pin", "trunk at 40 m", "far")
    assert waves.bits == ""
    for k, x_m in enumerate((0.0, 40.0, 100.0)):
        expected = _ramp(waves.time_s, _delay_s(x_m), 1.0)
        np.testing.assert_allclose(waves.v_diff_v[k], expected, atol=0.002, err_msg=waves.receiver_names[k])  # volts


def test_a_time_is_placed_on_the_grid_as_a_sorted_search_places_it():
    # Reference: numpy's searchsorted on the grid's own times, the last sample at or before each time. A time that
    # lies on a sample may be placed on the sample before it (then read with interpolation weight 1); elsewhere
    # the two agree exactly.
    bus = probed_line(
        source_ohm=0.0, far_ohm=120.0, length_m=1200.0, rise_s=2e-9, cable={"class_key": "pair-24awg-120"}
    )
    step = step_responses(bus, max_time_s=2e-3)
    assert len(step.levels) > 3  # fine levels, the first, and later coarser ones
    t = step.time_s
    times = np.random.default_rng(7).uniform(-1e-6, 1.2 * t[-1], 50_000)
    searched = np.clip(np.searchsorted(t, times, side="right") - 1, 0, t.size - 2)
    placed = grid_index(step.levels, times)
    off = placed != searched
    assert np.all(np.isclose(times[off], t[searched[off]], rtol=1e-12, atol=0.0)), times[off]
    on_samples = grid_index(step.levels, t[1:-1])
    assert np.all((on_samples == np.arange(1, t.size - 1)) | (on_samples == np.arange(0, t.size - 2)))
