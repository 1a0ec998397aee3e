"""Simulator benchmark (a script, not a test): python tests/bench_sim.py

Times, on invented buses of 32, 128 and 256 receivers:
- full check: engine.check.check_plan, every rule including the signal rule (its waveforms, the what-if
  without terminators, the stub comparison and any computed fixes), the summary and the bill of materials;
- waveforms: step responses plus the bit-pattern waveforms and metrics at every receiver (receiver_metrics);
- signal: check_signal_integrity alone (it is part of the full check);
- sweep: engine.sweep.length_rate_curve for the plan's cable and driver (criterion "eye"; it does not depend
  on the number of receivers);
- web view (32 receivers): what one plan page costs the engine: check_plan, one simulate_pattern for the
  worst receiver, and the length-rate sweep;
and, for 32 nodes that may all drive, the any-node-drives worst case (step responses for all 33 drivers and
metrics for each). The same 32-receiver bus goes through ngspice (LTRA lines, one edge) in the same run; the
engine's edge response over that window is compared with it point by point (ngspice uses its lumped RLC
ladder there: with 65 sections, many under a metre long, T lines and LTRA slow to a crawl).

Each time is the best of a few runs (other work on the machine only slows a run down). Peak memory:
tracemalloc (Python allocations, numpy included) per case, and the process's max RSS.
Targets: full check of 256 receivers < 300 ms and < 200 MB; web view of 32 receivers < 150 ms (server time,
so the engine's share must be well under it); any-node-drives 32 nodes < 1 s; 32 receivers >= 50x faster
than ngspice with agreement inside 2 %.
"""

from __future__ import annotations

import os
import platform
import resource
import time
import tracemalloc
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from pairline.engine.bus import Bus, build_bus
from pairline.engine.check import check_plan
from pairline.engine.fixes import one_driver
from pairline.engine.metrics import receiver_metrics
from pairline.engine.plan import load_plan
from pairline.engine.rules.signal import check_signal_integrity
from pairline.engine.sweep import length_rate_curve
from pairline.engine.waveform import simulate_pattern, step_responses

from tests.engine.spice_netlist import ngspice_path, resample, step_waveforms

# Constant-R cable (no skin effect or dielectric loss) so that ngspice's LTRA models the same line.
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


def waveforms_and_metrics(bus: Bus) -> Any:
    return receiver_metrics(bus)


def any_node_drives(bus: Bus) -> Any:
    """Edge responses of every possible driver in one batch, then pattern metrics for each."""
    drivers = bus.drivers_possible
    steps = step_responses(bus, drivers, max_time_s=127 / bus.plan.bit_rate_bps)
    return [receiver_metrics(bus, driver_name=name, step=one_driver(steps, name)) for name in drivers]


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


def web_view(plan: Any) -> Any:
    """One plan page's engine work: check_plan, the worst receiver's pattern waveform, the length-rate sweep."""
    report = check_plan(plan)
    worst_rx = min((f for f in report.findings if f.rule_id == "signal.integrity"), key=lambda f: f.value or 0.0).node
    return report, simulate_pattern(report.bus, receiver_names=[worst_rx]), length_rate_curve(report.bus)


def main() -> None:
    rows: list[tuple[str, float, float]] = []
    print(f"machine: {machine()}")
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    for n in (32, 128, 256):
        plan = load_plan(plan_doc(n))
        bus = build_bus(plan)
        t_full, m_full, _ = measure(lambda plan=plan: check_plan(plan), repeats=5)
        t_wave, m_wave, _ = measure(lambda bus=bus: waveforms_and_metrics(bus))
        t_sig, m_sig, _ = measure(lambda bus=bus: check_signal_integrity(bus))
        rows.append((f"{n} rx: full check (check_plan incl. signal rule)", t_full, m_full))
        rows.append((f"{n} rx:   of which signal rule (waveforms, what-ifs, fixes)", t_sig, m_sig))
        rows.append((f"{n} rx: waveforms + metrics, every receiver", t_wave, m_wave))
    plan32 = load_plan(plan_doc(32))
    bus32 = build_bus(plan32)
    t_sweep, m_sweep, _ = measure(lambda: length_rate_curve(bus32), repeats=5)
    rows.append(("length-rate sweep (length_rate_curve, eye)", t_sweep, m_sweep))
    t_web, m_web, _ = measure(lambda: web_view(plan32), repeats=5)
    rows.append(("32 rx: web view (check_plan + simulate_pattern + sweep)", t_web, m_web))

    bus_any = build_bus(load_plan(plan_doc(32, transceivers=True)))
    t_any, m_any, _ = measure(lambda: any_node_drives(bus_any), repeats=2)
    rows.append(("32 nodes, any node drives (33 drivers): waveforms + metrics", t_any, m_any))
    t_any_sig, m_any_sig, _ = measure(lambda: check_signal_integrity(bus_any), repeats=2)
    rows.append(("32 nodes, any node drives: signal rule (worst case per receiver)", t_any_sig, m_any_sig))

    window_s = 4e-6  # the edge and seven one-way trips of the 128 m trunk
    t_step, m_step, ours = measure(lambda: step_responses(bus32, max_time_s=window_s), repeats=5)
    rows.append(("32 rx: engine edge response (same window as ngspice)", t_step, m_step))
    spice_line = None
    if ngspice_path() is not None:
        # 65 line sections, many under a metre: T lines multiply breakpoints and LTRA crawls on short
        # sections, so this run uses the lumped RLC ladder (sections under 1/160 of the edge).
        spice = step_waveforms(bus32, window_s, line_model="ladder")
        inside = ours.time_s <= window_s
        ref = resample(spice, ours.time_s[inside])
        err = np.abs(ours.v_diff_v[0][:, inside] - ref).max(axis=1) / np.ptp(spice.v_diff_v, axis=1)
        rows.append(("32 rx: ngspice transient, same bus and window", spice.elapsed_s, float("nan")))
        spice_line = (spice.elapsed_s, float(err.max()))

    width = max(len(r[0]) for r in rows)
    print(f"{'case':<{width}}  {'time':>10}  {'peak traced':>12}")
    for name, t, m in rows:
        mem = "" if m != m else f"{m:9.1f} MB"
        print(f"{name:<{width}}  {t * 1e3:8.1f} ms  {mem:>12}")
    print(f"max RSS of this process: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")

    def row(prefix: str) -> tuple[float, float]:
        return next((t, m) for name, t, m in rows if name.startswith(prefix))

    full32, _ = row("32 rx: full")
    full256, mem256 = row("256 rx: full")
    t_any_full = max(t for name, t, _ in rows if name.startswith("32 nodes"))
    print()
    print("targets:")
    print(f"  256 rx full check: {full256 * 1e3:.0f} ms (< 300 ms), peak traced {mem256:.0f} MB (< 200 MB)")
    print(f"  32 rx web view (engine share): {t_web * 1e3:.0f} ms (< 150 ms server time)")
    print(f"  32 rx full check: {full32 * 1e3:.0f} ms; length-rate sweep: {t_sweep * 1e3:.0f} ms")
    print(f"  any node drives, 32 nodes: {t_any_full * 1e3:.0f} ms (< 1000 ms)")
    if spice_line is not None:
        t_spice, err = spice_line
        print(f"  ngspice / engine edge response (32 rx): {t_spice / t_step:7.0f}x (>= 50x)")
        print(f"  ngspice / full check incl. waveforms (32 rx): {t_spice / full32:7.0f}x")
        print(f"  worst disagreement with ngspice: {100 * err:.2f} % of the swing (<= 2 %)")
    else:
        print("  ngspice not installed: comparison skipped")


if __name__ == "__main__":
    main()
