"""Rule "bias.idle_level": idle-bus level with the plan's bias network, and the bias resistors to fit."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pairline.engine.bus import build_bus
from pairline.engine.dc import idle_levels_v
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.bias import (
    bias_min_ohm,
    check_failsafe_bias,
    idle_load_ohm,
    idle_voltage_v,
    max_bias_ohm,
    size_bias,
)
from pairline.engine.rules.preferred import preferred_at_or_below
from pairline.engine.units import parallel_ohm

LOSSLESS = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0}
ENDS = [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 100.0, "resistance_ohm": 120.0}]


def _bus(**changes):
    doc = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 100.0,
        "driver": {"transceiver": "edge-10ns"},  # a 1 unit-load transceiver
        "nodes": [{"name": f"n{i}", "position_m": 10.0 * i} for i in range(1, 10)],
        "terminations": ENDS,
    }
    doc.update(changes)
    return build_bus(load_plan(doc))


def test_max_bias_for_two_120_ohm_terminators_from_5_v():
    # common practice: R_B,max = (R_eq / 2)(V_S / V_min - 1) with 60 Ohm, 5 V, 200 mV (TI SLLA272 bias method).
    assert max_bias_ohm(60.0, 5.0, 0.2) == pytest.approx(720.0, rel=1e-9)


def test_max_bias_with_32_unit_loads_across_too():
    # common practice: 60 Ohm || 32 x 12 kOhm = 51.7 Ohm gives 621 Ohm (same formula).
    r_eq = parallel_ohm(120.0, 120.0, *[12_000.0] * 32)
    assert max_bias_ohm(r_eq, 5.0, 0.2) == pytest.approx(621.0, abs=1.0)


def test_max_bias_from_3_3_v():
    # common practice: 3.3 V, 60 Ohm, 200 mV -> 465 Ohm.
    assert max_bias_ohm(60.0, 3.3, 0.2) == pytest.approx(465.0, rel=1e-9)


def test_unterminated_32_unit_load_bus_needs_at_most_9_kohm_of_bias_in_total():
    # Source: B&B Electronics RS-422/485 application note: 32 unit loads (375 Ohm), 5 V, 200 mV -> 0.533 mA,
    # bias resistors together <= 9 kOhm.
    r_eq = parallel_ohm(*[12_000.0] * 32)
    assert 2 * max_bias_ohm(r_eq, 5.0, 0.2) == pytest.approx(9_000.0, rel=1e-9)
    assert 0.2 / r_eq == pytest.approx(0.533e-3, abs=1e-6)


def test_470_ohm_bias_on_a_terminated_ten_node_bus_gives_285_mv():
    # Source: B&B Electronics RS-422/485 application note: 10 nodes, two 120 Ohm terminators, 470 Ohm from
    # 5 V -> 285 mV at about 5 mA.
    published_v = 0.285
    bus = _bus(cable=LOSSLESS, bias={"position_m": 0.0, "pull_up_ohm": 470.0, "pull_down_ohm": 470.0})
    finding = check_failsafe_bias(bus)[0]
    assert finding.value == pytest.approx(published_v, abs=3e-3)  # the note rounds; the formula gives 0.2865
    assert finding.verdict is Verdict.HOLDS
    assert 5.0 / (940.0 + idle_load_ohm(bus)) == pytest.approx(5e-3, rel=0.05)


def test_510_ohm_per_wire():
    # common practice: 510 Ohm per wire, two 120 Ohm terminators, 5 V -> 0.278 V.
    assert idle_voltage_v(5.0, 510.0, 510.0, 60.0) == pytest.approx(0.278, abs=5e-4)


def test_weak_1k5_bias_falls_below_threshold_and_breaks():
    # common practice: 1.5 kOhm / 120 Ohm / 1.5 kOhm from 5 V -> V_AB 0.192 V, under the 200 mV threshold
    # (TIA/EIA-485-A).
    assert idle_voltage_v(5.0, 1500.0, 1500.0, 120.0) == pytest.approx(0.192, abs=5e-4)
    bus = _bus(
        cable=LOSSLESS,
        nodes=[{"name": "only", "position_m": 100.0, "unit_loads": 1e-6}],
        driver={"transceiver": "edge-10ns", "position_m": 0.0},
        terminations=[{"position_m": 100.0, "resistance_ohm": 120.0}],
        standard="rs422",
        bias={"position_m": 0.0, "pull_up_ohm": 1500.0, "pull_down_ohm": 1500.0},
    )
    finding = check_failsafe_bias(bus)[0]
    assert finding.value == pytest.approx(0.192, abs=5e-4)
    assert finding.verdict is Verdict.BREAKS
    assert "pull-up" in finding.fix and "Ω" in finding.fix


def test_no_bias_on_rs485_breaks_and_names_failsafe_receivers():
    # Source: TIA/EIA-485-A: 0 V lies inside the +/-200 mV undefined band; J. Axelson, Serial Port Complete,
    # ch. 7: receivers with shifted (failsafe) thresholds need no bias.
    finding = check_failsafe_bias(_bus())[0]
    assert finding.verdict is Verdict.BREAKS and finding.value == 0.0 and finding.limit == pytest.approx(0.2)
    assert "failsafe" in finding.fix and "failsafe thresholds" in finding.detail


def test_e24_value_below_the_limit():
    # Source: IEC 60063 E24 series: 680 and 750 are neighbours.
    assert preferred_at_or_below(712.0) == pytest.approx(680.0)
    assert preferred_at_or_below(750.0) == pytest.approx(750.0)


def test_sized_bias_keeps_a_long_bus_far_end_above_threshold_at_the_worst_corner():
    # Source: TIA/EIA-485-A threshold 200 mV; the sizing allows for the cable drop and the tolerance corner
    # (supply 5 % low, resistors 5 % high: engine.rules.margins).
    long_doc = {
        "trunk_length_m": 1200.0,
        "nodes": [{"name": "mid", "position_m": 600.0}, {"name": "end", "position_m": 1200.0}],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 1200.0, "resistance_ohm": 120.0}],
    }
    sizing = size_bias(_bus(**long_doc), 0.0)
    r_b = preferred_at_or_below(sizing.corner_max_ohm)
    fitted = _bus(**long_doc, bias={"position_m": 0.0, "pull_up_ohm": r_b, "pull_down_ohm": r_b})
    _, levels_v = idle_levels_v(fitted)
    assert levels_v.min() >= 0.2
    assert check_failsafe_bias(fitted)[0].verdict is Verdict.HOLDS
    # The next E24 value up no longer holds at the corner.
    weaker = preferred_at_or_below(sizing.corner_max_ohm * 1.2)
    assert weaker > r_b
    looser = _bus(**long_doc, bias={"position_m": 0.0, "pull_up_ohm": weaker, "pull_down_ohm": weaker})
    assert check_failsafe_bias(looser)[0].verdict is not Verdict.HOLDS


@pytest.mark.parametrize(
    ("r_b", "nominal_v", "corner_v", "verdict"),
    [
        # common practice (worst-case arithmetic): 560 Ohm each from 5 V over 120 || 120 || 13 x 12 kOhm
        # (56.3 Ohm) idles at 5 x 56.3 / (1120 + 56.3) = 0.239 V; with 4.75 V (5 V - 5 %), 588 Ohm (+5 %) and
        # terminators at 114 Ohm (-5 %): 4.75 x 53.6 / (1176 + 53.6) = 0.207 V, still above the 200 mV threshold
        # (TIA/EIA-485-A): holds.
        (560.0, 0.239, 0.207, Verdict.HOLDS),
        # 620 Ohm: 5 x 56.3 / 1296.3 = 0.217 V nominal, 4.75 x 53.6 / (1302 + 53.6) = 0.188 V at the corner: tight.
        (620.0, 0.217, 0.188, Verdict.TIGHT),
    ],
)
def test_the_tight_band_is_the_worst_corner_of_parts_and_supply(r_b, nominal_v, corner_v, verdict):
    nodes = [{"name": f"n{i}", "position_m": 8.0 * i, "unit_loads": 1.0} for i in range(1, 13)]
    bus = _bus(cable=LOSSLESS, nodes=nodes, bias={"position_m": 0.0, "pull_up_ohm": r_b, "pull_down_ohm": r_b})
    finding = check_failsafe_bias(bus)[0]
    assert finding.value == pytest.approx(nominal_v, abs=1e-3)  # V
    assert finding.figure("corner_v") == pytest.approx(corner_v, abs=1e-3)  # V
    assert finding.verdict is verdict


@settings(max_examples=40, deadline=None)
@given(
    r_small=st.floats(min_value=50.0, max_value=50_000.0),
    factor=st.floats(min_value=1.01, max_value=20.0),
)
def test_idle_level_falls_as_the_bias_resistors_grow(r_small, factor):
    # Source: closed form V_AB = V_S R_eq / (2 R_B + R_eq) decreases in R_B; the ladder must agree.
    def level(r_b):
        bus = _bus(bias={"position_m": 50.0, "pull_up_ohm": r_b, "pull_down_ohm": r_b})
        return idle_levels_v(bus)[1].min()

    assert level(r_small * factor) < level(r_small)
    assert idle_voltage_v(5.0, r_small * factor, r_small * factor, 60.0) < idle_voltage_v(5.0, r_small, r_small, 60.0)


def test_bias_room_from_the_unit_load_budget():
    # common practice: 32 UL budget (TIA/EIA-485-A) with the bias rated 12 kOhm / R unit loads; nine 1 UL
    # nodes and a 1 UL driver leave 22 UL, so each resistor must be >= 12 kOhm / 22 = 545 Ohm.
    assert bias_min_ohm(_bus()) == pytest.approx(12_000.0 / 22.0, rel=1e-9)


def test_crowded_terminated_bus_gets_failsafe_or_rc_advice():
    # common practice: 30 UL of nodes leave 1 UL for the bias (>= 12 kOhm each), while two 120 Ohm
    # terminators need <= 720 Ohm for 200 mV (formula above): no pair fits.
    nodes = [{"name": f"n{i}", "position_m": 3.0 * i} for i in range(1, 31)]
    bus = _bus(nodes=nodes, cable=LOSSLESS)
    assert bias_min_ohm(bus) == pytest.approx(12_000.0, rel=1e-9)
    assert size_bias(bus, 0.0).nominal_max_ohm < 720.0
    fix = check_failsafe_bias(bus)[0].fix
    assert "no pull-up / pull-down pair fits" in fix
    assert "failsafe thresholds" in fix and "RC terminators" in fix
