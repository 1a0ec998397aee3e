"""Branches solved as the real tree, against ngspice: the same bus written as a netlist in which each branch is a
chain of line sections from its trunk junction through its nodes' points to its open far end
(tests/engine/spice_netlist.py), compared on ngspice's own time points.

Agreement asked, as for the straight buses (tests/engine/test_ngspice.py): every probe within 1 % of its
peak-to-peak at every ngspice time point, overshoot never under-reported by more than 0.5 % of it; the settled
levels equal ngspice's operating point.
"""

import os

import numpy as np
import pytest
from pairline.engine.bus import Bus, build_bus
from pairline.engine.plan import load_plan
from pairline.engine.rules.stubs import max_stub_length_m
from pairline.engine.solve import driver_pin_probe, junction_probe, node_probe
from pairline.engine.waveform import step_responses

from tests.engine.spice_netlist import SpiceWaveforms, dc_levels, ngspice_path, step_waveforms

if ngspice_path() is None:
    if os.environ.get("CI", "").lower() == "true":
        raise RuntimeError("ngspice is required under CI=true (apt-get install ngspice; see .ci/setup)")
    pytest.skip("ngspice not installed (Debian package 'ngspice')", allow_module_level=True)

AGREEMENT = 0.01  # fraction of each probe's peak-to-peak
OVERSHOOT_SHORTFALL = 0.005
STEPS_PER_RAMP = 100
WINDOW_S = 3e-6
LOSSLESS_120 = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.7, "resistance_ohm_per_m": 0.0}
RISE_S = 100e-9  # the library's 1 Mbit/s edge class, edge-100ns
# The stub limit at that edge: one tenth of the rise time in cable delay (TI SLLA272, the RS-485 design guide).
STUB_LIMIT_M = 0.1 * RISE_S * 0.7 * 299_792_458.0


def _trunk(nodes: list[dict], **more) -> dict:
    """A 60 m lossless trunk terminated at both ends, a node at 15 m and one at 60 m around the given ones."""
    return {
        "format_version": 3,
        "bit_rate_bps": 1e6,
        "trunk_length_m": 60.0,
        "cable": LOSSLESS_120,
        "default_device": "edge-100ns",
        "driver": {"stub_length_m": 0.2},
        "nodes": [
            {"name": "t15", "position_m": 15.0, "stub_length_m": 0.3},
            *nodes,
            {"name": "t60", "position_m": 60.0},
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 60.0, "resistance_ohm": 120.0}],
        **more,
    }


def _bus(branch_m: float, star: bool) -> Bus:
    doc = _trunk(
        [
            {"name": "half", "branch": "side", "position_m": branch_m / 2, "stub_length_m": 0.6, "may_drive": True},
            {"name": "end", "branch": "side", "position_m": branch_m},
        ],
        branches=[{"name": "side", "junction_position_m": 30.0, "length_m": branch_m}],
    )
    if star:  # a second branch from the same junction, a node at its end that also talks
        doc["branches"].append({"name": "other", "junction_position_m": 30.0, "length_m": 9.0})
        doc["nodes"].append({"name": "o9", "branch": "other", "position_m": 9.0, "may_drive": True})
    return build_bus(load_plan(doc))


def _assert_agree(ours: np.ndarray, spice: SpiceWaveforms) -> None:
    for name, got, ref in zip(spice.receiver_names, ours, spice.v_diff_v, strict=True):
        swing_v = float(np.ptp(np.r_[ref, 0.0]))
        np.testing.assert_allclose(got, ref, rtol=0, atol=AGREEMENT * swing_v, err_msg=f"probe {name}")
        assert got.max() >= ref.max() - OVERSHOOT_SHORTFALL * swing_v, f"overshoot under-reported at {name}"


def test_the_stub_limit_here_is_the_design_guide_s():
    # Source: TI SLLA272 (stub delay at most a tenth of the driver's rise time), v = 0.7 c.
    assert max_stub_length_m(RISE_S, 0.7) == pytest.approx(STUB_LIMIT_M, rel=1e-9)


@pytest.mark.parametrize(
    ("branch_m", "star", "driver"),
    [
        (STUB_LIMIT_M, False, None),  # a branch as long as the stub limit, the master driving
        (STUB_LIMIT_M, False, "half"),  # ... a node on the branch driving
        (5 * STUB_LIMIT_M, True, None),  # a star of two branches, one five times the limit
        (5 * STUB_LIMIT_M, True, "half"),
        (5 * STUB_LIMIT_M, True, "o9"),  # a node on the other branch driving
    ],
)
def test_branch_edge_response_matches_ngspice(branch_m, star, driver):
    # Source: ngspice transient of the same tree (T lines), one rising edge, its native time points; its operating
    # point for the settled levels.
    bus = _bus(branch_m, star)
    probes = [driver_pin_probe(), junction_probe(30.0)] + [node_probe(n.name) for n in bus.plan.nodes]
    drivers = None if driver is None else [driver]
    ours = step_responses(bus, drivers, probes=probes, max_time_s=WINDOW_S)
    spice = step_waveforms(bus, WINDOW_S, driver_name=driver, probes=probes, max_step_s=RISE_S / 0.8 / STEPS_PER_RAMP)
    _assert_agree(ours.at(spice.time_s)[0], spice)
    np.testing.assert_allclose(ours.v_final_v[0], dc_levels(bus, driver_name=driver, probes=probes), rtol=1e-6)


def test_a_one_node_spur_is_the_stub_it_replaces():
    # Hand reasoning: a branch carrying one node at its far end, with no stub of its own, is electrically that
    # node on a stub of the branch's length from the junction; both layouts give the same waveforms.
    spur = _bus(6.0, False)
    doc = _trunk(
        [
            {"name": "half", "position_m": 30.0, "stub_length_m": 3.6, "may_drive": True},
            {"name": "end", "position_m": 30.0, "stub_length_m": 6.0},
        ]
    )
    stubs = build_bus(load_plan(doc))
    # the two-node branch is not two stubs: the shared first 3 m make a difference the tree shows
    a = step_responses(spur, max_time_s=WINDOW_S)
    b = step_responses(stubs, max_time_s=WINDOW_S)
    t = np.linspace(0, WINDOW_S, 400)
    assert np.max(np.abs(a.at(t)[0] - b.at(t)[0])) > 0.01
    # with its middle node gone, the branch is one stub
    one = {**doc, "nodes": [n for n in doc["nodes"] if n["name"] != "half"]}
    spur_doc = {
        **one,
        "branches": [{"name": "side", "junction_position_m": 30.0, "length_m": 6.0}],
        "nodes": [
            n if n["name"] != "end" else {"name": "end", "branch": "side", "position_m": 6.0} for n in one["nodes"]
        ],
    }
    c = step_responses(build_bus(load_plan(one)), max_time_s=WINDOW_S)
    d = step_responses(build_bus(load_plan(spur_doc)), max_time_s=WINDOW_S)
    np.testing.assert_allclose(c.at(t)[0], d.at(t)[0], rtol=0, atol=1e-9)
