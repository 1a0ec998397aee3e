"""Form fields <-> plan document: names are the plan's dotted paths; rows renumber; units convert."""

import pytest
from pairline.engine.plan import BusInputError, load_plan, plan_to_dict
from pairline.server.forms import form_from_plan, merge_problems, parse_form, spec_for, with_units

PLAN = {
    "title": "Pump gallery",
    "standard": "rs485",
    "bit_rate_bps": 115_200,
    "trunk_length_m": 300.0,
    "display_units": "metric",
    "nodes": [
        {"name": "pump-1", "position_m": 100.0, "stub_length_m": 1.5, "unit_loads": 0.125},
        {"name": "pump-2", "position_m": 300.0, "role": "transceiver", "ground_offset_v": -2.0},
    ],
    "terminations": [
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": 300.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 4.7e-9},
    ],
    "bias": {"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0},
}


def _form(state, **extra):
    fields = dict(state.values)
    fields["shown_units"] = state.units
    fields["display_units"] = state.units
    fields.update(extra)
    return fields


@pytest.mark.parametrize("units", ["metric", "imperial"])
def test_a_plan_survives_the_form_in_either_unit_system(units):
    plan = load_plan(PLAN | {"display_units": units})
    state = form_from_plan(plan_to_dict(plan))
    assert state.units == units
    parsed = parse_form(_form(state))
    assert parsed.problems == []
    again = load_plan(parsed.doc)
    original, back = plan_to_dict(plan), plan_to_dict(again)
    # Source: 1 ft = 0.3048 m exactly; feet shown to six significant digits keep lengths within 1e-6 relative
    # (0.1 mm in 100 m); metres typed in metres come back exactly.
    assert back["nodes"][0]["position_m"] == pytest.approx(original["nodes"][0]["position_m"], rel=1e-6)
    assert back["trunk_length_m"] >= back["terminations"][1]["position_m"]  # equal lengths round alike
    assert back["terminations"][1]["capacitance_f"] == pytest.approx(4.7e-9, rel=1e-12)
    assert back["nodes"][0]["device"]["unit_loads"] == 0.125
    assert back["nodes"][1]["may_drive"] is True
    assert back["bias"][0]["pull_up_ohm"] == 620.0
    lengths = {"nodes": back["nodes"], "terminations": back["terminations"], "trunk_length_m": back["trunk_length_m"]}
    assert back == original | lengths  # the devices, the bias networks and the grounding come back as they were
    assert back["display_units"] == units


def test_the_signal_analysis_settings_survive_the_form():
    analysis = {
        "probes": [
            {"kind": "junction", "position_m": 150.0},
            {"kind": "node", "node": "pump-2"},
            {"kind": "driver_pin"},
        ],
        "probe_signal": "step",
        "sampling_window": {"centre_ui": 0.6, "half_width_ui": 0.1},
        "tolerances": {"z0_tolerance": 0.2, "rise_time_min_s": 2e-9, "monte_carlo_variants": 200, "seed": 7},
    }
    plan = load_plan(PLAN | analysis)
    state = form_from_plan(plan_to_dict(plan))
    assert state.n_probes == 3 and state.values["tolerances.rise_time_min_s"] == "2 ns"
    parsed = parse_form(_form(state))
    assert parsed.problems == []
    back = load_plan(parsed.doc)
    assert (back.probes, back.probe_signal, back.sampling_window) == (plan.probes, "step", plan.sampling_window)
    assert back.tolerances == plan.tolerances


def test_input_names_are_the_plan_paths():
    state = form_from_plan(PLAN)
    assert state.values["nodes.1.name"] == "pump-2"
    assert state.values["terminations.1.capacitance_f"] == "4.7 nF"
    assert state.values["bit_rate_bps"] == "115.2 kbit/s"
    assert spec_for("nodes.1.stub_length_m").kind == "length"
    assert spec_for("cable.z0_ohm").kind == "resistance"
    assert spec_for("nodes.1.nonsense") is None


def test_rows_with_gaps_blank_and_removed_rows_are_renumbered():
    fields = {
        "trunk_length_m": "100",
        "bit_rate_bps": "9600",
        "nodes.0.name": "a",
        "nodes.0.position_m": "10",
        "nodes.2.name": "",  # blank row: dropped
        "nodes.2.may_drive": "false",
        "nodes.2.device.class_key": "",
        "nodes.5.name": "gone",
        "nodes.5.position_m": "20",
        "nodes.5.remove": "1",
        "nodes.9.name": "c",
        "nodes.9.position_m": "30",
    }
    parsed = parse_form(fields)
    assert [n["name"] for n in parsed.doc["nodes"]] == ["a", "c"]
    assert parsed.state.values["nodes.1.name"] == "c"
    # The blank row is kept for the person to fill, after the filled ones so their numbers match the messages.
    assert parsed.state.n_nodes == 3 and "nodes.2.name" not in parsed.state.values


def test_unreadable_text_is_a_problem_on_its_field_and_kept_for_the_form():
    fields = {"trunk_length_m": "long", "bit_rate_bps": "9600", "nodes.0.name": "a", "nodes.0.position_m": "5 parsecs"}
    parsed = parse_form(fields)
    by_field = {p.field: p for p in parsed.problems}
    assert set(by_field) == {"trunk_length_m", "nodes.0.position_m"}
    assert by_field["trunk_length_m"].value == "long"
    assert "long" in by_field["trunk_length_m"].message and "m" in by_field["trunk_length_m"].allowed["unit"]
    assert parsed.state.values["nodes.0.position_m"] == "5 parsecs"
    with pytest.raises(BusInputError) as err:
        load_plan(parsed.doc)
    merged = merge_problems(parsed.problems, err.value.problems)
    assert [p.field for p in merged].count("trunk_length_m") == 1


def test_bias_networks_are_rows_and_blank_rows_are_none():
    assert parse_form({"bias.0.position_m": "", "bias.0.supply_v": ""}).doc["bias"] == []
    fields = {
        f"bias.{i}.{k}": v for i, p in ((0, "0"), (4, "300")) for k, v in (("position_m", p), ("pull_up_ohm", "1k"))
    }
    fields |= {"bias.0.pull_down_ohm": "1k", "bias.4.pull_down_ohm": "2.2k", "bias.4.supply_v": "3.3"}
    bias = parse_form(fields).doc["bias"]
    assert [(b["position_m"], b["pull_up_ohm"], b["pull_down_ohm"]) for b in bias] == [
        (0.0, 1000.0, 1000.0),
        (300.0, 1000.0, 2200.0),
    ]
    assert bias[1]["supply_v"] == 3.3 and "supply_v" not in bias[0]


def test_class_pickers_blank_custom_and_a_class():
    doc = parse_form({"cable.class_key": "", "driver.device.class_key": ""}).doc
    assert doc["cable"]["class_key"] is None and "device" not in doc["driver"]  # the plan's default class
    doc = parse_form({"driver.device.class_key": "custom", "driver.device.rise_time_s": "1 µs"}).doc
    assert doc["driver"]["device"] == {"class_key": None, "rise_time_s": 1e-6}
    doc = parse_form({"driver.device.class_key": "", "driver.device.isolated": "true"}).doc
    assert doc["driver"]["device"] == {"isolated": True}  # values on the plan's default class
    row = {"nodes.0.name": "a", "nodes.0.position_m": "5", "nodes.0.device.class_key": "edge-25ns"}
    node = parse_form(row | {"nodes.0.may_drive": "true", "nodes.0.device.failsafe": "idle_bus"}).doc["nodes"][0]
    assert node["device"] == {"class_key": "edge-25ns", "failsafe": "idle_bus"} and node["may_drive"] is True


def test_switching_units_converts_what_parsed_and_keeps_what_did_not():
    parsed = parse_form({"trunk_length_m": "300", "nodes.0.name": "a", "nodes.0.position_m": "oops"})
    shown = with_units(parsed.state, parsed.doc, "imperial")
    # Source: 1 ft = 0.3048 m exactly -> 300 m = 984.2519685 ft, shown to six significant digits.
    assert shown.values["trunk_length_m"] == "984.252"
    assert shown.values["nodes.0.position_m"] == "oops"
    assert shown.units == "imperial"
