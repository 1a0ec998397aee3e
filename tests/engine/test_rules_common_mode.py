"""Rule "common_mode.range": ground offset + driver common mode + noise vs the standard's range."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.common_mode import (
    NOISE_ALLOWANCE_V,
    RANGES_V,
    SERIES_GROUND_OHM,
    allowed_offset_v,
    check_common_mode,
    common_mode_extremes_v,
)


def _findings(offsets, standard="rs485", roles=None):
    roles = roles or ["receiver"] * len(offsets)
    doc = {
        "standard": standard,
        "bit_rate_bps": 9600,
        "trunk_length_m": 500.0,
        "nodes": [
            {"name": f"n{i}", "position_m": 100.0 * (i + 1), "ground_offset_v": v, "role": r}
            for i, (v, r) in enumerate(zip(offsets, roles, strict=True))
        ],
    }
    return {f.node: f for f in check_common_mode(build_bus(load_plan(doc)))}


def test_rs485_budget_reaches_plus_12_and_minus_7_v():
    # Source: Intersil tutorial "High-Speed RS-485 Transceiver and Applications": V_OC 2.5 V + ground offset
    # +/-7 V + noise +/-2.5 V -> +12 V / -7 V, the TIA/EIA-485-A common-mode range.
    assert common_mode_extremes_v(2.5, -7.0, 2.5)[1] == pytest.approx(12.0, abs=1e-12)
    assert common_mode_extremes_v(2.5, 7.0, 2.5)[0] == pytest.approx(-7.0, abs=1e-12)
    assert NOISE_ALLOWANCE_V == pytest.approx(2.5)


def test_standard_ranges():
    # Source: TIA/EIA-485-A receiver common-mode range -7 .. +12 V; TIA/EIA-422-B +/-7 V.
    assert RANGES_V["rs485"] == (-7.0, 12.0)
    assert RANGES_V["rs422"] == (-7.0, 7.0)


def test_allowed_offset_is_7_v_either_way_on_rs485():
    # Source: Intersil tutorial budget above: 7 V of ground offset each way with a 2.5 V driver.
    assert allowed_offset_v("rs485", 2.5) == pytest.approx((-7.0, 7.0), abs=1e-12)


def test_rs422_allows_less_when_the_node_ground_is_low():
    # common practice: TIA/EIA-422-B +/-7 V with V_OC 2.5 V and 2.5 V noise: 2.5 + 2.5 + x <= 7 -> x <= 2 V.
    assert allowed_offset_v("rs422", 2.5) == pytest.approx((-2.0, 7.0), abs=1e-12)


def test_verdicts_and_fixes_by_offset():
    # Source: Intersil budget (7 V allowed); TI SLLA272 grounding: signal-ground wire with 100 Ohm at each node,
    # or galvanic isolation for larger offsets.
    found = _findings([1.0, 6.9, -7.5])
    assert found["n0"].verdict is Verdict.HOLDS and found["n0"].fix == ""
    assert found["n1"].verdict is Verdict.TIGHT
    assert f"{SERIES_GROUND_OHM:g} Ω" in found["n1"].fix
    assert found["n2"].verdict is Verdict.BREAKS
    assert found["n2"].value == pytest.approx(7.5) and found["n2"].limit == pytest.approx(7.0)
    assert "galvanically" in found["n2"].fix
    for f in (found["n1"], found["n2"]):
        assert "local electrical codes" in f.fix and "surge" in f.fix


def test_transceivers_are_checked_against_each_other():
    # common practice: the offset that matters is between the talking and the listening node's grounds;
    # +4 V and -4 V each hold against the driver (7 V allowed) but differ by 8 V from each other.
    found = _findings([4.0, -4.0], roles=["transceiver", "transceiver"])
    assert found["n0"].verdict is Verdict.BREAKS and found["n0"].value == pytest.approx(8.0)
    assert "'n1'" in found["n0"].detail


def test_rs422_negative_offset_breaks_early():
    # common practice: from the TIA/EIA-422-B +/-7 V range, a node 3 V below the driver's ground sees
    # 2.5 + 3 + 2.5 = 8 V > 7 V.
    assert _findings([-3.0], standard="rs422")["n0"].verdict is Verdict.BREAKS


def test_small_breaking_offset_may_use_extended_common_mode_transceivers():
    # Source: TIA/EIA-485-A -7..+12 V range with the Intersil tutorial's budget allows 7 V; 12 V breaks.
    # from memory: extended common-mode transceivers cover tens of volts.
    fix = _findings([12.0])["n0"].fix
    assert "extended common-mode" in fix and "DANGER" not in fix


def test_large_offsets_name_an_isolation_class_and_never_extended_common_mode():
    # from memory: transceiver isolation classes 2.5 kVrms (basic) and 5 kVrms (reinforced).
    fix_300 = _findings([300.0])["n0"].fix
    assert "2.5 kVrms" in fix_300 and "extended common-mode" not in fix_300
    fix_800 = _findings([800.0])["n0"].fix
    assert "5 kVrms" in fix_800 and "extended common-mode" not in fix_800
    fix_5000 = _findings([5000.0])["n0"].fix
    assert "fibre" in fix_5000 and "extended common-mode" not in fix_5000


def test_offsets_above_50_v_carry_a_danger_sentence():
    # Source: IEC 61140 / IEC 60449 extra-low-voltage band (50 V a.c.); common practice as the line for a shock
    # hazard that needs a licensed electrician.
    found = _findings([60.0])["n0"]
    assert found.fix.startswith("DANGER") and "licensed electrician" in found.fix
    assert "DANGER" in found.detail
    assert "DANGER" not in _findings([40.0])["n0"].fix


def test_tight_band_is_the_driver_common_mode_at_its_supply_tolerance():
    # Source: TIA/EIA-485-A -7..+12 V with the Intersil budget (V_OC 2.5 V, noise 2.5 V) allows 7 V of ground
    # offset; V_OC follows half the driver's supply, 5 % low (common practice) -> 2.375 V, which allows only
    # 6.875 V: 6.8 V holds, 6.9 V is tight, 7.1 V breaks.
    found = _findings([6.8, 6.9, 7.1])
    assert [found[n].verdict for n in ("n0", "n1", "n2")] == [Verdict.HOLDS, Verdict.TIGHT, Verdict.BREAKS]
    assert "well inside" not in found["n1"].fix and "99%" in found["n1"].fix
