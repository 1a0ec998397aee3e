"""Plan format 3: older documents load unchanged and mean the same; segments, repeaters and four-wire pairs that
cannot be modelled are refused naming the field, the value and what is allowed."""

import json
from pathlib import Path

import pytest
from pairline.engine.check import check_plan
from pairline.engine.plan import BusInputError, load_plan, plan_to_dict
from pairline.engine.plan.legacy import BusPlanV2
from pairline.engine.plan.load import with_default_classes

from tests.engine.topology_plans import four_wire, load_problems, two_segments

SAMPLES = Path(__file__).resolve().parents[2] / "sample_buses"


def test_a_format_2_document_opens_as_format_3_of_one_bus():
    v2 = json.loads((SAMPLES / "machine-hall-by-the-book.json").read_text(encoding="utf-8"))
    assert v2["format_version"] == 2
    plan = load_plan(v2)
    doc = plan_to_dict(plan)
    assert doc["format_version"] == 3 and plan.is_one_bus
    assert (doc["segments"], doc["repeaters"], doc["four_wire"]) == ([], [], None)
    # Every field of format 2 reads as format 2's own schema reads it.
    own = BusPlanV2.model_validate(with_default_classes(v2)).model_dump(mode="json")
    assert {k: v for k, v in doc.items() if k in own and k != "format_version"} == {
        k: v for k, v in own.items() if k != "format_version"
    }
    assert load_plan(doc) == plan


def test_a_format_2_document_cannot_use_format_3_fields():
    v2 = json.loads((SAMPLES / "machine-hall-by-the-book.json").read_text(encoding="utf-8"))
    found = load_problems(v2 | {"segments": []})
    assert "'segments' is not a field" in found["segments"].message
    nodes = [dict(v2["nodes"][0], drives_pair="return"), *v2["nodes"][1:]]
    found = load_problems(v2 | {"nodes": nodes})
    assert "format 3" in found["nodes.0.drives_pair"].message


def test_format_versions_are_listed_when_one_is_unknown():
    found = load_problems(two_segments(format_version=4))
    assert found["format_version"].allowed == {"choices": [1, 2, 3]}


def test_a_plan_of_segments_loads_and_is_not_one_bus():
    plan = load_plan(two_segments())
    assert not plan.is_one_bus and [s.name for s in plan.segments] == ["store"]
    assert load_plan(plan_to_dict(plan)) == plan


def test_check_plan_refuses_a_plan_of_several_parts():
    with pytest.raises(BusInputError) as err:
        check_plan(two_segments())
    assert err.value.problems[0].field == "segments"


def test_repeater_on_a_segment_that_does_not_exist():
    doc = two_segments()
    doc["repeaters"][0]["upstream_segment"] = "annex"
    problem = load_problems(doc)["repeaters.0.upstream_segment"]
    assert problem.value == "annex" and problem.allowed == {"choices": ["main", "store"]}
    assert "Repeater 1 ('gate') upstream segment 'annex' is not a segment" in problem.message


def test_repeater_outside_its_segment_names_the_segment_length():
    doc = two_segments()
    doc["repeaters"][0]["downstream_position_m"] = 450.0
    problem = load_problems(doc)["repeaters.0.downstream_position_m"]
    assert problem.value == 450.0 and problem.allowed == {"min": 0.0, "max": 400.0, "unit": "m"}
    assert "segments.0.trunk_length_m" in problem.message and "segment 'store'" in problem.message


def test_a_node_in_two_segments():
    doc = two_segments()
    doc["segments"][0]["nodes"][1]["name"] = "a1"
    problem = load_problems(doc)["segments.0.nodes.1.name"]
    assert problem.value == "a1" and problem.allowed["used_by"] == "nodes.0.name"
    assert "belongs to one segment" in problem.message


def test_two_repeaters_into_one_segment_close_a_loop():
    doc = two_segments()
    doc["repeaters"].append(dict(doc["repeaters"][0], name="gate-2", upstream_position_m=150.0))
    problem = load_problems(doc)["repeaters.1.downstream_segment"]
    assert problem.value == "store" and "loop" in problem.message and "tree" in problem.message


def test_segments_joined_only_to_each_other_are_a_loop():
    doc = two_segments()
    doc["segments"].append({"name": "annex", "trunk_length_m": 50.0, "nodes": [{"name": "c1", "position_m": 50.0}]})
    doc["repeaters"] = [
        dict(doc["repeaters"][0], name="r1", upstream_segment="store", downstream_segment="annex"),
        dict(
            doc["repeaters"][0], name="r2", upstream_segment="annex", downstream_segment="store", upstream_position_m=0
        ),
    ]
    found = load_problems(doc)
    loop = next(p for p in found.values() if "loop" in p.message)
    assert loop.field.startswith("repeaters.") and "'main'" in loop.message


def test_a_segment_no_repeater_drives():
    doc = two_segments(repeaters=[])
    problem = load_problems(doc)["segments.0.name"]
    assert "joined to nothing" in problem.message and problem.allowed == {"rule": "a repeater's downstream_segment"}


def test_a_repeater_cannot_drive_the_masters_segment():
    doc = two_segments()
    doc["repeaters"][0].update(upstream_segment="store", downstream_segment="main", upstream_position_m=0.0)
    problem = load_problems(doc)["repeaters.0.downstream_segment"]
    assert problem.value == "main" and problem.allowed == {"choices": ["store"]}


def test_a_repeater_without_isolation_has_one_ground():
    doc = two_segments()
    doc["repeaters"][0]["downstream_ground_offset_v"] = 11.0
    problem = load_problems(doc)["repeaters.0.downstream_ground_offset_v"]
    assert problem.allowed["choices"] == [None] and "not isolated" in problem.message


def test_segment_rows_are_labelled_with_their_segment():
    doc = two_segments()
    doc["segments"][0]["nodes"][0]["stub_length_m"] = 500.0
    doc["segments"][0]["terminations"][1]["position_m"] = 420.0
    found = load_problems(doc)
    assert found["segments.0.nodes.0.stub_length_m"].label == "Segment 1 ('store') node 1 ('b1') stub length"
    assert found["segments.0.nodes.0.stub_length_m"].allowed["max"] == 100.0
    assert found["segments.0.terminations.1.position_m"].allowed["max"] == 400.0


def test_a_four_wire_plan_without_a_master():
    doc = four_wire()
    del doc["four_wire"]["master"]
    problem = load_problems(doc)["four_wire.master"]
    assert problem.value is None and problem.allowed == {"choices": ["master"]}
    assert "needs its master" in problem.message


def test_a_four_wire_master_that_is_a_slave():
    problem = load_problems(four_wire(four_wire={"master": "slave-2"}))["four_wire.master"]
    assert problem.value == "slave-2" and problem.allowed == {"choices": ["master"]} and "slave" in problem.message


def test_a_slave_on_the_masters_transmit_pair_is_a_crossed_pair():
    doc = four_wire()
    doc["nodes"][2]["drives_pair"] = "transmit"
    problem = load_problems(doc)["nodes.2.drives_pair"]
    assert problem.value == "transmit" and problem.allowed == {"choices": ["return"]}
    assert "crossed pair" in problem.message and "'master'" in problem.message


def test_a_two_wire_plan_states_no_pair():
    doc = two_segments()
    doc["nodes"][0]["drives_pair"] = "return"
    assert "two-wire plan" in load_problems(doc)["nodes.0.drives_pair"].message


def test_four_wire_is_one_segment():
    doc = four_wire(segments=two_segments()["segments"], repeaters=two_segments()["repeaters"])
    assert "one segment" in load_problems(doc)["four_wire"].message


def test_rs422_slaves_may_reply_on_a_four_wire_return_pair():
    plan = load_plan(four_wire("rs422"))
    assert plan.standard == "rs422" and all(n.may_drive for n in plan.nodes)
