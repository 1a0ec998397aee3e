"""Worst case over tolerances: ranges from their published sources, closed-form corners, and the Monte Carlo."""

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.metrics import receiver_metrics
from pairline.engine.plan import load_plan
from pairline.engine.tolerance import analyse_tolerances, tolerance_ranges


def _terminated(**extra):
    doc = {
        "bit_rate_bps": 9600.0,
        "trunk_length_m": 100.0,
        "cable": {"class_key": "pair-24awg-150"},
        "driver": {"transceiver": "edge-25ns"},
        "nodes": [
            {"name": "mid", "position_m": 50.0, "stub_length_m": 1.0, "unit_loads": 0.5},
            {"name": "far", "position_m": 100.0, "stub_length_m": 0.5},
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 150.0},
            {"position_m": 100.0, "resistance_ohm": 150.0},
        ],
    }
    doc.update(extra)
    return build_bus(load_plan(doc))


def test_ranges_default_to_the_classes_published_figures():
    ranges = {r.key: r for r in tolerance_ranges(_terminated())}
    # Source: PROFIBUS Specification, Normative Parts 2:1997, 4.1.2.3: type A cable 135 to 165 ohm (150 +/- 10 %).
    assert (ranges["z0"].low, ranges["z0"].high) == pytest.approx((0.9, 1.1))
    assert "PROFIBUS" in ranges["z0"].source
    # Source: IEC 60063 preferred numbers, E24 series +/- 5 %.
    assert (ranges["terminator"].low, ranges["terminator"].high) == pytest.approx((0.95, 1.05))
    assert "IEC 60063" in ranges["terminator"].source
    # Source: RS-485 driver data sheets' switching tables, 3 / 25 / 40 ns min / typ / max for a 25 ns part.
    assert ranges["rise_time"].low * 25e-9 == pytest.approx(3e-9)
    assert ranges["rise_time"].high * 25e-9 == pytest.approx(40e-9)
    # Source: TIA/EIA-485-A: a unit-load rating is the most a receiver may draw.
    assert ranges["unit_loads"].high == pytest.approx(1.0)


def test_the_plan_sets_its_own_tolerances():
    bus = _terminated(tolerances={"z0_tolerance": 0.2, "rise_time_min_s": 10e-9, "terminator_tolerance": 0.01})
    ranges = {r.key: r for r in tolerance_ranges(bus)}
    # Source: the plan's own figures.
    assert (ranges["z0"].low, ranges["z0"].high) == pytest.approx((0.8, 1.2))
    assert ranges["rise_time"].low * 25e-9 == pytest.approx(10e-9)
    assert (ranges["terminator"].low, ranges["terminator"].high) == pytest.approx((0.99, 1.01))
    assert ranges["z0"].source == "set in the plan"


def test_slow_bits_meet_the_dc_divider_at_the_terminators_worst_corner():
    # At 9600 bit/s every bit settles to the DC divider: V = V_oc R_p / (R_s + R_p + R_loop), R_p the two
    # terminators in parallel with the receivers. Its lowest value over the tolerances: both terminators -5 %
    # (E24, IEC 60063) and every receiver at its full unit-load rating (TIA/EIA-485-A).
    bus = _terminated()
    report = analyse_tolerances(bus, variants=0)
    r_t = 0.95 * 150.0
    r_rx = 1.0 / (0.5 / 12_000.0 + 1.0 / 12_000.0)
    r_p = 1.0 / (2.0 / r_t + 1.0 / r_rx)
    r_loop = 2.0 * 100.0 * 0.0842  # ASTM B258 24 AWG, 84.2 ohm/km per conductor, the whole trunk (upper bound)
    low = 4.0 * r_p / (40.0 + r_p + r_loop)
    high = 4.0 * r_p / (40.0 + r_p)
    for t in report.receivers:
        # Source: closed form above; the receivers sit between the trunk ends, so the loop they see is shorter.
        assert low - 0.2 - 0.01 <= t.worst.margin_v <= high - 0.2 + 0.01  # volts: 0.2 V threshold
        assert t.dominant == "terminators"


def test_nominal_of_the_analysis_is_the_plain_simulation():
    # Source: the same bus simulated by engine.metrics directly (the tolerance analysis only adds variants); both
    # are within engine.transient.ACCURACY (0.4 % of the swing) of the exact waveform.
    bus = _terminated(bit_rate_bps=1e6)
    report = analyse_tolerances(bus, variants=0)
    for t, m in zip(report.receivers, receiver_metrics(bus, pattern=report.pattern), strict=True):
        assert t.nominal.margin_v == pytest.approx(m.margin_v, abs=0.01 * 2.0 * m.amplitude_v)


@pytest.mark.parametrize("rate_bps", [9600.0, 1e6, 5e6])
def test_worst_corner_bounds_every_monte_carlo_variant(rate_bps):
    # Source: every Monte Carlo variant lies inside the tolerance box whose corners were searched; with each
    # parameter's effect one-signed over its small range the worst corner is the box's lowest point. 0.4 % of the
    # swing allowed: the waveforms' accuracy.
    bus = _terminated(bit_rate_bps=rate_bps)
    report = analyse_tolerances(bus, variants=60, seed=3)
    worst = np.array([t.worst.margin_v for t in report.receivers])
    swing = np.array([2.0 * t.nominal.amplitude_v for t in report.receivers])
    assert report.monte_carlo_margin_v is not None
    assert np.all(report.monte_carlo_margin_v >= worst[None, :] - 0.004 * swing[None, :])


def test_monte_carlo_percentiles_are_stable_across_seeds():
    # Source: sampling error of a 1st percentile over 200 uniform draws; two seeds agree within a third of the
    # spread between the nominal margin and the worst corner (a stated tolerance, common practice for such checks).
    bus = _terminated(bit_rate_bps=1e6)
    a = analyse_tolerances(bus, variants=200, seed=1)
    b = analyse_tolerances(bus, variants=200, seed=2)
    for ta, tb in zip(a.receivers, b.receivers, strict=True):
        spread = ta.nominal.margin_v - ta.worst.margin_v
        assert ta.p1_margin_v == pytest.approx(tb.p1_margin_v, abs=spread / 3.0)
        # the percentile lies between the worst corner and the nominal
        assert ta.worst.margin_v - 0.01 <= ta.p1_margin_v <= ta.nominal.margin_v + 0.01


def test_a_bit_shorter_than_the_edge_still_gets_its_corners():
    # A driver whose edge (500 ns 10-90 %) outlasts the 500 ns bit: some window instants fall before the start of
    # their own bit and are read from the bit before. The corners are analysed; every receiver's worst case is
    # one of the cases ranked, the nominal among them, so it is never above the nominal (common practice: a worst
    # case bounds the nominal).
    doc = {
        "bit_rate_bps": 2e6,
        "trunk_length_m": 4000.0,
        "driver": {"name": "drv", "rise_time_s": 500e-9, "open_circuit_v": 5.0, "source_ohm": 30.0},
        "nodes": [
            {"name": f"n{k}", "position_m": 1000.0 * (k + 1), "stub_length_m": 100.0 if k == 0 else 1.0}
            for k in range(4)
        ],
        "terminations": [
            {"position_m": 0.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9},
            {"position_m": 4000.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9},
        ],
        "test_pattern": "01101001" * 8,
    }
    report = analyse_tolerances(build_bus(load_plan(doc)), variants=0)
    assert report.corners > 0 and len(report.receivers) == 4
    for t in report.receivers:
        assert t.worst.margin_v <= t.nominal.margin_v + 1e-12
