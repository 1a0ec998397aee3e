"""Branches in plan format 3: a branch leaves its trunk from a point on it and carries its nodes within its
length; anything else is refused naming the field, the value and what is allowed. Older plans mean the same."""

import json
from pathlib import Path

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.fieldmodel import field_setup
from pairline.engine.plan import BusInputError, load_plan, plan_to_dict
from pairline.engine.segments import plan_parts

from tests.engine.topology_plans import four_wire, load_problems, with_spur

SAMPLES = Path(__file__).resolve().parents[2] / "sample_buses"


def test_a_plan_with_branches_round_trips():
    plan = load_plan(with_spur())
    assert [b.name for b in plan.branches] == ["side-room"]
    assert [n.branch for n in plan.nodes] == [None, None, "side-room", "side-room"]
    assert load_plan(plan_to_dict(plan)) == plan


def test_a_plan_that_states_no_branch_has_none():
    for path in sorted(SAMPLES.glob("*.json")):
        doc = json.loads(path.read_text(encoding="utf-8"))
        if "branches" in json.dumps(doc):
            continue
        plan = load_plan(doc)
        assert plan.branches == [] and all(s.branches == [] for s in plan.segments), path.name
        assert all(n.branch is None for n in plan.nodes), path.name


def test_a_branch_from_a_point_past_the_trunk_end():
    doc = with_spur()
    doc["branches"][0]["junction_position_m"] = 320.0
    found = load_problems(doc)["branches.0.junction_position_m"]
    assert found.value == 320.0 and found.allowed == {"min": 0.0, "max": 300.0, "unit": "m"}
    assert "past the trunk end at 300 m" in found.message


def test_a_segment_branch_is_held_to_its_own_trunk():
    doc = with_spur()
    doc["segments"][0]["branches"][0]["junction_position_m"] = 450.0
    found = load_problems(doc)["segments.0.branches.0.junction_position_m"]
    assert found.allowed["max"] == 400.0 and "Segment 1 ('store')" in found.message


def test_a_node_on_a_branch_that_does_not_exist():
    doc = with_spur()
    doc["nodes"][2]["branch"] = "attic"
    found = load_problems(doc)["nodes.2.branch"]
    assert found.value == "attic" and found.allowed == {"choices": [None, "side-room"]}
    assert "'side-room'" in found.message


def test_a_node_names_a_branch_of_another_trunk():
    doc = with_spur()
    doc["nodes"][2]["branch"] = "loft"  # the store segment's branch, not the master's
    assert "nodes.2.branch" in load_problems(doc)


def test_a_node_past_its_branch_end():
    doc = with_spur()
    doc["nodes"][3]["position_m"] = 45.0  # the branch is 40 m
    found = load_problems(doc)["nodes.3.position_m"]
    assert found.allowed == {"min": 0.0, "max": 40.0, "unit": "m"} and "along branch 'side-room'" in found.message


def test_a_branch_node_may_sit_farther_along_than_the_trunk_is_long():
    doc = with_spur(trunk_length_m=300.0)
    doc["branches"][0].update(junction_position_m=290.0, length_m=60.0)
    doc["nodes"][3]["position_m"] = 60.0  # 60 m along the branch; its junction is on the trunk
    assert load_plan(doc).nodes[3].position_m == 60.0


def test_two_branches_of_one_name():
    doc = with_spur()
    doc["branches"].append({"name": "side-room", "junction_position_m": 10.0, "length_m": 5.0})
    assert "unique" in load_problems(doc)["branches.1.name"].allowed["rule"]


def test_a_format_2_node_cannot_name_a_branch():
    v2 = json.loads((SAMPLES / "machine-hall-by-the-book.json").read_text(encoding="utf-8"))
    v2["nodes"][0]["branch"] = "x"
    assert "format 3" in load_problems(v2)["nodes.0.branch"].message


def test_a_four_wire_plan_has_no_branch():
    doc = four_wire(branches=[{"name": "b", "junction_position_m": 50.0, "length_m": 5.0}])
    found = load_problems(doc)["branches"]
    assert found.allowed == {"rule": "no branches on a four-wire plan"}


def test_the_rules_see_a_branch_node_as_its_run_from_the_trunk():
    # Hand layout: s1 is 20 m along a branch leaving at 150 m, with a 0.5 m stub of its own: a node at 150 m
    # whose run from the trunk is 20.5 m.
    bus = build_bus(load_plan(with_spur()))
    s1 = next(n for n in bus.plan.nodes if n.name == "s1")
    assert (s1.position_m, s1.stub_length_m, s1.branch) == (150.0, 20.5, None)
    assert bus.layout.along_m["s1"] == ("side-room", 20.0)


def test_each_segment_carries_its_own_branches():
    parts = {p.name: p.plan for p in plan_parts(load_plan(with_spur()))}
    assert [b.name for b in parts["main"].branches] == ["side-room"]
    assert [b.name for b in parts["store"].branches] == ["loft"]
    assert next(n for n in parts["store"].nodes if n.name == "l1").branch == "loft"


def test_a_scope_capture_is_not_compared_with_a_plan_of_branches():
    doc = with_spur()
    doc.pop("segments"), doc.pop("repeaters")
    with pytest.raises(BusInputError) as err:
        field_setup(load_plan(doc))
    (problem,) = err.value.problems
    assert problem.field == "branches" and problem.value == 1 and "branches" in problem.message


@pytest.mark.parametrize("value", [["side-room"], {"name": "side-room"}, 7])
def test_a_branch_that_is_not_a_name_is_refused_naming_the_field(value):
    # found by the API fuzz: a list where the branch's name belongs once reached the cross-field checks
    doc = with_spur()
    doc["segments"][0]["nodes"][2]["branch"] = value
    found = load_problems(doc)
    assert "segments.0.nodes.2.branch" in found
