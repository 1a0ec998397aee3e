"""Whole-bus frequency response: closed forms, and scikit-rf as an independent network solver."""

import numpy as np
import pytest

from engine.bus import build_bus
from engine.plan import BusInputError, load_plan
from engine.solve import dc_transfer, solve_bus
from engine.units import SPEED_OF_LIGHT_M_PER_S

LOSSLESS = {
    "class_key": None,
    "z0_ohm": 120.0,
    "velocity_factor": 0.7,
    "resistance_ohm_per_m": 0.0,
    "dielectric_loss_tangent": 0.0,
}


def _bus(**over):
    doc = {
        "bit_rate_bps": 1e6,
        "trunk_length_m": 100.0,
        "cable": LOSSLESS,
        "driver": {"source_ohm": 120.0, "rise_time_s": 10e-9, "open_circuit_v": 2.0},
        "nodes": [{"name": "far", "position_m": 100.0, "unit_loads": 1e-6, "input_capacitance_f": 0.0}],
        "terminations": [{"position_m": 100.0, "resistance_ohm": 120.0}],
    }
    doc.update(over)
    return build_bus(load_plan(doc))


def test_matched_line_is_a_pure_delay_of_half_the_source():
    # Source: closed form, lossless line matched at both ends: V_L / V_s = 1/2 * exp(-j w l / v)
    # (D. M. Pozar, Microwave Engineering, 4th ed., sec. 2.5, terminated lossless line with matched generator).
    bus = _bus()
    f = np.array([1e3, 1e6, 7.3e6, 30e6])
    resp = solve_bus(bus, f)
    v = 0.7 * SPEED_OF_LIGHT_M_PER_S
    expected = 0.5 * np.exp(-2j * np.pi * f * 100.0 / v)
    # the 12 GOhm receiver (1e-6 UL) is the only departure from the closed form: ~ 60 / 12e9 relative
    np.testing.assert_allclose(resp.transfer[0, :, 0], expected, rtol=1e-8)


def test_dc_solve_is_the_resistive_divider():
    # Source: closed form, Ohm's law: V = V_oc * R_load / (R_s + R_loop + R_load), R_loop = 2 * R' * l.
    cable = dict(LOSSLESS, resistance_ohm_per_m=0.0842)
    bus = _bus(cable=cable, nodes=[{"name": "far", "position_m": 100.0, "unit_loads": 1.0}])
    load = 1.0 / (1.0 / 120.0 + 1.0 / 12_000.0)
    expected = load / (120.0 + 2 * 0.0842 * 100.0 + load)
    np.testing.assert_allclose(dc_transfer(bus)[0, 0], expected, rtol=1e-12)


def test_unknown_driver_name_is_a_clear_error():
    bus = _bus()
    with pytest.raises(BusInputError) as err:
        solve_bus(bus, [1e6], driver_names=["far"])
    assert err.value.problems[0].field == "driver_name"
