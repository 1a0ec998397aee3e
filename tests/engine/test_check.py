"""check_plan runs every rule family, summarises the advised bus and serialises to plain JSON."""

import json
import math

import pytest
from pairline.engine import ENGINE_VERSION
from pairline.engine.check import RULES, check_plan, finding_to_dict, report_to_dict
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import BusInputError, BusPlan, load_plan, plan_to_dict
from pairline.engine.rules.length_rate import max_bit_rate_bps
from pairline.engine.rules.power import rating_to_buy_w
from pairline.engine.rules.stubs import max_bit_rate_for_stubs_bps, max_stub_length_m

RS485 = {
    "standard": "rs485",
    "bit_rate_bps": 115_200,
    "trunk_length_m": 1000.0,
    "driver": {"name": "master", "position_m": 0.0, "transceiver": "edge-100ns"},
    "nodes": [
        {"name": "well-1", "position_m": 250.0, "stub_length_m": 1.0},
        {"name": "well-2", "position_m": 600.0, "stub_length_m": 3.0, "ground_offset_v": 2.0},
        {"name": "tank", "position_m": 1000.0, "role": "transceiver"},
    ],
    "terminations": [
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": 1000.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 4.7e-9},
        {"position_m": 400.0, "resistance_ohm": 120.0},
    ],
    "bias": {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
}
ALL_RULE_IDS = {
    "load.unit_loads",
    "load.driver",
    "stub.length",
    "termination.placement",
    "termination.value",
    "termination.may_omit",
    "termination.rc",
    "signal.dc_level",
    "bias.idle_level",
    "common_mode.range",
    "common_mode.ground_current",
    "common_mode.shield",
    "length.rate_rule",
    "length.loss",
    "power.resistor",
    "signal.integrity",
    "signal.model",
    "signal.tolerance",
    "signal.confirms",
}


def _doc(**changes):
    doc = json.loads(json.dumps(RS485))
    doc.update(changes)
    return doc


def test_rules_cover_the_eleven_families_and_the_simulation():
    assert len(RULES) == 13  # common mode in two modules: the offsets, and the ground and shield wiring
    report = check_plan(RS485)
    assert {f.rule_id for f in report.findings} == ALL_RULE_IDS


def test_overall_verdict_is_the_worst_finding():
    report = check_plan(RS485)
    assert report.verdict is worst([f.verdict for f in report.findings])
    assert report.verdict is Verdict.BREAKS  # mid-bus terminator, 3 m stub
    assert report.engine_version == ENGINE_VERSION


def test_every_finding_is_complete_and_gives_a_fix_when_not_holding():
    for doc in (RS485, _doc(terminations=[], bias=None), _doc(standard="rs422", nodes=RS485["nodes"][:2])):
        for f in check_plan(doc).findings:
            assert f.rule_id and f.title and f.criterion and f.source and f.unit is not None
            assert isinstance(f.verdict, Verdict)
            if f.verdict is not Verdict.HOLDS:
                assert f.fix.strip(), f"{f.rule_id} {f.node} has no fix"


def test_node_findings_name_their_node():
    report = check_plan(RS485)
    stub_nodes = [f.node for f in report.findings if f.rule_id == "stub.length"]
    assert stub_nodes == ["master", "well-1", "well-2", "tank"]
    assert all(f.node is None for f in report.findings if f.rule_id.startswith(("termination.", "load.")))


def test_report_is_plain_json():
    data = report_to_dict(check_plan(RS485))
    text = json.dumps(data, allow_nan=False)
    assert json.loads(text) == data
    assert data["verdict"] in {"holds", "tight", "breaks"}
    assert {f["verdict"] for f in data["findings"]} <= {"holds", "tight", "breaks"}
    assert data["plan"]["nodes"][0]["name"] == "well-1"
    assert sum(data["counts"].values()) == len(data["findings"])


def test_end_loaded_below_z0_serialises_and_moves_the_bias_off_the_end():
    # common practice: a 50 + 50 Ohm bias at the 0 m end already loads the 120 Ohm line below Z0, so no terminator
    # value can match that end; the advice takes the bias off the end, and its own check holds the end.
    report = check_plan(_doc(bias={"position_m": 0.0, "pull_up_ohm": 50.0, "pull_down_ohm": 50.0}))
    data = report_to_dict(report)
    json.dumps(data, allow_nan=False)
    at_zero = [f for f in data["findings"] if f["rule_id"] == "termination.value" and "(0 m)" in f["title"]]
    assert at_zero[0]["verdict"] == "breaks"
    assert "move the bias network from 0 m" in at_zero[0]["fix"]
    advised = [f for f in report.advice.findings if f.rule_id == "termination.value" and "(0 m)" in f.title]
    assert [f.verdict for f in advised] == [Verdict.HOLDS]


def test_infinite_and_nan_numbers_serialise_as_null():
    finding = Finding("load.driver", "Load on the driver", Verdict.HOLDS, math.inf, math.nan, "Ω", None, "c", "s")
    data = finding_to_dict(finding)
    assert data["value"] is None and data["limit"] is None
    json.dumps(data, allow_nan=False)


def test_summary_advises_terminators_at_both_ends_with_ratings():
    report = check_plan(RS485)
    summary = report.summary
    assert sorted(t.position_m for t in summary.terminators) == [0.0, 1000.0]
    # RC at 1000 m cannot suit both a 1000 m round trip and a 115.2 kbit/s bit: the advice is a plain resistor.
    assert [t.kind for t in summary.terminators] == ["parallel", "parallel"]
    # Source: TI SLLA272, R_T = Z0 = 120 Ohm for the 120 Ohm cable: with the bias moved to mid-trunk nothing else
    # is lumped at either end, so both ends take 120 Ohm.
    assert [t.resistance_ohm for t in summary.terminators] == [120.0, 120.0]
    (bias,) = report.advice.plan.bias
    assert 0.0 < bias.position_m < 1000.0
    for t in summary.terminators:
        # common practice: P = V^2 / R with the 4 V open-circuit driver, the resistor 5 % low on a supply 5 % high
        # (16 / 114 x 1.1025 = 0.155 W), bought at twice that: 1/2 W.
        assert t.power_rating_w == rating_to_buy_w(4.0**2 * 1.05**2 / (0.95 * t.resistance_ohm)) == 0.5


def test_summary_rs422_advice_is_the_far_end_only():
    doc = _doc(
        standard="rs422",
        cable={"class_key": "tia422-reference"},
        nodes=[{"name": "panel", "position_m": 1000.0}],
        terminations=[],
        bias=None,
    )
    summary = check_plan(doc).summary
    # Source: National Semiconductor AN-903, single driver at one end: terminate the far end, 100 Ohm cable.
    assert [(t.position_m, t.resistance_ohm) for t in summary.terminators] == [(1000.0, 100.0)]
    assert summary.bias == ()


def test_summary_bias_holds_the_idle_bus_above_threshold():
    (bias,) = check_plan(RS485).summary.bias
    assert bias.pull_up_ohm == bias.pull_down_ohm
    # Source: TI SLLA272 / B&B note arithmetic R_B,max = (R_eq/2)(V_S/V_min - 1) = 720 Ohm for 60 Ohm, 5 V, 200 mV.
    assert bias.pull_up_ohm <= 720.0
    # Source: TIA-485-A receiver threshold 200 mV, held even at the worst corner of the tolerances.
    assert bias.idle_v >= bias.idle_corner_v >= 0.200
    # common practice: V_S^2 / R at the corner (resistor 5 % low, supply 5 % high), bought at twice that.
    assert bias.power_rating_w == rating_to_buy_w(5.0**2 * 1.05**2 / (0.95 * bias.pull_up_ohm))


def test_summary_limits_and_budget():
    report = check_plan(RS485)
    s = report.summary
    assert set(s.max_stub_m) == {"master", "well-1", "well-2", "tank"}
    # Source: TI SLLA272 stub table, 100 ns at VF 0.78 -> 2.34 m.
    assert s.max_stub_m["well-2"] == pytest.approx(2.34, abs=0.005)
    assert s.max_stub_m["tank"] == max_stub_length_m(100e-9, 0.78)
    assert s.max_bit_rate_bps == min(max_bit_rate_bps(report.bus), max_bit_rate_for_stubs_bps(report.bus))
    assert s.further_nodes["1/8 UL"] == int(s.spare_unit_loads / 0.125 + 1e-9)
    assert set(s.further_nodes) == {"1 UL", "1/2 UL", "1/4 UL", "1/8 UL"}


def test_bill_of_materials_lists_terminators_bias_cable_and_transceivers():
    bom = check_plan(RS485).summary.bom
    terminators = [b for b in bom if b.item.startswith("Terminator resistor")]
    assert sum(b.quantity for b in terminators) == 2 and {b.value for b in terminators} == {"120 Ω"}
    assert sum(1 for b in bom if b.item.startswith("Bias")) == 2
    # common practice: trunk 1000 m + stubs (1 + 3 m) = 1004 m, ordered with 10 % spare and rounded up: 1105 m.
    cable = next(b for b in bom if b.item.startswith("Cable"))
    assert cable.value == "1105 m" and "10%" in cable.note and "24 AWG" in cable.item
    # One driver; the nodes counted per device: two 1 UL receivers and one 1 UL node that may drive.
    counts = {(b.item.split(":")[0], b.value.split(",")[0]): b.quantity for b in bom if ":" in b.item}
    assert counts == {
        ("Driver transceiver", "0.25 UL"): 1,
        ("Receiver", "1 UL"): 2,
        ("Transceiver (may drive)", "1 UL"): 1,
        ("Cable", "1105 m"): 1,
    }
    assert all(b.rating for b in bom)


def test_cable_allowance_of_a_round_length_is_not_rounded_up_past_it():
    # common practice: 100 m drawn with 10 % spare is 110 m to order (110.00000000000001 in floating point).
    doc = RS485 | {"trunk_length_m": 100.0, "nodes": [{"name": "end", "position_m": 100.0}], "terminations": []}
    doc["driver"] = doc["driver"] | {"stub_length_m": 0.0}
    cable = next(b for b in check_plan(load_plan(doc)).summary.bom if b.item.startswith("Cable"))
    assert cable.value == "110 m"


def test_short_unterminated_line_gets_no_terminator_advice():
    doc = _doc(trunk_length_m=40.0, bit_rate_bps=9600, terminations=[], nodes=[{"name": "a", "position_m": 40.0}])
    assert check_plan(doc).summary.terminators == ()


def test_bad_document_raises_with_field_path():
    with pytest.raises(BusInputError) as err:
        check_plan(_doc(trunk_length_m=-1.0))
    assert "trunk_length_m" in {p.field for p in err.value.problems}


def test_plan_built_without_cross_field_checks_is_refused():
    doc = plan_to_dict(load_plan(RS485)) | {"nodes": [{"name": "beyond", "position_m": 1500.0}]}
    plan = BusPlan.model_validate(doc)
    with pytest.raises(BusInputError) as err:
        check_plan(plan)
    assert err.value.problems[0].field == "nodes.0.position_m"


def test_validated_plan_and_dict_give_the_same_report():
    assert check_plan(load_plan(RS485)).findings == check_plan(RS485).findings


def _full_bus_doc(unit_loads_each: float = 1.0) -> dict:
    # 31 nodes + the driver's own receiver = 32 receivers over 1000 m, both ends 120 Ohm.
    return {
        "standard": "rs485",
        "bit_rate_bps": 9600,
        "trunk_length_m": 1000.0,
        "driver": {"name": "head", "position_m": 0.0, "transceiver": "slew-2500ns"},
        "nodes": [
            {"name": f"n{i}", "position_m": 1000.0 * (i + 1) / 31, "unit_loads": unit_loads_each} for i in range(31)
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 1000.0, "resistance_ohm": 120.0}],
    }


def test_summary_advises_no_bias_when_no_pair_fits_the_unit_load_budget():
    # Source: TIA-485-A (32 UL per driver; 54 Ohm design load) and TI SLLA272 (bias networks consume unit
    # loads): with 32 UL already on the pair any bias pair strong enough for 200 mV over 60 Ohm breaks a budget.
    report = check_plan(_full_bus_doc())
    bias_finding = next(f for f in report.findings if f.rule_id == "bias.idle_level")
    # 31 x 1 UL + the driver's 1/8 UL leave 0.875 UL: each resistor >= 12 kOhm / 0.875 = 13.7 kOhm (TI SLLA272).
    assert "No pull-up / pull-down pair" in bias_finding.fix and "at least 13714 Ω" in bias_finding.fix
    assert report.summary.bias == ()
    assert "idle-bus failsafe receivers" in report.summary.bias_note
    assert not any("Bias" in item.item for item in report.summary.bom)
    assert report_to_dict(report)["summary"]["bias_note"] == report.summary.bias_note


def test_summary_bias_never_breaks_the_load_rules_it_is_checked_by():
    # Source: TIA-485-A (32 UL, 54 Ohm): the advised bus, bias included, must not break the loading rules.
    from pairline.engine.bus import build_bus
    from pairline.engine.rules.loads import check_driver_load, check_unit_loads

    for ul in (1.0, 0.5, 0.25, 0.125):
        report = check_plan(_full_bus_doc(ul))
        if not report.summary.bias:
            continue
        (b,) = report.summary.bias
        advised = plan_to_dict(report.plan)
        advised["bias"] = [{"position_m": b.position_m, "pull_up_ohm": b.pull_up_ohm, "pull_down_ohm": b.pull_down_ohm}]
        bus = build_bus(load_plan(advised))
        for f in check_unit_loads(bus) + check_driver_load(bus):
            assert f.verdict is not Verdict.BREAKS, (ul, f.rule_id, f.value)


def test_summary_and_placement_agree_on_an_rs422_end_that_needs_no_terminator():
    # Source: National Semiconductor AN-903 (RS-422 driver mid-bus: both ends are candidates); B&B RS-422/485
    # application note (three round trips before mid-bit: the line may stay unterminated at 9600 bit/s).
    doc = {
        "standard": "rs422",
        "bit_rate_bps": 9600,
        "trunk_length_m": 400.0,
        "driver": {"name": "head", "position_m": 200.0, "transceiver": "edge-100ns"},
        "nodes": [{"name": "a", "position_m": 0.0}, {"name": "b", "position_m": 400.0}],
        "terminations": [{"position_m": 400.0, "resistance_ohm": 120.0}],
    }
    report = check_plan(doc)
    open_end = [f for f in report.findings if f.rule_id == "termination.placement" and "at the 0 m end" in f.title]
    assert [f.verdict for f in open_end] == [Verdict.HOLDS]
    assert [t.position_m for t in report.summary.terminators] == [400.0]


def test_bom_notes_say_where_the_advice_changes_the_plan():
    # common practice: a 100 Ohm terminator on a 120 Ohm pair reflects (100 - 120)/(100 + 120) = -0.09 nominal and
    # -0.16 with 5 % parts and 10 % cable tolerance, beyond the 1/7 limit; the advice changes it and says so.
    doc = _doc(
        bit_rate_bps=115_200,
        terminations=[{"position_m": 0.0, "resistance_ohm": 100.0}, {"position_m": 1000.0, "resistance_ohm": 120.0}],
    )
    report = check_plan(doc)
    notes = [item.note for item in report.summary.bom if "Terminator resistor" in item.item]
    changed = [n for n in notes if "from 100 Ω to" in n and "termination.value" in n]
    assert changed, notes


def test_limit_kind_says_which_side_of_the_limit_holds():
    # Source: TIA-485-A: the driver must drive a load of at least 54 Ohm (a minimum); receiver threshold
    # 200 mV is a minimum level; the 32 UL budget is a maximum.
    from pairline.engine.findings import LIMIT_KINDS

    report = check_plan(RS485)
    assert all(f.limit_kind in LIMIT_KINDS for f in report.findings)
    kinds = {f.rule_id: f.limit_kind for f in report.findings if f.node is None}
    assert kinds["load.driver"] == "min"
    assert kinds["bias.idle_level"] == "min"
    assert kinds["load.unit_loads"] == "max"
    assert all(f.limit_kind == "min" for f in report.findings if f.rule_id == "signal.dc_level" and f.node)
    rc_tau = [f for f in report.findings if f.rule_id == "termination.rc" and "time constant" in f.title]
    assert rc_tau and all(f.limit_kind == "min" for f in rc_tau)
    assert {d["limit_kind"] for d in report_to_dict(report)["findings"]} <= set(LIMIT_KINDS)


def test_length_text_metric_and_imperial():
    # Source: international foot, 0.3048 m exactly: 100 m = 328 ft; 0.23 m = 9.06 in.
    from pairline.engine.units import length_text

    assert length_text(100.0) == "100 m"
    assert length_text(0.45) == "45 cm"
    assert length_text(100.0, "imperial") == "328 ft (100 m)"
    assert length_text(0.23, "imperial") == "9.06 in (23 cm)"


def _slow_edges_doc(stub_m: float) -> dict:
    """Two receivers on 20 m, slew-limited driver class (0.5 to 4 µs edges) pushed to 380 kbit/s."""
    return {
        "bit_rate_bps": 380e3,
        "trunk_length_m": 20.0,
        "driver": {"transceiver": "slew-2500ns"},
        "nodes": [{"name": f"n{i}", "position_m": 10.0 * (i + 1), "stub_length_m": stub_m} for i in range(2)],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 20.0, "resistance_ohm": 120.0}],
        "bias": {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
    }


def test_the_quick_check_keeps_the_full_checks_verdict_with_or_without_the_tolerance_corners():
    # Source: the band convention of every rule (engine.rules.margins): a tolerance corner can only turn a holding
    # receiver tight. At its class's slowest edge (4 µs 10-90 %, a 5 µs ramp, longer than the 2.6 µs bit) a lone
    # bit does not reach its level, so the only problem of this bus is its slow-edge corner: the quick check
    # analyses the corners and is tight as the full check is.
    corner_only = _slow_edges_doc(0.3)
    full, quick = check_plan(corner_only), check_plan(corner_only, simulate_advice=False)
    assert full.verdict is quick.verdict is Verdict.TIGHT
    tight = [f for f in quick.findings if f.verdict is not Verdict.HOLDS]
    assert {f.rule_id for f in tight} == {"signal.integrity"}
    assert all("driver edge 4 µs" in f.fix for f in tight)
    # With 60 m stubs some other rule fails as well; the quick check then leaves the corners out, and its verdict
    # is still the full check's.
    stubbed = _slow_edges_doc(60.0)
    full, quick = check_plan(stubbed), check_plan(stubbed, simulate_advice=False)
    assert any(f.verdict is not Verdict.HOLDS and f.rule_id != "signal.integrity" for f in quick.findings)
    assert full.verdict is quick.verdict
    assert full.simulation.tolerance is not None and quick.simulation.tolerance is None
    note = next(f for f in quick.findings if f.rule_id == "signal.tolerance")
    assert "Not analysed" in note.detail


def test_the_quick_check_leaves_out_the_what_if_without_terminators_and_says_so():
    # The what-if (the bus simulated with its terminators removed) holds whatever it shows on a terminated bus, so
    # the quick check leaves it out; a bus without terminators is judged as laid out, by both checks alike.
    terminated = _slow_edges_doc(0.3)
    full, quick = check_plan(terminated), check_plan(terminated, simulate_advice=False)
    full_note = next(f for f in full.findings if f.rule_id == "signal.confirms" and "Unterminated" in f.title)
    quick_note = next(f for f in quick.findings if f.rule_id == "signal.confirms" and "Unterminated" in f.title)
    assert "with its terminators removed" in full_note.detail
    assert quick_note.verdict is full_note.verdict is Verdict.HOLDS
    assert "not simulated" in quick_note.title and "Not simulated" in quick_note.detail
    assert full.verdict is quick.verdict
    bare = terminated | {"terminations": []}
    full, quick = check_plan(bare), check_plan(bare, simulate_advice=False)
    as_laid_out = [
        next(f for f in r.findings if f.rule_id == "signal.confirms" and "Unterminated" in f.title)
        for r in (full, quick)
    ]
    assert as_laid_out[0] == as_laid_out[1]
    assert "as laid out (no terminators)" in as_laid_out[0].detail
