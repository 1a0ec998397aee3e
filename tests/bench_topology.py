"""Whole-plan benchmark (a script, not a test): python tests/bench_topology.py

Times engine.network.check_network, the whole check a saved plan of segments gets (every segment checked as its
own bus with its simulation, tolerance corners and advice, then the plan-level findings), on an invented plan of
three segments joined by two repeaters: 96 receivers in all, each segment with a spur of four of its receivers.
Also the same plan with the spurs' nodes laid on the trunk, to show what the branches cost. Target: under 1 s.
Each time is the best of a few runs (other work on the machine only slows a run down). Prints and exits 0.
"""

import os
import platform
import time
from typing import Any

from pairline.engine.network import check_network
from pairline.engine.plan import load_plan
from pairline.server.allocator import keep_freed_memory

RUNS = 3


def _segment(name: str, length_m: float, count: int, spur: bool) -> dict[str, Any]:
    """count receivers of 1/8 UL on 30 cm drops, the last four on a 12 m spur from the middle when spur."""
    on_trunk = count - 4 if spur else count
    nodes: list[dict[str, Any]] = [
        {"name": f"{name}-{i + 1:02d}", "position_m": length_m * (i + 1) / on_trunk, "stub_length_m": 0.3}
        for i in range(on_trunk)
    ]
    branches = []
    if spur:
        branches = [{"name": f"{name}-spur", "junction_position_m": length_m / 2, "length_m": 12.0}]
        nodes += [
            {"name": f"{name}-s{k}", "branch": f"{name}-spur", "position_m": 3.0 * k, "stub_length_m": 0.3}
            for k in range(1, 5)
        ]
    else:
        nodes += [
            {"name": f"{name}-s{k}", "position_m": length_m / 2 + 0.5 * k, "stub_length_m": 0.3} for k in range(1, 5)
        ]
    return {
        "nodes": nodes,
        "branches": branches,
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0},
            {"position_m": length_m, "resistance_ohm": 120.0},
        ],
        "bias": [{"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0}],
    }


def plan_doc(spurs: bool) -> dict[str, Any]:
    main = _segment("hall", 300.0, 32, spurs)  # with the repeaters' two upstream ports, 34 nodes here
    east, west = _segment("east", 400.0, 32, spurs), _segment("west", 250.0, 32, spurs)
    return {
        "format": "pairline-bus-plan",
        "format_version": 3,
        "title": "Three segments, 96 receivers",
        "standard": "rs485",
        "bit_rate_bps": 115_200.0,
        "trunk_length_m": 300.0,
        "default_device": "failsafe-eighth-slew",
        "driver": {"name": "head", "position_m": 0.0, "stub_length_m": 0.3},
        **main,
        "segments": [
            {"name": "east", "trunk_length_m": 400.0, **east},
            {"name": "west", "trunk_length_m": 250.0, **west},
        ],
        "repeaters": [
            {"name": "rep-east", "upstream_segment": "main", "upstream_position_m": 300.0,
             "downstream_segment": "east", "downstream_position_m": 0.0},
            {"name": "rep-west", "upstream_segment": "main", "upstream_position_m": 150.0, "upstream_stub_m": 0.3,
             "downstream_segment": "west", "downstream_position_m": 0.0},
        ],
    }  # fmt: skip


def best_of(doc: dict[str, Any]) -> tuple[float, str]:
    plan = load_plan(doc)
    times, verdict = [], ""
    for _ in range(RUNS):
        t0 = time.perf_counter()
        report = check_network(plan)
        times.append(time.perf_counter() - t0)
        verdict = report.verdict.value
    return min(times), verdict


def main() -> None:
    keep_freed_memory()  # as the check workers and the command line run checks (server.allocator)
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, load {os.getloadavg()[0]:.2f}; best of {RUNS}")
    receivers = sum(1 for n in load_plan(plan_doc(True)).nodes) + sum(
        len(s.nodes) for s in load_plan(plan_doc(True)).segments
    )
    for spurs in (True, False):
        seconds, verdict = best_of(plan_doc(spurs))
        shape = "a 12 m spur of 4 receivers per segment" if spurs else "the same nodes on the trunk"
        print(f"3 segments, {receivers} receivers, {shape}: {seconds:.3f} s (target < 1 s), verdict {verdict}")


if __name__ == "__main__":
    main()
