"""Benchmark (a script, not a test): the check-cost estimate against measured check times.

Run: python tests/bench_cost.py [--quick]   (from the repository root). Each invented plan is checked as a page
view is (server.jobs.checked_plan_page) in a fresh process, timed, and set beside server.cost's estimate. The
estimate is meant as a lower bound on this kind of machine: the smallest measured/estimated ratio should stay
at or above 1. --quick times the first six plans only. Exits 0 always; the figures are the report.
"""

import json
import os
import platform
import subprocess
import sys
from typing import Any

from pairline.engine.plan import load_plan
from pairline.server.cost import check_work, estimated_check_s

TIMEOUT_S = 300
CHILD = """
import json, sys, time
from pairline.server.allocator import keep_freed_memory
from pairline.server.jobs import checked_plan_page
keep_freed_memory()  # as a check worker runs
doc = json.loads(sys.stdin.read())
start = time.perf_counter()
checked_plan_page(doc, None, None, {}, None)
print(time.perf_counter() - start)
"""
# (nodes, transceivers, rise time s, bit rate bit/s, pattern bits (0: built-in), terminators)
PLANS = [
    (8, 0, 100e-9, 115_200.0, 0, 2),
    (32, 0, 100e-9, 9600.0, 0, 2),
    (32, 0, 1e-9, 115_200.0, 0, 2),
    (32, 8, 100e-9, 115_200.0, 0, 2),
    (32, 0, 100e-9, 115_200.0, 512, 2),
    (128, 0, 100e-9, 115_200.0, 0, 2),
    (32, 32, 500e-9, 2e6, 64, 2),
    (128, 32, 500e-9, 1200.0, 64, 2),
    (32, 32, 5e-9, 2e6, 512, 2),
    (512, 32, 500e-9, 50.0, 64, 2),
]


def invented_plan(
    nodes: int, transceivers: int, rise_s: float, rate_bps: float, bits: int, terms: int
) -> dict[str, Any]:
    """A 4 km bus with evenly spread nodes (every seventh on a 100 m stub), a custom driver, RC terminators."""
    trunk_m = 4000.0
    return {
        "title": "Cost benchmark",
        "bit_rate_bps": rate_bps,
        "trunk_length_m": trunk_m,
        "driver": {
            "name": "drv",
            "transceiver": None,
            "rise_time_s": rise_s,
            "open_circuit_v": 5.0,
            "source_ohm": 30.0,
        },
        "nodes": [
            {
                "name": f"n{k}",
                "position_m": trunk_m * (k + 1) / nodes,
                "stub_length_m": 100.0 if k % 7 == 0 else 1.0,
                "unit_loads": 0.0625,
                "role": "transceiver" if k < transceivers else "receiver",
            }
            for k in range(nodes)
        ],
        "terminations": [
            {
                "position_m": trunk_m * k / max(1, terms - 1),
                "kind": "rc",
                "resistance_ohm": 120.0,
                "capacitance_f": 1e-9,
            }
            for k in range(terms)
        ],
        "test_pattern": ("01101001" * 64)[:bits] if bits else None,
    }


def main() -> int:
    plans = PLANS[:6] if "--quick" in sys.argv else PLANS
    print(f"machine: {platform.processor() or platform.machine()}, {os.cpu_count()} cores")
    ratios = []
    for spec in plans:
        doc = invented_plan(*spec)
        estimate_s = estimated_check_s(check_work(load_plan(doc)))
        try:
            done = subprocess.run(
                [sys.executable, "-c", CHILD], input=json.dumps(doc), capture_output=True, text=True, timeout=TIMEOUT_S
            )
            measured_s = float(done.stdout.strip().splitlines()[-1])
        except subprocess.TimeoutExpired:
            measured_s = float(TIMEOUT_S)
        ratios.append(measured_s / estimate_s)
        print(
            f"{spec}: estimate {estimate_s:7.2f} s, measured {measured_s:7.2f} s, measured/estimate {ratios[-1]:6.2f}"
        )
    print(f"smallest measured/estimate: {min(ratios):.2f} (at least 1: the estimate is a lower bound here)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
