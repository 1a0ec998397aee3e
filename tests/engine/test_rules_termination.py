"""Termination placement and value, the unterminated-line criteria and RC terminators."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict, worst
from pairline.engine.plan import load_plan
from pairline.engine.rules.cable_ends import end_tolerance_m, required_ends_m
from pairline.engine.rules.rc_termination import check_ac_termination
from pairline.engine.rules.termination import (
    check_termination,
    corrected_termination_ohm,
    recommended_termination_ohm,
    reflection_coefficient,
)
from pairline.engine.rules.unterminated import check_unterminated, line_may_stay_unterminated, unterminated_criteria
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S, m_from_ft


def _bus(
    terms=((0.0, 120.0), (1000.0, 120.0)),
    *,
    standard="rs485",
    length_m=1000.0,
    driver_at_m=0.0,
    bit_rate_bps=115_200,
    cable=None,
    nodes=None,
    transceiver="edge-100ns",
    bias=None,
):
    doc = {
        "standard": standard,
        "bit_rate_bps": bit_rate_bps,
        "trunk_length_m": length_m,
        "cable": cable or {"class_key": "pair-24awg-120"},
        "driver": {"position_m": driver_at_m, "transceiver": transceiver},
        "nodes": nodes or [{"name": "far", "position_m": length_m / 2}],
        "terminations": [t if isinstance(t, dict) else {"position_m": t[0], "resistance_ohm": t[1]} for t in terms],
        "bias": bias,
    }
    return build_bus(load_plan(doc))


def _by_rule(findings, rule_id):
    return [f for f in findings if f.rule_id == rule_id]


# --- closed forms -------------------------------------------------------------------------------------------


def test_reflection_coefficients():
    # Source: D. M. Pozar, Microwave Engineering, sec. 2.3, Gamma = (Z_L - Z0)/(Z_L + Z0); values common practice.
    assert reflection_coefficient(100.0, 120.0) == pytest.approx(-0.0909, abs=5e-5)
    # Source: same formula, open end.
    assert reflection_coefficient(float("inf"), 120.0) == 1.0
    # Source: same formula, 60 Ohm (two 120 Ohm in parallel) on a 120 Ohm line.
    assert reflection_coefficient(60.0, 120.0) == pytest.approx(-1 / 3, abs=5e-4)


def test_terminator_corrected_for_lumped_receivers():
    # common practice (arithmetic): R_T || R_P = Z0 solved for R_T gives R_T = Z0 / (1 - Z0/R_P); 30 receivers
    # of 36 kOhm in parallel are R_P = 1200 Ohm, so on a 100 Ohm line R_T = 100 / (1 - 1/12) = 109.1 Ohm.
    assert corrected_termination_ohm(100.0, 36_000.0 / 30) == pytest.approx(109.1, abs=0.05)


def test_matched_bias_end_terminator():
    # Source: J. Axelson, Serial Port Complete, 2nd ed., ch. 7: R_T2 = 2 R_B Z0 / (2 R_B - Z0); 120 Ohm, 620 Ohm -> 133.
    assert corrected_termination_ohm(120.0, 2 * 620.0) == pytest.approx(133.0, abs=0.5)


def test_plan_with_30_receivers_lumped_at_the_end_gets_109_ohm():
    nodes = [{"name": f"rx{i}", "position_m": 100.0, "unit_loads": 1 / 3} for i in range(30)]
    bus = _bus(terms=((0.0, 100.0), (100.0, 100.0)), length_m=100.0, nodes=nodes, cable={"class_key": "cat5e-100"})
    # common practice (arithmetic, as above): 30 receivers of 1/3 UL (36 kOhm each) lumped at the end -> 109.1 Ohm.
    assert recommended_termination_ohm(bus, 100.0) == pytest.approx(109.1, abs=0.05)
    value = [f for f in check_termination(bus) if f.rule_id == "termination.value" and "100 m" in f.title][0]
    assert "The ideal terminator here is 109.1 Ω" in value.detail
    # Source: D. M. Pozar, Microwave Engineering, sec. 2.3: 100 Ohm || 1200 Ohm = 92.3 Ohm on 100 Ohm -> |Gamma| 0.040.
    assert value.value == pytest.approx(0.040, abs=0.0005)


# --- placement ----------------------------------------------------------------------------------------------


def test_rs485_terminates_both_cable_ends_even_with_the_driver_mid_bus():
    # Source: TI SLLA272 and B&B RS-422/485 application note: both physical ends of an RS-485 trunk.
    bus = _bus(driver_at_m=500.0)
    assert required_ends_m(bus) == (0.0, 1000.0)
    placement = _by_rule(check_termination(bus), "termination.placement")
    assert worst([f.verdict for f in placement]) is Verdict.HOLDS


def test_rs422_driver_at_an_end_terminates_the_far_end_only():
    # Source: National Semiconductor AN-903: single-driver RS-422, terminator at the far (receiver) end only.
    bus = _bus(terms=((1000.0, 100.0),), standard="rs422", cable={"class_key": "tia422-reference"})
    assert required_ends_m(bus) == (1000.0,)
    placement = _by_rule(check_termination(bus), "termination.placement")
    assert [f.verdict for f in placement] == [Verdict.HOLDS]


def test_rs422_driver_end_terminator_is_extra():
    bus = _bus(terms=((0.0, 100.0), (1000.0, 100.0)), standard="rs422", cable={"class_key": "tia422-reference"})
    placement = _by_rule(check_termination(bus), "termination.placement")
    extra = [f for f in placement if f.verdict is not Verdict.HOLDS]
    assert len(extra) == 1 and extra[0].verdict is Verdict.BREAKS
    assert extra[0].fix == "Remove the 100 Ω terminator at 0 m."
    assert extra[0].title == "Terminator at the RS-422 driver's end (0 m): not wanted"


def test_rs422_driver_mid_bus_terminates_both_ends():
    # common practice: a mid-bus RS-422 driver sends both ways, so both cable ends are terminated.
    bus = _bus(terms=((1000.0, 100.0),), standard="rs422", driver_at_m=400.0, cable={"class_key": "tia422-reference"})
    assert required_ends_m(bus) == (0.0, 1000.0)
    missing = [f for f in _by_rule(check_termination(bus), "termination.placement") if f.verdict is Verdict.BREAKS]
    assert len(missing) == 1 and missing[0].fix == "Add a 100 Ω terminator at the 0 m end."
    assert missing[0].title == "No terminator at the 0 m end" and missing[0].value is None


def test_mid_bus_terminator_breaks_on_a_long_line_and_is_moved_to_the_free_end():
    bus = _bus(terms=((0.0, 120.0), (600.0, 120.0)))
    assert not line_may_stay_unterminated(bus)
    placement = _by_rule(check_termination(bus), "termination.placement")
    assert [f.verdict for f in placement].count(Verdict.BREAKS) == 2  # far end missing, one mid-bus
    mid = [f for f in placement if "mid-bus" in f.title][0]
    assert mid.fix == "Move the terminator at 600 m to the far end (1000 m)."
    assert (mid.value, mid.limit, mid.unit) == (400.0, 1.0, "m")


def test_terminator_within_the_end_tolerance_counts_as_at_the_end():
    bus = _bus(terms=((0.0, 120.0), (999.5, 120.0)))
    # 100 ns driver at VF 0.78 allows a 2.34 m stub (TI SLLA272), so the tolerance is the 1 m cap.
    assert end_tolerance_m(bus) == 1.0
    placement = _by_rule(check_termination(bus), "termination.placement")
    assert worst([f.verdict for f in placement]) is Verdict.HOLDS
    moved = _bus(terms=((0.0, 120.0), (998.5, 120.0)))
    assert worst([f.verdict for f in _by_rule(check_termination(moved), "termination.placement")]) is Verdict.BREAKS


def test_fast_driver_shrinks_the_end_tolerance_to_its_stub_limit():
    # Source: TI SLLA272 stub rule at VF 0.78, 3 ns -> 0.07 m.
    assert end_tolerance_m(_bus(transceiver="edge-3ns")) == pytest.approx(0.07, abs=0.005)


def test_two_terminators_at_one_end_are_one_too_many():
    bus = _bus(terms=((0.0, 120.0), (0.0, 120.0), (1000.0, 120.0)))
    placement = _by_rule(check_termination(bus), "termination.placement")
    extra = [f for f in placement if f.verdict is Verdict.BREAKS]
    assert [f.title for f in extra] == ["2 terminators at the driver's end (0 m): one too many"]
    assert extra[0].fix == "Keep one terminator at the driver's end (0 m) and remove the other: 120 Ω at 0 m."


# --- value --------------------------------------------------------------------------------------------------


def test_value_verdicts_follow_the_reflection_bands():
    matched = _by_rule(check_termination(_bus()), "termination.value")
    assert [f.verdict for f in matched] == [Verdict.HOLDS, Verdict.HOLDS]
    # Source: Intersil high-speed RS-485 tutorial: RS-485 accepts Z0 = 120 +/- 30 Ohm, so 120 Ohm terminators on
    # 100 Ohm Cat-5e (Gamma +0.09) are usable but not matched: tight.
    cat5 = _by_rule(check_termination(_bus(cable={"class_key": "cat5e-100"})), "termination.value")
    assert {f.verdict for f in cat5} == {Verdict.TIGHT}
    assert "Use 100 Ω" in cat5[0].fix
    halved = _by_rule(check_termination(_bus(terms=((0.0, 60.0), (1000.0, 120.0)))), "termination.value")
    # Source: D. M. Pozar, Microwave Engineering, sec. 2.3: 60 Ohm on a 120 Ohm line -> |Gamma| 1/3 (the driver's
    # 48 kOhm receiver beside it moves that by under 0.001).
    assert halved[0].verdict is Verdict.BREAKS and halved[0].value == pytest.approx(1 / 3, abs=0.001)
    assert halved[0].title == "Reflection at the driver's end (0 m) with its 60 Ω terminator"


# --- may the line stay unterminated -----------------------------------------------------------------------


def _criterion(bus, key):
    return next(c for c in unterminated_criteria(bus) if c.key == key)


def test_forty_delays_per_bit_allows_515_m_at_9600():
    bus = _bus(terms=(), bit_rate_bps=9600, cable={"class_key": "pair-22awg-120"})  # VF 0.66
    # Source: J. Axelson, Serial Port Complete, ch. 7 (bit >= 40 one-way delays); 9600 bit/s, VF 0.66 -> 515 m.
    assert _criterion(bus, "bit_40x_delay").max_length_m == pytest.approx(515.0, abs=0.5)


def test_three_round_trips_allow_482_ft_at_115200_only_at_1_5_ns_per_ft():
    # The criterion (three round trips before mid-bit) is the B&B RS-422/485 application note's; its length at
    # 115.2 kbit/s, L_max = 0.5 T_bit v / 6 = 723.4 ns x v, is arithmetic (common practice). 482 ft follows from a
    # delay of 1.5 ns/ft (v = 0.667 ft/ns, VF 0.678): 723.4 / 1.5 = 482.3 ft. It does NOT follow from v = 0.66 ft/ns
    # (477.4 ft), nor from VF 0.66 (0.649 ft/ns: 469.6 ft).
    vf_1_5_ns_per_ft = m_from_ft(1.0) / 1.5e-9 / SPEED_OF_LIGHT_M_PER_S
    bus = _bus(
        terms=(), bit_rate_bps=115_200, cable={"class_key": "pair-22awg-120", "velocity_factor": vf_1_5_ns_per_ft}
    )
    # common practice: 0.5 / 115 200 s / 6 / 1.5 ns per ft = 482.3 ft.
    assert _criterion(bus, "three_round_trips").max_length_m == pytest.approx(m_from_ft(482.3), abs=m_from_ft(0.05))
    vf_066 = _bus(terms=(), bit_rate_bps=115_200, cable={"class_key": "pair-22awg-120"})  # VF 0.66
    # common practice: 723.4 ns x 0.66 x 0.98357 ft/ns (c0 in ft/ns) = 469.6 ft.
    assert _criterion(vf_066, "three_round_trips").max_length_m == pytest.approx(m_from_ft(469.6), abs=m_from_ft(0.05))


def test_2000_ft_at_9600_needs_no_terminator():
    bus = _bus(terms=(), length_m=m_from_ft(2000.0), bit_rate_bps=9600, cable={"class_key": "pair-22awg-120"})
    crit = _criterion(bus, "three_round_trips")
    # Source: B&B Electronics RS-422/485 application note: 2000 ft, VF 0.66: round trip 6.2 us, three 18.6 us,
    # against a 52 us half bit.
    assert crit.value / 3 == pytest.approx(6.2e-6, abs=0.05e-6)
    assert crit.value == pytest.approx(18.6e-6, abs=0.15e-6)
    assert crit.limit == pytest.approx(52e-6, abs=0.1e-6)
    assert crit.holds and crit.deciding and line_may_stay_unterminated(bus)
    finding = check_unterminated(bus)[0]
    assert finding.verdict in (Verdict.HOLDS, Verdict.TIGHT)


def test_rise_time_criteria_compare_the_round_trip_with_the_edge():
    # Source: Intersil tutorial and TSB-89-A (per Axelson): no terminator while 2 t_pd <= t_r.
    # 100 ns at VF 0.78 -> 0.5 * 100 ns * 0.78 * c0 = 11.69 m (common practice arithmetic).
    bus = _bus(terms=(), length_m=11.0)
    assert _criterion(bus, "rise_vs_round_trip").holds
    assert _criterion(bus, "rise_vs_round_trip").max_length_m == pytest.approx(11.69, abs=0.01)
    assert not _criterion(_bus(terms=(), length_m=12.5), "rise_vs_round_trip").holds


def test_field_rule_needs_a_rate_up_to_200_kbit():
    # common practice: bit > 4 one-way delays and at most 200 kbit/s.
    assert _criterion(_bus(terms=(), length_m=10.0, bit_rate_bps=100e3), "field_rule").holds
    assert not _criterion(_bus(terms=(), length_m=10.0, bit_rate_bps=250e3), "field_rule").holds


def test_field_rule_allows_225_m_at_200_kbit_and_velocity_factor_0_6():
    cable = {"class_key": "pair-24awg-120", "velocity_factor": 0.6}
    bus = _bus(terms=(), length_m=100.0, bit_rate_bps=200e3, cable=cable)
    # common practice (field rule of thumb): 200 kbit/s at velocity factor 0.6 -> 225 m.
    assert _criterion(bus, "field_rule").max_length_m == pytest.approx(225.0, abs=0.5)


def test_may_omit_names_every_criterion_and_the_deciding_one():
    finding = check_unterminated(_bus(terms=()))[0]
    assert finding.rule_id == "termination.may_omit"
    for name in ("Round trip within the rise time", "TSB-89-A", "40 one-way delays", "Three round trips", "Field rule"):
        assert name in finding.detail
    assert "[deciding] Three round trips" in finding.detail
    assert finding.verdict is Verdict.BREAKS  # 1000 m at 115.2 kbit/s
    assert finding.title == "Unterminated line: three round trips outlast half a bit"
    assert finding.fix.startswith("Fit a 120 Ω terminator at the driver's end (0 m) and the far end (1000 m)")


def test_may_omit_is_informational_on_a_terminated_line():
    finding = check_unterminated(_bus())[0]
    assert finding.verdict is Verdict.HOLDS
    assert finding.title == "Terminators needed: three round trips outlast half a bit"


def test_short_unterminated_line_holds_placement():
    bus = _bus(terms=(), length_m=50.0, bit_rate_bps=9600)
    placement = _by_rule(check_termination(bus), "termination.placement")
    assert {f.verdict for f in placement} == {Verdict.HOLDS}


# --- RC terminators -----------------------------------------------------------------------------------------


def _rc_bus(capacitance_f, length_m=100.0, bit_rate_bps=9600):
    terms = (
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": length_m, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": capacitance_f},
    )
    return _bus(terms=terms, length_m=length_m, bit_rate_bps=bit_rate_bps)


def test_rc_time_constant_against_round_trip_and_bit():
    # 100 m at VF 0.78: round trip 855 ns (common practice: 2 L / (VF c0)).
    round_trip = 2 * 100.0 / (0.78 * SPEED_OF_LIGHT_M_PER_S)
    good = check_ac_termination(_rc_bus(100e-9))  # RC 12 us: > 3 round trips, 3 RC = 36 us < 104 us bit
    assert [f.verdict for f in good] == [Verdict.HOLDS] * 3
    assert good[1].limit == pytest.approx(round_trip, rel=1e-12)
    short = check_ac_termination(_rc_bus(4.7e-9))  # RC 564 ns < round trip
    assert short[1].verdict is Verdict.BREAKS and "Use a capacitor from" in short[1].fix
    long = check_ac_termination(_rc_bus(1e-6))  # RC 120 us > a 104 us bit
    assert long[2].verdict is Verdict.TIGHT


def test_rc_with_no_fitting_capacitor_advises_a_parallel_terminator():
    findings = check_ac_termination(_rc_bus(1e-9, length_m=1000.0, bit_rate_bps=115_200))
    assert findings[1].verdict is Verdict.BREAKS
    assert "use a parallel terminator" in findings[1].fix


def test_rc_terminators_do_not_get_a_value_finding_of_their_own():
    values = _by_rule(check_termination(_rc_bus(100e-9)), "termination.value")
    assert [f.title for f in values] == ["Reflection at the driver's end (0 m) with its 120 Ω terminator"]


def test_cable_ends_are_named_from_the_driver():
    from pairline.engine.rules.cable_ends import end_name

    at_end = _bus()
    assert end_name(at_end, 0.0) == "the driver's end (0 m)" and end_name(at_end, 1000.0) == "the far end (1000 m)"
    mid = _bus(driver_at_m=500.0)
    assert end_name(mid, 0.0) == "the 0 m end" and end_name(mid, 1000.0) == "the 1000 m end"


def test_present_terminator_reports_its_distance_from_the_end():
    bus = _bus(terms=((0.0, 120.0), (999.5, 120.0)))
    far = [f for f in _by_rule(check_termination(bus), "termination.placement") if "far end" in f.title][0]
    assert far.title == "Terminator at the far end (1000 m): distance from the end"
    assert (far.value, far.limit, far.unit) == (pytest.approx(0.5), 1.0, "m")
