"""The simulator against ngspice: the same buses as SPICE netlists, compared on ngspice's own time points.

Reference: ngspice (Debian package), transient analysis (see tests/engine/spice_netlist.py for the model), time
step at most 1/100 of the driver's ramp: on a matched line its corners then sit within 0.05 % of the closed form
(with 1/25 they were cut by up to 0.6 % where two T lines meet). Lossless buses use ngspice's T lines, the
resistive cable its LTRA line (checked against a fine lumped ladder below).

Agreement asked, at every probe (receivers, trunk junctions, the driver's pins) and every ngspice time point of the
window, ramp corners included: within 1 % of the probe's peak-to-peak; the engine's highest level never below
ngspice's by more than 0.5 % of it (overshoot is not under-reported).
"""

import os

import numpy as np
import pytest
from pairline.engine.bus import Bus, build_bus
from pairline.engine.metrics import receiver_metrics
from pairline.engine.plan import load_plan
from pairline.engine.solve import Probe, driver_pin_probe, junction_probe, node_probe
from pairline.engine.waveform import pattern_at, simulate_pattern, step_responses

from tests.engine.spice_netlist import (
    SpiceWaveforms,
    bus_netlist,
    dc_levels,
    ngspice_path,
    pattern_waveforms,
    run_netlist,
    step_waveforms,
)

if ngspice_path() is None:
    if os.environ.get("CI", "").lower() == "true":
        raise RuntimeError("ngspice is required under CI=true (apt-get install ngspice; see .ci/setup)")
    pytest.skip(
        "ngspice not installed (Debian package 'ngspice'); reference transients skipped", allow_module_level=True
    )

AGREEMENT = 0.01  # fraction of each probe's peak-to-peak
OVERSHOOT_SHORTFALL = 0.005  # fraction of each probe's peak-to-peak
STEPS_PER_RAMP = 100  # ngspice's largest time step: the ramp's 0-100 % time over this

LOSSLESS_120 = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.7, "resistance_ohm_per_m": 0.0}
LOSSLESS_100 = {"class_key": None, "z0_ohm": 100.0, "velocity_factor": 0.66, "resistance_ohm_per_m": 0.0}
# Constant R (no skin effect, no dielectric loss): the RLGC line ngspice models.
RESISTIVE_120 = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0842}
HIGH_Z = {"unit_loads": 1e-6, "input_capacitance_f": 0.0}


def _bus(doc: dict) -> Bus:
    return build_bus(load_plan(doc))


def _probes(bus: Bus, *junctions_m: float) -> list[Probe]:
    return (
        [driver_pin_probe()] + [junction_probe(x) for x in junctions_m] + [node_probe(n.name) for n in bus.plan.nodes]
    )


def matched_line() -> Bus:
    return _bus(
        {
            "bit_rate_bps": 1e6,
            "trunk_length_m": 100.0,
            "cable": LOSSLESS_120,
            "driver": {"source_ohm": 120.0, "rise_time_s": 10e-9, "open_circuit_v": 2.0},
            "nodes": [{"name": "mid", "position_m": 50.0, **HIGH_Z}, {"name": "far", "position_m": 100.0, **HIGH_Z}],
            "terminations": [{"position_m": 100.0, "resistance_ohm": 120.0}],
        }
    )


def open_far_end() -> Bus:
    return _bus(
        {
            "standard": "rs422",
            "bit_rate_bps": 1e6,
            "trunk_length_m": 60.0,
            "cable": LOSSLESS_100,
            "driver": {"transceiver": "edge-10ns"},
            "nodes": [{"name": "mid", "position_m": 30.0, "stub_length_m": 2.0}, {"name": "far", "position_m": 60.0}],
        }
    )


def three_metre_stubs() -> Bus:
    return _bus(
        {
            "bit_rate_bps": 10e6,
            "trunk_length_m": 80.0,
            "cable": LOSSLESS_120,
            "driver": {"rise_time_s": 5e-9, "open_circuit_v": 4.0, "source_ohm": 40.0},
            "nodes": [{"name": f"drop-{x}", "position_m": float(x), "stub_length_m": 3.0} for x in (20, 40, 60, 80)],
            "terminations": [
                {"position_m": 0.0, "resistance_ohm": 120.0},
                {"position_m": 80.0, "resistance_ohm": 120.0},
            ],
        }
    )


def centre_fed() -> Bus:
    return _bus(
        {
            "bit_rate_bps": 2e6,
            "trunk_length_m": 200.0,
            "cable": LOSSLESS_120,
            "driver": {"position_m": 100.0, "stub_length_m": 1.0, "transceiver": "edge-25ns"},
            "nodes": [
                {"name": "west", "position_m": 0.0, "stub_length_m": 0.5},
                {"name": "west-mid", "position_m": 50.0, "stub_length_m": 1.0},
                {"name": "east-mid", "position_m": 150.0, "stub_length_m": 1.0, "role": "transceiver"},
                {"name": "east", "position_m": 200.0, "stub_length_m": 0.5},
            ],
            "terminations": [
                {"position_m": 0.0, "resistance_ohm": 120.0},
                {"position_m": 200.0, "resistance_ohm": 120.0},
            ],
        }
    )


def rc_terminated() -> Bus:
    return _bus(
        {
            "bit_rate_bps": 500e3,
            "trunk_length_m": 150.0,
            "cable": LOSSLESS_120,
            "driver": {"transceiver": "edge-25ns"},
            "nodes": [{"name": f"rx-{x}", "position_m": float(x), "stub_length_m": 1.0} for x in (50, 100, 150)],
            "terminations": [
                {"position_m": 0.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 4.7e-9},
                {"position_m": 150.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 4.7e-9},
            ],
            "bias": {"position_m": 0.0, "pull_up_ohm": 680.0, "pull_down_ohm": 680.0},
        }
    )


def long_resistive_32() -> Bus:
    return _bus(
        {
            "bit_rate_bps": 50e3,
            "trunk_length_m": 1200.0,
            "cable": RESISTIVE_120,
            "driver": {"transceiver": "slew-1200ns"},
            "nodes": [{"name": f"rx-{i + 1:02d}", "position_m": 37.5 * (i + 1), "unit_loads": 0.5} for i in range(32)],
            "terminations": [
                {"position_m": 0.0, "resistance_ohm": 120.0},
                {"position_m": 1200.0, "resistance_ohm": 120.0},
            ],
        }
    )


def quarter_wave() -> Bus:
    # 30 m open line from a 10 ohm driver: its quarter-wave resonance v / (4 l) = 1.65 MHz; 3.3 Mbit/s of
    # alternating bits drives it at that frequency.
    return _bus(
        {
            "standard": "rs422",
            "bit_rate_bps": 3.2e6,
            "trunk_length_m": 30.0,
            "cable": LOSSLESS_100,
            "driver": {"rise_time_s": 10e-9, "open_circuit_v": 4.0, "source_ohm": 10.0},
            "nodes": [{"name": "mid", "position_m": 15.0}, {"name": "far", "position_m": 30.0}],
        }
    )


# name -> (bus, trunk junctions probed, window: the edge and its reflections until they fade)
CASES = {
    "matched line fed by a ramp": (matched_line, (25.0,), 1.5e-6),
    "unterminated far end": (open_far_end, (30.0,), 6e-6),
    "3 m stubs, 5 ns edges": (three_metre_stubs, (40.0,), 2e-6),
    "centre-fed": (centre_fed, (100.0,), 4e-6),
    "RC terminators": (rc_terminated, (100.0,), 6e-6),
    "1200 m resistive, 32 receivers": (long_resistive_32, (300.0,), 12e-6),  # LTRA's cost grows as steps squared
    "near quarter-wave resonance": (quarter_wave, (15.0,), 8e-6),
}


def _max_step_s(bus: Bus) -> float:
    return bus.driver.rise_time_s / 0.8 / STEPS_PER_RAMP


def _assert_agree(ours: np.ndarray, spice: SpiceWaveforms) -> None:
    """Every probe within AGREEMENT of its peak-to-peak at every ngspice time point; overshoot not short."""
    for name, got, ref in zip(spice.receiver_names, ours, spice.v_diff_v, strict=True):
        swing_v = float(np.ptp(np.r_[ref, 0.0]))
        np.testing.assert_allclose(got, ref, rtol=0, atol=AGREEMENT * swing_v, err_msg=f"probe {name}")
        assert got.max() >= ref.max() - OVERSHOOT_SHORTFALL * swing_v, f"overshoot under-reported at {name}"
        assert got.min() <= ref.min() + OVERSHOOT_SHORTFALL * swing_v, f"undershoot under-reported at {name}"


@pytest.mark.parametrize("case", sorted(CASES))
def test_edge_response_matches_ngspice_at_every_probe_and_time_point(case):
    # Source: ngspice transient of the same bus, one rising edge of the driver, its native time points.
    make, junctions, window_s = CASES[case]
    bus = make()
    probes = _probes(bus, *junctions)
    ours = step_responses(bus, probes=probes, max_time_s=window_s)
    spice = step_waveforms(bus, window_s, probes=probes, max_step_s=_max_step_s(bus))
    _assert_agree(ours.at(spice.time_s)[0], spice)
    # Source: ngspice operating point of the same bus, driver at +open_circuit_v.
    np.testing.assert_allclose(ours.v_final_v[0], dc_levels(bus, probes=probes), rtol=1e-6)


@pytest.mark.parametrize(
    ("case", "bits"),
    [
        ("near quarter-wave resonance", "0101010101010101"),
        ("3 m stubs, 5 ns edges", "0110100111010001"),
        ("RC terminators", "00110101"),
    ],
)
def test_bit_pattern_matches_ngspice(case, bits):
    # Source: ngspice transient of the same bit pattern (PWL source, 1 -> +V, 0 -> -V), its native time points.
    make, junctions, _ = CASES[case]
    bus = make()
    probes = _probes(bus, *junctions)
    t_bit = 1.0 / bus.plan.bit_rate_bps
    step = step_responses(bus, probes=probes, max_time_s=len(bits) * t_bit)
    spice = pattern_waveforms(bus, bits, t_bit, probes=probes, max_step_s=_max_step_s(bus))
    _assert_agree(pattern_at(step, bits, t_bit, spice.time_s), spice)
    # the waveforms the metrics read (offsets refined per bit) agree as well
    wave = simulate_pattern(bus, bits, step=step, probes=probes)
    ours = np.stack([np.interp(spice.time_s, wave.time_s, row) for row in wave.v_diff_v])
    _assert_agree(ours, spice)


def test_transceiver_node_driving_matches_ngspice():
    # Source: ngspice transient; the primary driver now loads the bus as a receiver.
    bus = centre_fed()
    probes = _probes(bus, 100.0)
    ours = step_responses(bus, ["east-mid"], probes=probes, max_time_s=4e-6)
    spice = step_waveforms(bus, 4e-6, driver_name="east-mid", probes=probes, max_step_s=_max_step_s(bus))
    _assert_agree(ours.at(spice.time_s)[0], spice)


def test_rc_terminated_delay_is_the_0v_crossing_ngspice_shows():
    # Source: ngspice transient of a long PRBS on the RC-terminated bus: the median over the pattern's edges of
    # each receiver's 0 V crossing after the driver's, the crossing being the last rise through 0 V before the
    # level clears 2 % of its settled value (ngspice's operating point): the delay's definition, engine.metrics.
    # Here one edge at the far receiver touches 0 V by 4 mV and falls back before its real rise.
    bus = rc_terminated()
    bits = "0011010111001010" * 2
    t_bit = 1.0 / bus.plan.bit_rate_bps
    spice = pattern_waveforms(bus, bits, t_bit, max_step_s=_max_step_s(bus))
    settled_v = np.abs(dc_levels(bus))
    t_e = bus.driver.rise_time_s / 0.8
    level = np.array([1.0 if b == "1" else -1.0 for b in bits])
    ours = receiver_metrics(bus, pattern=bits)
    for metrics, ref, clear_v in zip(ours, spice.v_diff_v, 0.02 * settled_v, strict=True):
        delays = []
        for n in np.flatnonzero(np.diff(level)) + 1:
            inside = (spice.time_s >= n * t_bit) & (spice.time_s < (n + 1) * t_bit)
            t, v = spice.time_s[inside], level[n] * ref[inside]
            k = int(np.flatnonzero(v[: np.argmax(v >= clear_v)] < 0.0)[-1]) + 1
            crossing = t[k - 1] + (0.0 - v[k - 1]) * (t[k] - t[k - 1]) / (v[k] - v[k - 1])
            delays.append(crossing - (n * t_bit + 0.5 * t_e))
        # 5 % of the ramp: a crossing's timing error is the waveforms' level error (<= 1 % of the swing) over the
        # edge's slope, which the RC terminators flatten near 0 V
        assert metrics.propagation_delay_s == pytest.approx(float(np.median(delays)), abs=0.05 * t_e)


def test_ltra_agrees_with_a_fine_lumped_ladder():
    # Source: ngspice, two models of the same resistive cable: LTRA, the reference above, and lumped RLC pi
    # sections each under 1/160 of the ramp. A 100 ns edge keeps the ladder small enough to run in seconds.
    bus = _bus(
        {
            "bit_rate_bps": 1e6,
            "trunk_length_m": 100.0,
            "cable": RESISTIVE_120,
            "driver": {"transceiver": "edge-100ns"},
            "nodes": [{"name": "mid", "position_m": 50.0, "stub_length_m": 2.0}, {"name": "far", "position_m": 100.0}],
            "terminations": [{"position_m": 100.0, "resistance_ohm": 120.0}],
        }
    )
    ltra = step_waveforms(bus, 1.5e-6, max_step_s=_max_step_s(bus))
    text, nodes = bus_netlist(bus, stop_time_s=1.5e-6, line_model="ladder", max_step_s=_max_step_s(bus))
    ladder = run_netlist(text, tuple(nodes))
    at_ltra = np.stack([np.interp(ltra.time_s, ladder.time_s, row) for row in ladder.v_diff_v])
    for got, ref in zip(at_ltra, ltra.v_diff_v, strict=True):
        np.testing.assert_allclose(got, ref, atol=AGREEMENT * np.ptp(ref))
