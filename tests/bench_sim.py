"""Simulator benchmark (a script, not a test): python tests/bench_sim.py [--quick]   (from the repository root)

Times, on invented buses of 32, 128 and 256 receivers (constant-R cable, so that ngspice models the same line):
- full check: engine.check.check_plan, every rule including the signal rule (its waveforms for every driver, the
  worst tolerance corner of every receiver, the what-if without terminators, the stub comparison, any computed
  fixes), the summary and the bill of materials;
- waveforms: step responses plus the bit-pattern waveforms and metrics at every receiver (receiver_metrics);
- tolerance analysis of the 32-receiver bus: corners only, and 1000 Monte Carlo variants;
and, in the same run, ngspice on the same buses (one driver edge over the window the reflections need, its
lumped RLC ladder of sections under 1/160 of the edge: T lines and LTRA crawl on dozens of sub-metre sections),
with its own transient analysis time ("rusage trantime": in-process, no start-up or file I/O) and wall time;
the engine's edge response is compared with it on ngspice's own time points.

Each time is the best of a few runs (other work on the machine only slows a run down). Peak memory: tracemalloc
(Python allocations, numpy included) per case, and the process's max RSS.
Targets: full check of 32 and of 128 receivers >= 100x faster than ngspice's analysis of the same bus; full check
of 256 receivers < 300 ms and < 200 MB; tolerance analysis of 32 receivers: corners < 300 ms, 1000 variants < 2 s.
"""

from __future__ import annotations

import os
import platform
import resource
import sys
import time
import tracemalloc
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from pairline.engine.bus import build_bus
from pairline.engine.check import check_plan
from pairline.engine.metrics import receiver_metrics
from pairline.engine.plan import load_plan
from pairline.engine.tolerance import analyse_tolerances
from pairline.engine.waveform import step_responses
from pairline.server.allocator import keep_freed_memory

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run as a script: the repository root
from tests.engine.spice_netlist import ngspice_path, step_waveforms  # noqa: E402

# Constant-R cable (no skin effect or dielectric loss) so that ngspice models the same line.
CABLE = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0842}


def plan_doc(n_receivers: int, *, transceivers: bool = False) -> dict[str, Any]:
    """An invented bus: receivers evenly spread over the trunk (4 m each, 100 m at least) on short stubs,
    1/8 unit load each, terminated at both ends, biased at the driver end."""
    trunk_m = max(100.0, 4.0 * n_receivers)
    positions = np.linspace(trunk_m / n_receivers, trunk_m, n_receivers)
    stubs = 0.3 + 0.4 * (np.arange(n_receivers) % 3)
    return {
        "standard": "rs485",
        "bit_rate_bps": 250e3,
        "trunk_length_m": trunk_m,
        "cable": CABLE,
        "driver": {"transceiver": "edge-100ns", "position_m": 0.0},
        "nodes": [
            {
                "name": f"node-{i + 1:03d}",
                "position_m": float(p),
                "stub_length_m": float(s),
                "unit_loads": 0.125,
                "role": "transceiver" if transceivers else "receiver",
            }
            for i, (p, s) in enumerate(zip(positions, stubs, strict=True))
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0},
            {"position_m": trunk_m, "resistance_ohm": 120.0},
        ],
        "bias": {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
    }


def measure(fn: Callable[[], Any], repeats: int = 3) -> tuple[float, float, Any]:
    """Best wall time of `repeats` runs (s) and the peak traced memory of one run (MB)."""
    best = float("inf")
    result = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - t0)
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return best, peak / 1e6, result


class Rows(list[tuple[str, float, float]]):
    """The measured cases, each printed as it is measured (a long run still shows what it has)."""

    def append(self, row: tuple[str, float, float]) -> None:
        super().append(row)
        name, t, m = row
        mem = "" if m != m else f"{m:9.1f} MB"
        print(f"{name:<66}  {t * 1e3:10.1f} ms  {mem:>12}", flush=True)


def machine() -> str:
    model = "unknown CPU"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return f"{model}; nproc {os.cpu_count()}; Python {platform.python_version()}; numpy {np.__version__}"


def main() -> None:
    keep_freed_memory()  # as the check workers and the command line run checks (server.allocator)
    quick = "--quick" in sys.argv  # no ngspice at 128 receivers, fewer repeats
    rows = Rows()
    print(f"machine: {machine()}")
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    full: dict[int, float] = {}
    for n in (32, 128, 256):
        plan = load_plan(plan_doc(n))
        bus = build_bus(plan)
        t_full, m_full, _ = measure(lambda plan=plan: check_plan(plan), repeats=2 if quick else 3)
        t_wave, m_wave, _ = measure(lambda bus=bus: receiver_metrics(bus), repeats=2)
        full[n] = t_full
        rows.append((f"{n} rx: full check (check_plan incl. signal rule and corners)", t_full, m_full))
        rows.append((f"{n} rx: waveforms + metrics, every receiver", t_wave, m_wave))
    bus32 = build_bus(load_plan(plan_doc(32)))
    t_corners, m_corners, _ = measure(lambda: analyse_tolerances(bus32, variants=0), repeats=2)
    rows.append(("32 rx: tolerance analysis, corners only", t_corners, m_corners))
    t_mc, m_mc, _ = measure(lambda: analyse_tolerances(bus32, variants=1000, seed=1), repeats=1)
    rows.append(("32 rx: tolerance analysis, corners + 1000 Monte Carlo variants", t_mc, m_mc))

    spice: dict[int, tuple[float, float, float]] = {}
    if ngspice_path() is not None:
        for n in (32,) if quick else (32, 128):
            bus = build_bus(load_plan(plan_doc(n)))
            window_s = 4e-6 if n == 32 else 10e-6  # the edge and several one-way trips of the trunk
            ref = step_waveforms(
                bus, window_s, line_model="ladder", max_step_s=bus.driver.rise_time_s / 80, timeout_s=7200.0
            )
            ours = step_responses(bus, max_time_s=window_s).at(ref.time_s)[0]
            err = (np.abs(ours - ref.v_diff_v).max(axis=1) / np.ptp(np.c_[ref.v_diff_v, np.zeros(n)], axis=1)).max()
            spice[n] = (ref.analysis_s, ref.elapsed_s, float(err))
            rows.append((f"{n} rx: ngspice transient analysis (in-process time)", ref.analysis_s, float("nan")))
            rows.append((f"{n} rx: ngspice run (wall, incl. start-up and output)", ref.elapsed_s, float("nan")))

    print(f"max RSS of this process: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")
    mem256 = next(m for name, _, m in rows if name.startswith("256 rx: full"))
    print()
    print("targets:")
    for n, (analysis_s, wall_s, err) in spice.items():
        print(
            f"  {n} rx: ngspice analysis / full check = {analysis_s / full[n]:6.0f}x (>= 100x; wall "
            f"{wall_s / full[n]:.0f}x); worst disagreement {100 * err:.2f} % of the swing on its time points"
        )
    if not spice:
        print("  ngspice not installed: comparison skipped")
    print(f"  256 rx full check: {full[256] * 1e3:.0f} ms (< 300 ms), peak traced {mem256:.0f} MB (< 200 MB)")
    print(f"  32 rx tolerance corners: {t_corners * 1e3:.0f} ms (< 300 ms); 1000 variants: {t_mc:.2f} s (< 2 s)")


if __name__ == "__main__":
    main()
