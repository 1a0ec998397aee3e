"""Field-check benchmark (a script, not a test): python tests/bench_field.py

Times engine.fieldcheck.check_capture (alignment, region residuals and the whole diagnosis fit) on the
benchmark's invented 32-receiver bus (tests/bench_sim.py) against 10 000-sample captures of installed
variants of it: as planned, the far terminator missing, and 150 Ohm cable. The captures are the bus's own
edge response (engine.fieldmodel at a fine grid) with seeded noise: this script measures speed, the tests
measure correctness against ngspice. Each time is the best of a few runs; the number of network solves the
fit needed is shown beside it. Target: under 3 s per fit.
"""

from __future__ import annotations

import os
import platform
import sys
import time
from pathlib import Path

import numpy as np
from pairline.engine.capture import parse_capture
from pairline.engine.fieldcheck import check_capture
from pairline.engine.fieldmodel import (
    edge_response,
    field_setup,
    model_grid,
    planned_installation,
    probe_transfer,
    sent_waveform,
)
from pairline.engine.plan import BusPlan, load_plan

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run as a script: the repository root
from tests.bench_sim import plan_doc  # noqa: E402
from tests.engine.captures import capture_csv  # noqa: E402

SAMPLES = 10_000
SAMPLE_INTERVAL_S = 0.5e-9
EDGE_AT_S = 0.6e-6
NOISE_V = 0.01


def capture_text(plan: BusPlan, installed_plan: BusPlan, seed: int) -> str:
    """A 10 000-sample capture at the driver of `installed_plan` (same nodes as `plan`), as CSV text."""
    setup = field_setup(installed_plan)
    z0 = float(installed_plan.cable.z0_ohm or 120.0)
    grid = model_grid(SAMPLES * SAMPLE_INTERVAL_S, 1e-9)
    transfer = probe_transfer(installed_plan, planned_installation(installed_plan, z0), setup, np.r_[grid.s, 0.0])
    edge = edge_response(grid, transfer[:-1], 100e-9)
    time_s = SAMPLE_INTERVAL_S * np.arange(SAMPLES)
    v = 4.0 * sent_waveform(grid, edge, float(transfer[-1].real), setup, time_s - EDGE_AT_S)
    v += np.random.default_rng(seed).normal(0.0, NOISE_V, SAMPLES)
    return capture_csv(time_s, v)


def main() -> None:
    doc = plan_doc(32)
    doc["cable"] = dict(doc["cable"])
    plan = load_plan(doc)
    variants = {
        "as planned": doc,
        "far terminator missing": doc | {"terminations": doc["terminations"][:1]},
        "150 Ohm cable": doc | {"cable": doc["cable"] | {"z0_ohm": 150.0}},
    }
    machine = platform.processor() or platform.machine()
    print(f"Machine: {machine}, {os.cpu_count()} CPUs, Python {platform.python_version()}")
    print(
        f"Plan: {len(plan.nodes)} receivers on {plan.trunk_length_m:g} m; capture {SAMPLES} samples every "
        f"{SAMPLE_INTERVAL_S * 1e9:g} ns"
    )
    for name, variant in variants.items():
        text = capture_text(plan, load_plan(variant), seed=7)
        capture = parse_capture(text)
        setup = field_setup(plan)
        best = float("inf")
        result = None
        for _ in range(3):
            t0 = time.perf_counter()
            result = check_capture(plan, capture, setup)
            best = min(best, time.perf_counter() - t0)
        assert result is not None
        t0 = time.perf_counter()
        parse_capture(text)
        parse_s = time.perf_counter() - t0
        found = "; ".join(d.key for d in result.differences) or "no difference"
        print(f"  {name:24s} fit {best:6.2f} s  ({result.solves} solves; parse {parse_s * 1e3:.0f} ms): {found}")


if __name__ == "__main__":
    main()
