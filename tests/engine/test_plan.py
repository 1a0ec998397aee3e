"""The bus plan model: valid plans load, bad input is refused with field, value and range, all at once."""

import copy

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.library import TRANSCEIVERS
from pairline.engine.plan import BusInputError, load_plan, plan_to_dict

GOOD = {
    "standard": "rs485",
    "bit_rate_bps": 115_200,
    "trunk_length_m": 300.0,
    "nodes": [{"name": "pump-1", "position_m": 100.0}, {"name": "pump-2", "position_m": 300.0}],
    "terminations": [
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": 300.0, "resistance_ohm": 120.0},
    ],
}


def _problems(doc):
    with pytest.raises(BusInputError) as err:
        load_plan(doc)
    return {p.field: p for p in err.value.problems}


def _with(**changes):
    doc = copy.deepcopy(GOOD)
    doc.update(changes)
    return doc


def test_good_plan_round_trips_through_its_json_document():
    plan = load_plan(GOOD)
    assert load_plan(plan_to_dict(plan)) == plan


def test_library_classes_resolve_to_full_values():
    bus = build_bus(load_plan(GOOD))
    # Source: TI SLLA272 (RS-485 cable Z0 ~ 120 Ohm); ASTM B258 24 AWG 84.2 Ohm/km per conductor.
    assert bus.cable.z0_ohm == 120.0
    assert bus.cable.resistance_ohm_per_m == pytest.approx(0.0842, rel=1e-3)
    assert bus.driver.rise_time_s == pytest.approx(100e-9)


def test_negative_and_non_finite_numbers_are_refused_with_range():
    found = _problems(_with(bit_rate_bps=-5, trunk_length_m=float("nan")))
    assert found["bit_rate_bps"].value == -5
    assert found["bit_rate_bps"].allowed["min"] == 50.0
    assert "Bit rate" in found["bit_rate_bps"].message and "-5" in found["bit_rate_bps"].message
    assert "finite" in found["trunk_length_m"].message


def test_node_past_the_trunk_end_names_both_fields():
    doc = _with(nodes=[{"name": "far", "position_m": 400.0}])
    problem = _problems(doc)["nodes.0.position_m"]
    assert problem.value == 400.0 and problem.allowed["max"] == 300.0
    assert "trunk_length_m" in problem.message


def test_duplicate_names_and_rs422_second_driver_reported_together():
    doc = _with(
        standard="rs422",
        nodes=[{"name": "a", "position_m": 1.0}, {"name": "a", "position_m": 2.0, "role": "transceiver"}],
    )
    found = _problems(doc)
    assert {"nodes.1.name", "nodes.1.role"} <= set(found)


def test_absurd_sizes_are_refused():
    doc = _with(nodes=[{"name": f"n{i}", "position_m": 1.0} for i in range(10_000)])
    assert _problems(doc)["nodes"].allowed["max_length"] == 512
    doc = _with(nodes=[{"name": "a", "position_m": 1.0, "stub_length_m": 1000.0}])
    assert _problems(doc)["nodes.0.stub_length_m"].allowed["max"] == 100.0


def test_field_and_cross_field_problems_come_in_one_list():
    doc = _with(bit_rate_bps="fast", nodes=[{"name": "a", "position_m": 999.0}], cable={"class_key": "nope"})
    assert {"bit_rate_bps", "nodes.0.position_m", "cable.class_key"} <= set(_problems(doc))


def test_custom_cable_needs_its_values():
    found = _problems(_with(cable={"class_key": None, "z0_ohm": 100.0}))
    assert {"cable.velocity_factor", "cable.resistance_ohm_per_m"} <= set(found)


def test_unknown_field_is_refused():
    assert "stubb_length_m" in _problems(_with(stubb_length_m=3))


def test_not_an_object():
    assert _problems([1, 2])[""].message.startswith("A bus plan must be a JSON object")


def test_negative_trunk_is_one_problem_not_a_cascade():
    found = _problems(_with(trunk_length_m=-3.0))
    assert set(found) == {"trunk_length_m"}


# --- format 2: devices, bias networks, grounding ----------------------------------------------------------------

V2 = {
    "format_version": 2,
    "bit_rate_bps": 9600,
    "trunk_length_m": 100.0,
    "nodes": [{"name": "a", "position_m": 10.0}],
}


def _node(**device):
    return {"nodes": [{"name": "a", "position_m": 10.0, "device": device}]}


@pytest.mark.parametrize("device", ["edge-7ns", {"class_key": "edge-7ns"}])
def test_an_unknown_class_is_named_with_the_allowed_ones(device):
    doc = V2 | {"nodes": [{"name": "a", "position_m": 10.0, "device": device}]}
    field = "nodes.0.device" if isinstance(device, str) else "nodes.0.device.class_key"
    p = _problems(doc)[field]
    assert p.value == "edge-7ns" and "edge-100ns" in p.allowed["choices"] and "edge-100ns" in p.message
    p = _problems(V2 | {"default_device": "nope"})["default_device"]
    assert p.allowed["choices"] == sorted(TRANSCEIVERS) and "slew-2500ns" in p.message


def test_a_threshold_window_that_is_not_a_window_is_refused():
    p = _problems(V2 | _node(threshold_low_v=-0.05, threshold_high_v=-0.1))["nodes.0.device.threshold_high_v"]
    assert p.value == -0.1 and p.allowed["threshold_low_v"] == -0.05 and "not a window" in p.message
    # Source: TI E2E FAQ on fail-safe biasing: an idle-bus failsafe reads 0 V as a 1, so its window lies below 0 V.
    p = _problems(V2 | _node(failsafe="idle_bus", threshold_high_v=0.05))["nodes.0.device.threshold_high_v"]
    assert p.allowed["max"] == 0.0 and p.allowed["max_exclusive"]


def test_isolation_needs_its_rating():
    p = _problems(V2 | _node(class_key=None, isolated=True))["nodes.0.device.isolation_rating_vrms"]
    assert p.value is None and p.allowed["unit"] == "Vrms" and "isolated" in p.message
    load_plan(V2 | _node(class_key=None, isolated=True, isolation_rating_vrms=2500.0))


def test_a_node_that_may_drive_on_rs422_is_refused():
    doc = V2 | {"standard": "rs422", "nodes": [{"name": "a", "position_m": 10.0, "may_drive": True}]}
    p = _problems(doc)["nodes.0.may_drive"]
    assert p.value is True and p.allowed["choices"] == [False] and "RS-422" in p.message


def test_a_custom_talker_states_its_edge_and_a_driver_its_output_one_way():
    doc = V2 | {"nodes": [{"name": "a", "position_m": 10.0, "may_drive": True, "device": {"class_key": None}}]}
    assert "edge time" in _problems(doc)["nodes.0.device.rise_time_s"].message
    doc = V2 | {"driver": {"device": {"output_54_ohm_v": 2.0, "source_ohm": 10.0}}}
    assert "one way" in _problems(doc)["driver.device.output_54_ohm_v"].message


def test_a_format_1_plan_opens_as_format_3_with_the_same_meaning():
    v1 = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 100.0,
        "driver": {"transceiver": "edge-25ns", "rise_time_s": 40e-9},
        "nodes": [
            {"name": "a", "position_m": 10.0, "role": "transceiver", "unit_loads": 0.125},
            {"name": "b", "position_m": 90.0, "input_capacitance_f": 50e-12},
        ],
        "bias": {"position_m": 0.0, "pull_up_ohm": 680.0, "pull_down_ohm": 680.0},
    }
    plan = load_plan(v1)
    doc = plan_to_dict(plan)
    assert (doc["format_version"], doc["default_device"]) == (3, "edge-25ns")
    assert plan.nodes[0].may_drive and not plan.nodes[1].may_drive and len(plan.bias) == 1
    # Format 1 drove every node that may drive like the driver's class and its values: the node keeps them.
    assert plan.nodes[0].device.rise_time_s == 40e-9 and plan.nodes[0].device.unit_loads == 0.125
    assert plan.nodes[1].device.input_capacitance_f == 50e-12
    assert load_plan(doc) == plan  # the upgraded document is a format-2 plan of its own
