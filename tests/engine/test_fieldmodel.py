"""The prediction at a probe: where and what is checked, installations written as plans, and the edge response
against closed forms and ngspice."""

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.fieldmodel import (
    PROBE_NAME,
    STUB_NAME,
    Installed,
    edge_response,
    field_setup,
    installed_plan,
    model_grid,
    plan_edge,
    planned_installation,
    probe_transfer,
    sent_waveform,
)
from pairline.engine.plan import BusInputError, load_plan

from tests.engine.captures import spice_edge
from tests.engine.field_buses import DRIVER, PLAN_DOC, need_ngspice, plan

# A 100 m lossless 100 Ohm line, driver (4 V behind 40 Ohm, 10 ns) at 0 m, one receiver at the far end.
LINE = {
    "bit_rate_bps": 1e6,
    "trunk_length_m": 100.0,
    "cable": {"class_key": None, "z0_ohm": 100.0, "velocity_factor": 0.66, "resistance_ohm_per_m": 0.0},
    "driver": {"transceiver": "edge-10ns"},
    "nodes": [{"name": "far", "position_m": 100.0, "unit_loads": 0.125, "input_capacitance_f": 0.0}],
}


def _line(**changes):
    return load_plan(LINE | changes)


def test_setup_defaults_to_one_edge_at_the_driver():
    setup = field_setup(plan())
    assert setup.at == DRIVER and setup.sent == "edge" and setup.bits == "01"
    first, times, steps = setup.transitions()
    # Source: a single rising edge from the line at rest at -V_oc: one change of +2 V_oc at t = 0.
    assert first == -1.0 and list(times) == [0.0] and list(steps) == [2.0]


def test_typed_bits_become_level_changes_at_the_bit_times():
    setup = field_setup(plan(), sent="bits", bits="0110")
    first, times, steps = setup.transitions()
    # Source: bits 0110 at 1 Mbit/s: rest at -V, up at 1 µs, down at 3 µs (arithmetic).
    assert first == -1.0
    np.testing.assert_allclose(times, [1e-6, 3e-6], rtol=1e-12)
    np.testing.assert_allclose(steps, [2.0, -2.0])


def test_the_plan_pattern_is_its_test_pattern():
    bus_plan = load_plan(PLAN_DOC | {"test_pattern": "0011010"})
    assert field_setup(bus_plan, sent="pattern").bits == "0011010"


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"at": "attic"}, "at"),
        ({"at_position_m": 4000.0}, "at_position_m"),
        ({"sent": "morse"}, "sent"),
        ({"sent": "bits", "bits": "0102"}, "bits"),
        ({"sent": "bits", "bits": "1111"}, "bits"),
    ],
)
def test_setup_problems_name_their_field(kwargs, field):
    with pytest.raises(BusInputError) as exc:
        field_setup(plan(), **kwargs)
    assert exc.value.problems[0].field == field


def test_an_installation_written_as_a_plan():
    bus_plan = plan()
    planned = planned_installation(bus_plan, 120.0)
    assert installed_plan(bus_plan, planned) == bus_plan  # as planned: the plan itself
    changed = installed_plan(
        bus_plan, Installed(150.0, 1.2, planned.start_siemens, 0.0, stub_position_m=300.0, stub_length_m=5.0)
    )
    # Source: every trunk position times 1.2 (400 m -> 480 m); the far terminator gone; one stub added.
    assert changed.trunk_length_m == pytest.approx(480.0)
    assert [n.position_m for n in changed.nodes[:5]] == pytest.approx([60.0, 180.0, 300.0, 420.0, 480.0])
    assert [t.position_m for t in changed.terminations] == [0.0]
    assert changed.nodes[-1].name == STUB_NAME and changed.nodes[-1].stub_length_m == 5.0
    assert changed.cable.z0_ohm == 150.0


def test_driver_terminal_levels_match_the_divider_closed_forms():
    # Source: lattice diagram of a Thevenin source into a line: the first step at the driver is
    # V Z0 / (Z0 + R_s) = 100 / 140 of the swing; the settled level, with only 96 kOhm at the far end, is
    # V R_L / (R_L + R_s) (DC voltage divider).
    bus_plan = _line()
    setup = field_setup(bus_plan)
    time_s, edge, settled = plan_edge(bus_plan, setup, planned_installation(bus_plan, 100.0), 2e-6, 10e-9)
    first_step = edge[(time_s > 20e-9) & (time_s < 900e-9)]  # after the ramp, before the 1.01 µs round trip
    np.testing.assert_allclose(first_step, 100.0 / 140.0, atol=0.005)  # 0.5 % of the swing
    r_load = 12_000.0 / 0.125
    assert settled == pytest.approx(r_load / (r_load + 40.0), rel=1e-9)


def test_a_matched_line_reflects_nothing_back_to_the_driver():
    # Source: a 100 Ohm terminator on a 100 Ohm line reflects nothing: the driver holds 100 / 140 for good.
    bus_plan = _line(terminations=[{"position_m": 100.0, "resistance_ohm": 100.0}])
    setup = field_setup(bus_plan)
    time_s, edge, _ = plan_edge(bus_plan, setup, planned_installation(bus_plan, 100.0), 3e-6, 10e-9)
    np.testing.assert_allclose(edge[time_s > 20e-9], 100.0 / 140.0, atol=0.005)


def test_superposed_bits_hold_the_settled_levels():
    bus_plan = _line(terminations=[{"position_m": 100.0, "resistance_ohm": 100.0}])
    setup = field_setup(bus_plan, sent="bits", bits="0110")
    grid = model_grid(3e-6, 1e-9)
    transfer = probe_transfer(bus_plan, planned_installation(bus_plan, 100.0), setup, np.r_[grid.s, 0.0])
    settled = float(transfer[-1].real)
    at_s = np.array([0.5e-6, 2.5e-6, 3.9e-6])
    v = sent_waveform(grid, edge_response(grid, transfer[:-1], 10e-9), settled, setup, at_s)
    # Source: bits 0, 1, 1, 0 at 1 µs each, the line settled mid-bit: -, +, - the settled level.
    np.testing.assert_allclose(v, [-settled, settled, -settled], atol=0.005)


@pytest.mark.parametrize("probe", [DRIVER, "screen-2", PROBE_NAME])
def test_edge_response_at_the_probe_agrees_with_ngspice(probe):
    need_ngspice()
    bus_plan = plan()
    at_position = 200.0 if probe == PROBE_NAME else None
    setup = field_setup(bus_plan, at=None if probe == PROBE_NAME else probe, at_position_m=at_position)
    inst = planned_installation(bus_plan, 120.0)
    time_s, edge, _ = plan_edge(bus_plan, setup, inst, 3e-6, build_bus(bus_plan).driver.rise_time_s)
    # the ngspice netlist of the same installation with the probe's 1 MOhm load where the engine adds it
    spice = spice_edge(build_bus(installed_plan(bus_plan, inst, at_position)), probe, 3e-6, max_step_s=1e-9)
    # Source: ngspice transient, one edge -V -> +V: (v - v_rest) / 2 is the response to 0 -> V_oc.
    inside = time_s <= spice.time_s[-1]
    ref = (np.interp(time_s[inside], spice.time_s, spice.v_v) - spice.level_before_v) / 2.0 / 4.0
    swing = float(np.ptp(ref))
    np.testing.assert_allclose(edge[inside], ref, atol=0.02 * swing)  # 2 % of the swing, the engine's ngspice budget
