"""Invented plans of several segments and four-wire plans for the topology tests (format 3 documents)."""

import copy
from typing import Any

import pytest
from pairline.engine.plan import BusInputError, Problem, load_plan


def two_segments(**changes: Any) -> dict[str, Any]:
    """A 300 m segment with two nodes and a repeater at its far end into a 400 m segment of two nodes."""
    doc: dict[str, Any] = {
        "format": "pairline-bus-plan",
        "format_version": 3,
        "title": "Two segments",
        "standard": "rs485",
        "bit_rate_bps": 19200,
        "trunk_length_m": 300.0,
        "default_device": "slew-2500ns",
        "driver": {"name": "plc", "position_m": 0.0},
        "nodes": [
            {"name": "a1", "position_m": 100.0, "stub_length_m": 0.5},
            {"name": "a2", "position_m": 200.0, "stub_length_m": 0.5},
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 300.0, "resistance_ohm": 120.0}],
        "bias": [{"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0}],
        "segments": [
            {
                "name": "store",
                "trunk_length_m": 400.0,
                "nodes": [
                    {"name": "b1", "position_m": 200.0, "stub_length_m": 1.0},
                    {"name": "b2", "position_m": 400.0, "stub_length_m": 1.0},
                ],
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": 120.0},
                    {"position_m": 400.0, "resistance_ohm": 120.0},
                ],
                "bias": [{"position_m": 0.0, "pull_up_ohm": 470.0, "pull_down_ohm": 470.0}],
            }
        ],
        "repeaters": [
            {
                "name": "gate",
                "upstream_segment": "main",
                "upstream_position_m": 300.0,
                "downstream_segment": "store",
                "downstream_position_m": 0.0,
                "delay_s": 400e-9,
            }
        ],
    }
    doc.update(copy.deepcopy(changes))
    return doc


def four_wire(standard: str = "rs422", **changes: Any) -> dict[str, Any]:
    """A master at 0 m and four slaves along 200 m; the transmit pair terminated at the far end only, the return
    pair at both ends with bias at the master."""
    doc: dict[str, Any] = {
        "format": "pairline-bus-plan",
        "format_version": 3,
        "title": "Four wires",
        "standard": standard,
        "bit_rate_bps": 38400,
        "trunk_length_m": 200.0,
        "default_device": "edge-100ns",
        "driver": {"name": "master", "position_m": 0.0},
        "nodes": [
            {"name": f"slave-{i}", "position_m": 50.0 * i, "stub_length_m": 0.5, "may_drive": True} for i in range(1, 5)
        ],
        "terminations": [{"position_m": 200.0, "resistance_ohm": 120.0}],
        "four_wire": {
            "master": "master",
            "return_terminations": [
                {"position_m": 0.0, "resistance_ohm": 120.0},
                {"position_m": 200.0, "resistance_ohm": 120.0},
            ],
            "return_bias": [{"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0}],
        },
    }
    doc.update(copy.deepcopy(changes))
    return doc


def with_spur(**changes: Any) -> dict[str, Any]:
    """The two-segment plan with a 40 m spur off the master's segment at 150 m (two nodes along it) and a 12 m
    branch off the store segment at 250 m (one node at its end)."""
    doc = two_segments()
    doc["branches"] = [{"name": "side-room", "junction_position_m": 150.0, "length_m": 40.0}]
    doc["nodes"] += [
        {"name": "s1", "branch": "side-room", "position_m": 20.0, "stub_length_m": 0.5},
        {"name": "s2", "branch": "side-room", "position_m": 40.0},
    ]
    doc["segments"][0]["branches"] = [{"name": "loft", "junction_position_m": 250.0, "length_m": 12.0}]
    doc["segments"][0]["nodes"].append({"name": "l1", "branch": "loft", "position_m": 12.0})
    doc.update(copy.deepcopy(changes))
    return doc


def load_problems(doc: dict[str, Any]) -> dict[str, Problem]:
    """The problems load_plan raises for a document, by field."""
    with pytest.raises(BusInputError) as err:
        load_plan(doc)
    return {p.field: p for p in err.value.problems}
