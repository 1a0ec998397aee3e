"""A plan of segments joined by repeaters: every segment checks as the same segment laid out alone, and the plan
adds the end-to-end delay and the ground domains."""

import copy

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pairline.engine.bus import build_bus
from pairline.engine.check import check_plan
from pairline.engine.network import advised_plan, check_network, network_to_dict
from pairline.engine.plan import load_plan
from pairline.engine.rules.length_rate import check_length_vs_rate
from pairline.engine.rules.loads import check_unit_loads
from pairline.engine.segments import plan_parts

from tests.engine.topology_plans import two_segments

C0_M_PER_S = 299_792_458.0  # exact, SI definition of the metre


def _key(findings):
    return [(f.rule_id, f.node, f.verdict, f.value, f.limit) for f in findings]


# --- every segment is the stand-alone bus it is --------------------------------------------------------------

DEVICES = ["slew-2500ns", "edge-100ns", "failsafe-eighth-slew", "isolated-eighth-slew"]


@st.composite
def segmented_plans(draw):
    """A random plan of 2 or 3 segments (a chain or a fork from the master's), some with a spur, and, written by
    hand from the same numbers, each segment as a plan of its own (format 2, or 3 when it has a spur): its driver
    (the master, or the repeater's downstream port), its nodes (ground offsets restated against its driver) and a
    node for each repeater it feeds."""
    n_seg = draw(st.integers(2, 3))
    names = ["main", "east", "west"][:n_seg]
    lengths = [draw(st.sampled_from([60.0, 150.0, 400.0])) for _ in names]
    earth = {"main": 0.0}
    nodes: dict[str, list[dict]] = {}
    for s, name in enumerate(names):
        count = draw(st.integers(1, 3))
        offset = 0.0 if s == 0 else draw(st.sampled_from([0.0, 2.0, 9.0]))
        earth[name] = offset
        nodes[name] = [
            {
                "name": f"{name}-{k}",
                "position_m": lengths[s] * (k + 1) / count,
                "stub_length_m": draw(st.sampled_from([0.0, 0.5, 3.0])),
                "device": draw(st.sampled_from(DEVICES)),
                "may_drive": draw(st.booleans()),
                "ground_offset_v": offset,
            }
            for k in range(count)
        ]
    branches: dict[str, list[dict]] = {name: [] for name in names}
    for s, name in enumerate(names):  # some segments carry a spur with a node at its end
        if draw(st.booleans()):
            spur_m = draw(st.sampled_from([4.0, 25.0]))
            branches[name] = [{"name": f"{name}-spur", "junction_position_m": lengths[s] / 2, "length_m": spur_m}]
            nodes[name].append(
                {
                    "name": f"{name}-far",
                    "branch": f"{name}-spur",
                    "position_m": spur_m,
                    "stub_length_m": 0.5,
                    "device": draw(st.sampled_from(DEVICES)),
                    "may_drive": draw(st.booleans()),
                    "ground_offset_v": earth[name],
                }
            )
    fork = n_seg == 3 and draw(st.booleans())
    repeaters = []
    for s in range(1, n_seg):
        upstream = "main" if fork or s == 1 else names[s - 1]
        device = draw(st.sampled_from(["isolated-eighth-slew", "slew-2500ns", "edge-100ns"]))
        isolated = device == "isolated-eighth-slew"
        repeaters.append(
            {
                "name": f"rep-{s}",
                "upstream_segment": upstream,
                "upstream_position_m": lengths[names.index(upstream)] * draw(st.sampled_from([0.5, 1.0])),
                "upstream_stub_m": draw(st.sampled_from([0.0, 0.3])),
                "downstream_segment": names[s],
                "downstream_position_m": 0.0,
                "device": device,
                "ground_offset_v": earth[upstream],
                **({"downstream_ground_offset_v": earth[names[s]]} if isolated else {}),
            }
        )
    terminated = draw(st.booleans())
    bias = draw(st.sampled_from([[], [{"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0}]]))

    def ends(length):
        return [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": length, "resistance_ohm": 120.0}]

    head = {
        "format": "pairline-bus-plan",
        "title": "Random segments",
        "standard": "rs485",
        "bit_rate_bps": draw(st.sampled_from([9600.0, 115200.0])),
        "default_device": "slew-2500ns",
    }
    doc = head | {
        "format_version": 3,
        "trunk_length_m": lengths[0],
        "driver": {"name": "master", "position_m": 0.0},
        "nodes": nodes["main"],
        "branches": branches["main"],
        "terminations": ends(lengths[0]) if terminated else [],
        "bias": bias,
        "segments": [
            {
                "name": name,
                "trunk_length_m": lengths[s],
                "nodes": nodes[name],
                "branches": branches[name],
                "terminations": ends(lengths[s]) if terminated else [],
                "bias": bias,
            }
            for s, name in enumerate(names)
            if s > 0
        ],
        "repeaters": repeaters,
    }
    alone = {}
    for s, name in enumerate(names):
        feeder = next((r for r in repeaters if r["downstream_segment"] == name), None)
        reference = 0.0 if feeder is None else feeder.get("downstream_ground_offset_v", feeder["ground_offset_v"])

        def port(r, position, stub):
            # a port stands on its own side's ground: not isolated within its segment
            isolated = r["device"] == "isolated-eighth-slew"
            return {"class_key": r["device"], "isolated": False} if isolated else r["device"], position, stub

        own = [n | {"ground_offset_v": n["ground_offset_v"] - reference} for n in nodes[name]]
        ports = []
        for r in repeaters:
            if r["upstream_segment"] == name:
                device, position, stub = port(r, r["upstream_position_m"], r["upstream_stub_m"])
                ports.append(
                    {
                        "name": r["name"],
                        "position_m": position,
                        "stub_length_m": stub,
                        "device": device,
                        "may_drive": True,
                        "ground_offset_v": r["ground_offset_v"] - reference,
                    }
                )
        if feeder is None:
            driver = {"name": "master", "position_m": 0.0}
        else:
            device, position, stub = port(feeder, feeder["downstream_position_m"], 0.0)
            driver = {"name": feeder["name"], "position_m": position, "stub_length_m": stub, "device": device}
        alone[name] = head | {
            "format_version": 3 if branches[name] else 2,
            **({"branches": branches[name]} if branches[name] else {}),
            "title": f"Random segments (segment {name})",
            "trunk_length_m": lengths[s],
            "driver": driver,
            "nodes": own + ports,
            "terminations": ends(lengths[s]) if terminated else [],
            "bias": bias,
        }
    return doc, alone


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(segmented_plans())
def test_each_segment_checks_as_the_same_segment_laid_out_alone(case):
    doc, alone = case
    report = check_network(doc, simulate_advice=False)
    assert [p.part.name for p in report.parts][0] == "main" and len(report.parts) == len(alone)
    for part in report.parts:
        # Source: the segment's own stand-alone plan, written by hand above and checked by the same rules.
        own = check_plan(alone[part.part.name], simulate_advice=False)
        assert _key(part.report.findings) == _key(own.findings)
        assert part.report.verdict is own.verdict


# --- what the plan adds --------------------------------------------------------------------------------------


def test_round_trip_to_the_farthest_node_by_hand():
    report = check_network(two_segments(), simulate_advice=False)
    delay = next(f for f in report.findings if f.rule_id == "network.delay")
    # Source: definition of velocity factor, t = L / (VF c0); VF 0.78 of the 24 AWG 120 ohm class (its library
    # figure); 300 m to the repeater, its 400 ns, then 400 m and the 1 m stub to 'b2'; a reply comes back the same way.
    one_way_s = 300.0 / (0.78 * C0_M_PER_S) + 400e-9 + 401.0 / (0.78 * C0_M_PER_S)
    assert delay.node == "b2"
    assert delay.value == pytest.approx(2.0 * one_way_s, rel=1e-9)
    # common practice: without a response budget the round trip is held against one bit (19 200 bit/s)
    assert delay.limit == pytest.approx(1.0 / 19200.0, rel=1e-12) and delay.verdict.value == "holds"


def test_a_response_budget_shorter_than_the_round_trip_breaks():
    report = check_network(two_segments(response_budget_s=5e-6), simulate_advice=False)
    delay = next(f for f in report.findings if f.rule_id == "network.delay")
    # Source: the hand value above, 2 x (1.283 + 0.400 + 1.715) us = 6.796 us round trip, against a 5 us budget.
    assert delay.value == pytest.approx(6.796e-6, rel=1e-3) and delay.limit == 5e-6
    assert delay.verdict.value == "breaks" and "response budget" in delay.fix
    assert report.verdict.value == "breaks"


def _loads_plan(n_each: int) -> dict:
    """Two segments of n_each 1-UL nodes, no bias: the default class is a full unit load."""
    doc = two_segments(default_device="edge-10ns", bias=[], bit_rate_bps=9600)
    doc["nodes"] = [{"name": f"a{i}", "position_m": 300.0 * (i + 1) / n_each} for i in range(n_each)]
    doc["segments"][0]["nodes"] = [{"name": f"b{i}", "position_m": 400.0 * (i + 1) / n_each} for i in range(n_each)]
    doc["segments"][0]["bias"] = []
    return doc


def test_each_segment_has_its_own_32_unit_loads():
    parts = plan_parts(load_plan(_loads_plan(20)))
    budget = [check_unit_loads(build_bus(p.plan))[0] for p in parts]
    # Source: TIA-485-A, 32 unit loads per driver; B&B Electronics RS-422/485 application note: each side of a
    # repeater is a new segment with its own 32 UL. By hand: master's receiver 1 + 20 nodes + the repeater's port 1
    # = 22 UL; the repeater's own receiver 1 + 20 nodes = 21 UL.
    assert [f.value for f in budget] == pytest.approx([22.0, 21.0], abs=1e-9)
    assert all(f.limit == 32.0 and f.verdict.value == "holds" for f in budget)
    one_bus = _loads_plan(20)
    one_bus["nodes"] += one_bus["segments"][0]["nodes"]
    for node in one_bus["nodes"][20:]:
        node["position_m"] = 300.0
    one_bus.update(segments=[], repeaters=[])
    # Source: TIA-485-A: the same 40 nodes and the master's receiver on one driver are 41 UL, over 32.
    single = check_unit_loads(build_bus(load_plan(one_bus)))[0]
    assert single.value == pytest.approx(41.0) and single.verdict.value == "breaks"


def test_each_segment_has_its_own_1200_m():
    doc = two_segments(bit_rate_bps=9600, trunk_length_m=1000.0, terminations=[], bias=[])
    doc["repeaters"][0]["upstream_position_m"] = 1000.0
    doc["segments"][0].update(trunk_length_m=1000.0, terminations=[], bias=[])
    doc["segments"][0]["nodes"][1]["position_m"] = 1000.0
    loss = [
        next(f for f in check_length_vs_rate(build_bus(p.plan)) if f.rule_id == "length.loss")
        for p in plan_parts(load_plan(doc))
    ]
    # Source: TIA/EIA-422-B Annex A, 1200 m (4000 ft) below 90 kbit/s on 24 AWG; B&B Electronics application note:
    # a repeater restarts the length budget. Each 1000 m segment (plus its stubs) is inside.
    assert [f.limit for f in loss] == pytest.approx([1200.0, 1200.0], rel=1e-3)
    assert all(f.verdict.value != "breaks" for f in loss)
    one_bus = two_segments(
        bit_rate_bps=9600, trunk_length_m=2000.0, terminations=[], bias=[], segments=[], repeaters=[]
    )
    one_bus["nodes"][1]["position_m"] = 2000.0
    single = next(f for f in check_length_vs_rate(build_bus(load_plan(one_bus))) if f.rule_id == "length.loss")
    # Source: the same 2000 m as one bus is past the 1200 m plateau.
    assert single.verdict.value == "breaks"


def _isolated(offset_v: float, device: str = "isolated-eighth-slew") -> dict:
    doc = two_segments()
    doc["repeaters"][0].update(device=device, downstream_ground_offset_v=offset_v)
    for node in doc["segments"][0]["nodes"]:
        node["ground_offset_v"] = offset_v
    return doc


def test_an_isolated_repeater_starts_a_ground_domain():
    report = check_network(_isolated(11.0), simulate_advice=False)
    domains = [f for f in report.findings if f.rule_id == "network.ground_domain"]
    # common practice (TI SLLA272): an isolated repeater's barrier separates the grounds on its two sides.
    assert [f.value for f in domains] == [1.0, 2.0]
    assert "11 V" in domains[1].detail and "'gate'" in domains[1].detail
    store = next(p for p in report.parts if p.part.name == "store").report
    # Against the repeater's downstream port, the store's nodes sit at 0 V: no common-mode stress there.
    assert all(f.verdict.value == "holds" for f in store.findings if f.rule_id == "common_mode.range")
    plain = check_network(two_segments(), simulate_advice=False)
    assert [f.value for f in plain.findings if f.rule_id == "network.ground_domain"] == [1.0, 1.0]


def test_a_repeater_without_isolation_carries_the_offset_into_its_segment():
    doc = two_segments()
    for node in doc["segments"][0]["nodes"]:
        node["ground_offset_v"] = 11.0
    store = next(p for p in check_network(doc, simulate_advice=False).parts if p.part.name == "store").report
    offsets = [f for f in store.findings if f.rule_id == "common_mode.range" and f.node in ("b1", "b2")]
    # Source: Intersil tutorial 'High-Speed RS-485 Transceiver and Applications': 7 V of ground offset fit the
    # -7..+12 V range beside a 2.5 V driver and 2.5 V of noise; 11 V does not.
    assert [f.value for f in offsets] == pytest.approx([11.0, 11.0]) and all(
        f.verdict.value == "breaks" for f in offsets
    )


def test_a_basic_barrier_across_a_hazardous_difference_breaks():
    report = check_network(_isolated(60.0), simulate_advice=False)
    barrier = next(f for f in report.findings if f.rule_id == "repeater.isolation")
    # Source: D. Lohbeck, EDN 2016: above 30 Vrms the insulation between hazardous and touchable circuits must be
    # reinforced.
    assert barrier.value == pytest.approx(60.0) and barrier.limit == 30.0 and barrier.verdict.value == "breaks"
    assert "reinforced" in barrier.fix and "DANGER" in barrier.fix
    reinforced = check_network(_isolated(60.0, "isolated-reinforced-fast"), simulate_advice=False)
    assert next(f for f in reinforced.findings if f.rule_id == "repeater.isolation").verdict.value == "holds"


def test_the_advised_plan_puts_each_segments_terminators_back_in_place():
    doc = two_segments()
    doc["segments"][0]["terminations"] = []
    report = check_network(doc, simulate_advice=False)
    store = next(p for p in report.parts if p.part.name == "store").report
    advised = advised_plan(report)
    assert advised.segments[0].terminations == store.advice.plan.terminations
    assert advised.terminations == report.parts[0].report.advice.plan.terminations
    assert advised.segments[0].nodes == load_plan(doc).segments[0].nodes


def test_the_report_as_json_puts_the_plan_level_verdict_on_top():
    report = check_network(copy.deepcopy(two_segments()), simulate_advice=False)
    data = network_to_dict(report)
    assert data["verdict"] == report.verdict.value and [p["name"] for p in data["parts"]] == ["main", "store"]
    assert data["parts"][1]["feeder"] == "gate" and data["parts"][1]["report"]["plan"]["driver"]["name"] == "gate"
    assert {f["rule_id"] for f in data["findings"]} == {"network.delay", "network.ground_domain"}
    total = sum(data["counts"].values())
    assert total == len(data["findings"]) + sum(len(p["report"]["findings"]) for p in data["parts"])
    assert np.isfinite(data["findings"][0]["value"])
