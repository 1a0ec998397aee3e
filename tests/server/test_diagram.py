"""Bus drawing coordinates: positions to scale, stubs ordered by length, parts in non-overlapping lanes."""

import pytest
from pairline.engine.plan import load_plan
from pairline.server.diagram import CHAR_PX, LEFT_PX, RIGHT_PX, WIDTH_PX, assign_lanes, bus_drawing, x_of

PLAN = {
    "bit_rate_bps": 9600,
    "trunk_length_m": 400.0,
    "driver": {"name": "head", "position_m": 0.0},
    "nodes": [
        {"name": "n1", "position_m": 100.0, "stub_length_m": 0.0},
        {"name": "n2", "position_m": 200.0, "stub_length_m": 2.0},
        {"name": "a-very-long-node-name-indeed", "position_m": 400.0, "stub_length_m": 8.0},
    ],
    "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 400.0, "resistance_ohm": 120.0}],
    "bias": {"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0},
}


def test_trunk_positions_are_linear_in_metres():
    drawing = bus_drawing(load_plan(PLAN), {}, "metric")
    xs = [n.x for n in drawing.nodes]
    span = WIDTH_PX - LEFT_PX - RIGHT_PX
    # Source: linear scale by construction: x = left + span * position / length.
    assert xs == pytest.approx([LEFT_PX + span / 4, LEFT_PX + span / 2, LEFT_PX + span], abs=1e-9)
    assert drawing.trunk_x0 == LEFT_PX and drawing.trunk_x1 == WIDTH_PX - RIGHT_PX
    assert x_of(0.0, 400.0) == LEFT_PX


def test_stub_lengths_are_drawn_in_proportion():
    drawing = bus_drawing(load_plan(PLAN), {}, "metric")
    lengths = [n.stub_bottom_y - n.stub_top_y for n in drawing.nodes]
    # Source: a scale drawing: drawn length = stub length x one scale; 0 m, 2 m and 8 m -> 0 : 1 : 4.
    assert lengths[0] == 0.0
    assert lengths[2] / lengths[1] == pytest.approx(4.0, rel=1e-12)
    assert lengths[1] == pytest.approx(2.0 * drawing.stub_px_per_m, rel=1e-12)
    # 8 m stubs on a 400 m trunk would be 16 px on the trunk's scale: they get their own, with a bar.
    assert drawing.stub_px_per_m > drawing.px_per_m and "scale of their own" in drawing.caption
    bar = drawing.stub_bar
    assert bar is not None and bar.label == "5 m" and "5 m of stub" in drawing.caption
    assert bar.y_bottom - bar.y_top == pytest.approx(5.0 * drawing.stub_px_per_m, rel=1e-12)


def test_stubs_share_the_trunk_scale_when_they_show_on_it():
    plan = PLAN | {"trunk_length_m": 400.0}
    plan["nodes"] = [n | {"stub_length_m": 20.0} for n in PLAN["nodes"]]
    drawing = bus_drawing(load_plan(plan), {}, "metric")
    assert drawing.stub_px_per_m == drawing.px_per_m and drawing.stub_bar is None
    # Source: a scale drawing: 20 m at the trunk's 780 px / 400 m.
    assert drawing.nodes[0].stub_bottom_y - drawing.nodes[0].stub_top_y == pytest.approx(39.0, rel=1e-12)


def test_names_of_close_nodes_never_overlap():
    crowded = PLAN | {"nodes": [{"name": f"sensor-{k}", "position_m": 150.0 + 2.0 * k} for k in range(12)]}
    drawing = bus_drawing(load_plan(crowded), {}, "metric")
    shown = sorted((n for n in drawing.nodes if n.show_label), key=lambda n: n.label_x)
    assert len(shown) == 12  # twelve names fit beside each other with leaders
    assert len({n.label_y for n in shown}) == 1  # one baseline: parallel slanted names cannot cross
    gaps = [b.label_x - a.label_x for a, b in zip(shown, shown[1:], strict=False)]
    # 11.5 px text at 45° needs 13.4 px between parallel baselines: 19 px apart along the line.
    assert min(gaps) >= 19.0 - 1e-9
    assert all(abs(n.label_x - n.x) <= 6 * 19.0 + 1e-9 for n in shown)  # a leader joins each to its node


def test_each_node_carries_its_verdict_and_a_shortened_label():
    drawing = bus_drawing(load_plan(PLAN), {"n2": "breaks", "n1": "tight"}, "metric")
    assert [n.verdict for n in drawing.nodes] == ["tight", "breaks", "unchecked"]
    long_one = drawing.nodes[2]
    assert long_one.name == "a-very-long-node-name-indeed" and len(long_one.label) <= 16


def test_parts_at_the_same_place_take_different_lanes():
    drawing = bus_drawing(load_plan(PLAN), {}, "metric")
    at_zero = [drawing.driver.stub_top_y, drawing.terminators[0].y, drawing.bias.y]
    assert len(set(at_zero)) == 3
    lanes = assign_lanes([(0.0, 50.0), (10.0, 50.0), (100.0, 5 * CHAR_PX)])
    assert lanes[0] != lanes[1] and lanes[2] == 0


def test_ruler_ticks_are_in_the_plans_display_unit():
    metric = bus_drawing(load_plan(PLAN), {}, "metric")
    imperial = bus_drawing(load_plan(PLAN | {"display_units": "imperial"}), {}, "imperial")
    assert metric.ticks[-1].label == "400"
    # Source: 400 m = 1312.34 ft (1 ft = 0.3048 m); the ruler stops at the last round tick under it.
    assert float(imperial.ticks[-1].label) <= 1312.34 and float(imperial.ticks[-1].label) >= 1000


def test_caption_states_the_trunk_in_plain_digits():
    # Source: 1 ft = 0.3048 m exactly: 304.8 m = 1000 ft (never "1e+03 ft").
    plan = PLAN | {"display_units": "imperial", "trunk_length_m": 304.8}
    plan["nodes"] = [n | {"position_m": min(n["position_m"], 304.8)} for n in PLAN["nodes"]]
    plan["terminations"] = [
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": 304.8, "resistance_ohm": 120.0},
    ]
    drawing = bus_drawing(load_plan(plan), {}, "imperial")
    assert drawing.caption.startswith("Trunk 1000 ft ")


def test_crowded_labels_are_thinned_but_nodes_that_do_not_hold_keep_theirs():
    crowded = PLAN | {
        "nodes": [{"name": f"p{k}", "position_m": 4.0 * k + 2.0} for k in range(100)],
    }
    verdicts = {"p51": "breaks"}
    drawing = bus_drawing(load_plan(crowded), verdicts, "metric")
    shown = [n for n in drawing.nodes if n.show_label]
    assert len(drawing.nodes) == 100 and 0 < len(shown) < 100
    assert drawing.nodes[51].show_label
    starts = sorted(n.label_x for n in shown)
    assert min(b - a for a, b in zip(starts, starts[1:], strict=False)) >= 19.0 - 1e-9
    assert "left out" in drawing.caption
    # The names kept spread over the whole trunk: the first node keeps its name, and names reach both ends.
    assert drawing.nodes[0].show_label
    assert starts[0] < drawing.trunk_x0 + 50.0 and starts[-1] > drawing.trunk_x1 - 50.0


def test_part_labels_near_the_right_edge_run_leftwards():
    terminations = [
        {"position_m": 0.0, "resistance_ohm": 120.0, "kind": "rc", "capacitance_f": 4.7e-9},
        {"position_m": 400.0, "resistance_ohm": 120.0, "kind": "rc", "capacitance_f": 4.7e-9},
    ]
    drawing = bus_drawing(load_plan(PLAN | {"terminations": terminations}), {}, "metric")
    left, right = drawing.terminators
    assert left.text_anchor == "start" and left.text_x > left.x
    assert right.text_anchor == "end" and right.text_x < right.x


def test_the_driver_label_carries_its_full_name():
    plan = PLAN | {"driver": {"name": "workshop-controller", "position_m": 0.0}}
    drawing = bus_drawing(load_plan(plan), {}, "metric")
    assert drawing.driver.label == "workshop-controller (driver)"
    assert "workshop-controller" in drawing.caption
    assert drawing.driver.x + 10.0 + CHAR_PX * len(drawing.driver.label) <= WIDTH_PX
