"""Scope captures synthesised with ngspice (independent of the engine), written as CSV files scopes write.

A capture is an ngspice transient of an installed bus (a plan variant), probed at one place, sampled on a
uniform grid whose time origin is offset from the edge by a chosen amount, with seeded Gaussian noise, and
written either as the differential voltage or as the two line voltages A and B against ground (a common-mode
level with its own noise, so A - B carries the differential noise only once).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.solve import driver_pin_probe, node_probe

from tests.engine.spice_netlist import bus_netlist, run_netlist

COMMON_MODE_V = 2.5  # where a 5 V transceiver's lines sit


@dataclass(frozen=True, slots=True)
class Trace:
    time_s: np.ndarray  # (n,) ngspice's time points, the driver's ramp starting at 0
    v_v: np.ndarray  # (n,) the probed voltage
    level_before_v: float  # where the line rests before the edge


def spice_edge(bus: Bus, probe: str, stop_time_s: float, *, max_step_s: float | None = None) -> Trace:
    """One driver edge from -V_oc to +V_oc (the line at rest at -V_oc), ramp starting at t = 0, probed at a
    node or the driver's terminal (its name)."""
    v = bus.driver.open_circuit_v
    ramp_s = bus.driver.rise_time_s / 0.8
    points = [(0.0, -v), (ramp_s, v)]
    at = driver_pin_probe() if probe == bus.plan.driver.name else node_probe(probe)
    text, nodes = bus_netlist(bus, stop_time_s=stop_time_s, source_points=points, probes=[at], max_step_s=max_step_s)
    wave = run_netlist(text, tuple(nodes))
    return Trace(wave.time_s, wave.v_diff_v[0], float(wave.v_diff_v[0, 0]))


def sample(trace: Trace, *, n: int, dt_s: float, edge_at_s: float, noise_v: float, seed: int) -> tuple[np.ndarray, ...]:
    """(time_s, v_diff_v) on the capture's grid t_k = k dt, with the edge starting at edge_at_s, plus noise."""
    rng = np.random.default_rng(seed)
    time_s = dt_s * np.arange(n)
    v = np.interp(time_s - edge_at_s, trace.time_s, trace.v_v, left=trace.level_before_v)
    return time_s, v + rng.normal(0.0, noise_v, n)


def capture_csv(
    time_s: np.ndarray,
    v_diff_v: np.ndarray,
    *,
    lines: bool = False,
    seed: int = 0,
    common_noise_v: float = 0.05,
    decimal_comma: bool = False,
) -> str:
    """CSV text: a short key,value header, a row of column names, then rows of time and A-B (or A and B)."""
    sep = ";" if decimal_comma else ","
    head = [f"Record Length{sep}{time_s.size}", f"Sample Interval{sep}{time_s[1] - time_s[0]:.6g}{sep}s"]
    if lines:
        cm = COMMON_MODE_V + np.random.default_rng(seed + 1).normal(0.0, common_noise_v, time_s.size)
        columns = np.column_stack([time_s, cm + v_diff_v / 2.0, cm - v_diff_v / 2.0])
        head.append(sep.join(["Time (s)", "A (V)", "B (V)"]))
    else:
        columns = np.column_stack([time_s, v_diff_v])
        head.append(sep.join(["Time (s)", "A-B (V)"]))
    rows = [sep.join(f"{x:.9g}" for x in row) for row in columns]
    if decimal_comma:
        rows = [r.replace(".", ",") for r in rows]
    return "\n".join(head + rows) + "\n"
