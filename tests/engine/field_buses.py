"""An invented bus and its installed variants, as ngspice captures them (shared by the field-check tests).

The plan: a 400 m conveyor line on a constant-resistance 120 Ohm pair (what ngspice's LTRA models exactly),
a 25 ns driver at 0 m, five devices on the trunk (100 pF inputs), 120 Ohm at both ends, bias at the driver.
Each variant is how it might have been installed instead. Traces are simulated once per test session.
"""

from __future__ import annotations

import copy
import functools
import os
from typing import Any

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.plan import BusPlan, load_plan

from tests.engine.captures import Trace, capture_csv, sample, spice_edge
from tests.engine.spice_netlist import ngspice_path

TRUNK_M = 400.0
DRIVER = "control-room"
FAR_NODE = "loadout"
PLAN_DOC: dict[str, Any] = {
    "title": "Quarry conveyor line",
    "bit_rate_bps": 1e6,
    "trunk_length_m": TRUNK_M,
    "cable": {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0842},
    "driver": {"name": DRIVER, "transceiver": "edge-25ns"},
    "nodes": [
        {"name": name, "position_m": p, "unit_loads": 0.125, "input_capacitance_f": 100e-12}
        for name, p in (("crusher", 50.0), ("screen-1", 150.0), ("screen-2", 250.0), ("stacker", 350.0))
    ]
    + [{"name": FAR_NODE, "position_m": TRUNK_M, "unit_loads": 0.125, "input_capacitance_f": 100e-12}],
    "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": TRUNK_M, "resistance_ohm": 120.0}],
    "bias": {"position_m": 0.0, "pull_up_ohm": 680.0, "pull_down_ohm": 680.0},
}
STOP_S = 5.6e-6  # the edge plus the far end's reflection from a 20 % longer trunk, with room for the offset
SAMPLES = 3000
SAMPLE_INTERVAL_S = 2e-9
NOISE_V = 0.01


def plan() -> BusPlan:
    return load_plan(PLAN_DOC)


JUNCTION_M = 200.0  # a junction box on the trunk with no device, where a probe may be clipped on
JUNCTION_PROBE = "junction-probe"


def variant(name: str) -> dict[str, Any]:
    """The plan as installed: 'planned', 'far_missing', 'far_60_ohm', 'cable_150', 'stub_5m_at_300m',
    'stub_8m_at_screen_2', 'longer_20pc', 'slower_edges'; with '+junction-probe', a scope probe (1 MOhm, a 10:1
    probe's typical input: 0.012 unit loads of 12 kOhm) on the trunk at JUNCTION_M."""
    name, _, probe = name.partition("+")
    doc = copy.deepcopy(PLAN_DOC)
    if probe:
        probe_node = {"name": probe, "position_m": JUNCTION_M, "unit_loads": 0.012, "input_capacitance_f": 0.0}
        doc["nodes"].append(probe_node)
    if name == "far_missing":
        doc["terminations"] = doc["terminations"][:1]
    elif name == "far_60_ohm":  # a device's built-in 120 Ohm switched on beside the planned one
        doc["terminations"][1]["resistance_ohm"] = 60.0
    elif name == "cable_150":
        doc["cable"]["z0_ohm"] = 150.0
    elif name == "stub_5m_at_300m":
        doc["nodes"].append({"name": "unplanned", "position_m": 300.0, "stub_length_m": 5.0})
    elif name == "stub_8m_at_screen_2":  # the device at 250 m wired 8 m off the trunk instead of on it
        next(n for n in doc["nodes"] if n["name"] == "screen-2")["stub_length_m"] = 8.0
    elif name == "longer_20pc":  # the run is 20 % longer than drawn: every position along it 20 % further
        doc["trunk_length_m"] *= 1.2
        for item in (*doc["nodes"], *doc["terminations"]):
            item["position_m"] *= 1.2
    elif name == "slower_edges":  # 20 ns slower than the plan's 25 ns class
        doc["driver"]["rise_time_s"] = 45e-9
    elif name != "planned":
        raise ValueError(name)
    return doc


def need_ngspice() -> None:
    if ngspice_path() is None:
        if os.environ.get("CI", "").lower() == "true":
            raise RuntimeError("ngspice is required under CI=true (apt-get install ngspice; see .ci/setup)")
        pytest.skip("ngspice not installed (Debian package 'ngspice'); synthesised captures skipped")


@functools.cache
def trace(name: str, probe: str = DRIVER) -> Trace:
    """ngspice's edge response of the installed variant at the probe (2.5 ns time steps: 1/12 of the ramp)."""
    need_ngspice()
    return spice_edge(build_bus(load_plan(variant(name))), probe, STOP_S, max_step_s=2.5e-9)


def edge_at_s(seed: int) -> float:
    """A random trigger position: the edge starts 0.4 to 1.2 µs into the capture."""
    return float(np.random.default_rng(seed).uniform(0.4e-6, 1.2e-6))


def capture_text(name: str, probe: str = DRIVER, *, seed: int = 1, lines: bool = False, invert: bool = False) -> str:
    time_s, v = sample(
        trace(name, probe),
        n=SAMPLES,
        dt_s=SAMPLE_INTERVAL_S,
        edge_at_s=edge_at_s(seed),
        noise_v=NOISE_V,
        seed=seed,
    )
    return capture_csv(time_s, -v if invert else v, lines=lines, seed=seed)
