"""Rule "power.resistor": terminator and bias resistor power, and the rating to buy."""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.bias import check_failsafe_bias, size_bias
from pairline.engine.rules.common_mode import check_common_mode
from pairline.engine.rules.length_rate import check_length_vs_rate, max_bit_rate_bps
from pairline.engine.rules.power import check_resistor_power, rating_to_buy_w, resistor_powers
from pairline.engine.rules.voltage import check_receiver_voltage


def _bus(open_circuit_v=4.0, terminations=None, **changes):
    doc = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 100.0,
        "driver": {"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": open_circuit_v, "source_ohm": 40.0},
        "nodes": [{"name": "far", "position_m": 100.0}],
        "terminations": terminations or [{"position_m": 100.0, "resistance_ohm": 120.0}],
    }
    doc.update(changes)
    return build_bus(load_plan(doc))


def test_terminator_power_at_2_and_5_v_and_in_a_12_v_fault():
    # common practice: P = V^2 / R_T: 2 V on 120 Ohm -> 33.3 mW; 5 V -> 208 mW; a 12 V fault -> 1.2 W.
    two = resistor_powers(_bus(2.0))[0]
    five = resistor_powers(_bus(5.0))[0]
    assert two.normal_w == pytest.approx(33.3e-3, abs=0.05e-3)
    assert five.normal_w == pytest.approx(208e-3, abs=0.5e-3)
    assert five.fault_w == pytest.approx(1.2, rel=1e-9) and five.fault_v == pytest.approx(12.0)


def test_ratings_to_buy_with_2x_derating():
    # common practice: buy twice the dissipated power from 1/8, 1/4, 1/2, 1, 2 W.
    assert rating_to_buy_w(33.3e-3) == 0.125
    assert rating_to_buy_w(0.208) == 0.5
    assert rating_to_buy_w(0.6) == 2.0
    assert rating_to_buy_w(1.2) == 5.0  # past the usual series, a power resistor
    assert rating_to_buy_w(0.0) == 0.125


def test_bias_resistor_power_from_5_v():
    # common practice: P = V_S^2 / R while the driver holds the line against the bias: 25 / 470 = 53.2 mW;
    # fault with A at -7 V (TIA/EIA-485-A range): 12^2 / 470 = 306 mW.
    bus = _bus(bias={"position_m": 0.0, "pull_up_ohm": 470.0, "pull_down_ohm": 470.0})
    up = next(p for p in resistor_powers(bus) if p.label == "bias pull-up")
    assert up.normal_w == pytest.approx(53.2e-3, abs=0.05e-3)
    assert up.fault_w == pytest.approx(0.306, abs=1e-3)
    assert up.rating_w == 0.125


def test_rc_terminator_dissipates_per_edge():
    # Source: energy C dV^2 / 2 lost in the resistor per edge (RC charging), dV = 2 V_OC, one edge per bit:
    # 1 nF, 4 V, 9600 bit/s -> 2 * 1e-9 * 16 * 9600 = 0.307 mW.
    bus = _bus(terminations=[{"position_m": 100.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9}])
    p = resistor_powers(bus)[0]
    assert p.normal_w == pytest.approx(2 * 1e-9 * 16 * 9600, rel=1e-9)
    assert p.label.startswith("RC terminator")


def test_verdicts_120_holds_54_tight_10_breaks():
    # common practice: 12 V fault on 54 Ohm is 2.67 W (past 2 W); 4 V on 10 Ohm is 1.6 W, 3.2 W with derating.
    def verdict(r_ohm):
        return check_resistor_power(_bus(terminations=[{"position_m": 100.0, "resistance_ohm": r_ohm}]))[0]

    assert verdict(120.0).verdict is Verdict.HOLDS and verdict(120.0).fix == ""
    tight = verdict(54.0)
    assert tight.verdict is Verdict.TIGHT and "2.67 W" in tight.fix
    broken = verdict(10.0)
    assert broken.verdict is Verdict.BREAKS and broken.value == pytest.approx(1.6) and broken.limit == 1.0


# 0, or a fraction that keeps a 0.5 m trunk's positions at 1 mm or more (the plan model refuses non-zero values
# below a physical floor: 1 mm, 1 mV, 1 mΩ)
_positions = st.one_of(st.just(0.0), st.floats(min_value=2e-3, max_value=1.0))


def _zero_or(low: float, high: float) -> st.SearchStrategy[float]:
    return st.one_of(st.just(0.0), st.floats(min_value=low, max_value=high), st.floats(min_value=-high, max_value=-low))


@st.composite
def _plans(draw):
    length_m = draw(st.floats(min_value=0.5, max_value=4000.0))
    n_nodes = draw(st.integers(min_value=1, max_value=6))
    nodes = [
        {
            "name": f"n{i}",
            "position_m": draw(_positions) * length_m,
            "stub_length_m": draw(st.one_of(st.just(0.0), st.floats(min_value=1e-3, max_value=100.0))),
            "unit_loads": draw(st.sampled_from([0.125, 0.25, 1.0, 32.0])),
            "ground_offset_v": draw(_zero_or(1e-3, 10_000.0)),
            "role": draw(st.sampled_from(["receiver", "transceiver"])),
        }
        for i in range(n_nodes)
    ]
    terms = [
        {"position_m": draw(_positions) * length_m, "resistance_ohm": draw(st.floats(min_value=1.0, max_value=1e6))}
        for _ in range(draw(st.integers(min_value=0, max_value=3)))
    ]
    doc = {
        "bit_rate_bps": draw(st.floats(min_value=50.0, max_value=100e6)),
        "trunk_length_m": length_m,
        "cable": draw(
            st.sampled_from(
                [
                    {"class_key": "cat5e-100"},
                    {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.7, "resistance_ohm_per_m": 0.0},
                ]
            )
        ),
        "driver": {
            "position_m": draw(_positions) * length_m,
            "source_ohm": draw(st.one_of(st.just(0.0), st.floats(1e-3, 1000.0))),
        },
        "nodes": nodes,
        "terminations": terms,
    }
    if draw(st.booleans()):
        doc["bias"] = {
            "position_m": draw(_positions) * length_m,
            "pull_up_ohm": draw(st.floats(min_value=10.0, max_value=10e6)),
            "pull_down_ohm": draw(st.floats(min_value=10.0, max_value=10e6)),
        }
    return doc


@settings(max_examples=60, deadline=None)
@given(doc=_plans())
def test_rules_7_to_11_never_raise_and_give_finite_numbers(doc):
    # Source: house rule: a rule check returns findings, never raises; numbers are finite or None.
    bus = build_bus(load_plan(doc))
    findings = [
        *check_receiver_voltage(bus),
        *check_failsafe_bias(bus),
        *check_common_mode(bus),
        *check_length_vs_rate(bus),
        *check_resistor_power(bus),
    ]
    assert len([f for f in findings if f.rule_id == "signal.dc_level"]) == len(doc["nodes"])
    for f in findings:
        assert f.value is None or math.isfinite(f.value), f
        assert f.limit is None or math.isfinite(f.limit), f
        assert f.verdict is Verdict.HOLDS or f.fix, f
    rate_bps = max_bit_rate_bps(bus)
    sizing = size_bias(bus, bus.plan.driver.position_m)
    assert math.isfinite(rate_bps) and math.isfinite(sizing.corner_max_ohm) and math.isfinite(sizing.nominal_max_ohm)
