"""Signal verdicts from metrics, and fixes found by re-simulating: each fix, applied, really passes, and lands
on the right side of the published rule of thumb it refines."""

import dataclasses

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.fixes import compute_fixes, judge_bus, judge_metrics
from pairline.engine.metrics import ReceiverMetrics, SampledLevels
from pairline.engine.plan import load_plan
from pairline.engine.rules.signal import banded
from pairline.engine.tolerance import ReceiverTolerance
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S

CLEAN = ReceiverMetrics(
    receiver="rx",
    driver="driver",
    amplitude_v=2.0,
    peak_v=2.1,
    overshoot_v=0.1,
    overshoot_ratio=0.05,
    undershoot_v=0.0,
    threshold_recrossings=0,
    settle_time_s=100e-9,
    settle_margin_s=4e-6,
    min_sample_v=1.9,
    sample_errors=0,
    eye_height_v=3.8,
    eye_width_s=8e-6,
    eye_width_ui=0.9,
    propagation_delay_s=500e-9,
    jitter_s=0.0,
    jitter_ui=0.0,
    bit_time_s=8.68e-6,
    threshold_v=0.2,
)


def test_clean_waveform_holds():
    assert judge_metrics(CLEAN).verdict is Verdict.HOLDS


def test_eye_under_twice_the_threshold_breaks():
    # Source: TIA/EIA-485-A receiver sensitivity ±200 mV: 1s above +0.2 V and 0s below -0.2 V need >= 0.4 V.
    assert judge_metrics(dataclasses.replace(CLEAN, eye_height_v=0.39)).verdict is Verdict.BREAKS
    assert judge_metrics(dataclasses.replace(CLEAN, eye_height_v=0.41)).verdict is not Verdict.BREAKS


def test_recrossing_breaks():
    # Source: TIA/EIA-485-A ±200 mV threshold; a fall back through it is a false edge.
    assert judge_metrics(dataclasses.replace(CLEAN, threshold_recrossings=1)).verdict is Verdict.BREAKS


def test_tight_band_is_the_worst_tolerance_corner():
    # Source: TIA/EIA-485-A ±200 mV threshold: a sampled level of 0.35 V holds, 0.15 V does not; the band rule
    # of every rule (nominal inside, corner beyond: tight) is the house convention.
    nominal = judge_metrics(dataclasses.replace(CLEAN, min_sample_v=0.35))
    corner = ReceiverTolerance("rx", CLEAN, SampledLevels(0.15, 1, 3.8, 0.2), "", None, None, "cable Z0", -0.2)
    verdict, reasons = banded(nominal, corner)
    assert verdict is Verdict.TIGHT
    assert "worst tolerance corner" in reasons[0]
    assert banded(nominal, dataclasses.replace(corner, worst=SampledLevels(1.9, 0, 3.8, 0.2)))[0] is Verdict.HOLDS
    broken = judge_metrics(dataclasses.replace(CLEAN, threshold_recrossings=1))
    assert banded(broken, corner)[0] is Verdict.BREAKS


def _stub_bus(stub_m: float, rate_bps: float = 1e6, edge: str = "edge-25ns", **extra):
    doc = {
        "bit_rate_bps": rate_bps,
        "trunk_length_m": 60.0,
        "driver": {"transceiver": edge},
        "nodes": [
            {"name": "drop", "position_m": 30.0, "stub_length_m": stub_m},
            {"name": "end", "position_m": 60.0},
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 60.0, "resistance_ohm": 120.0}],
    }
    doc.update(extra)
    return build_bus(load_plan(doc))


def test_stub_fix_passes_and_is_no_stricter_than_the_tenth_of_rise_time_rule():
    bus = _stub_bus(40.0, rate_bps=5e6, edge="edge-10ns")
    judged = judge_bus(bus)
    failing = [n for n, j in judged.items() if j.verdict is Verdict.BREAKS]
    assert failing, "a 40 m stub at 5 Mbit/s with 10 ns edges must break"
    fixes = {f.parameter: f for f in compute_fixes(bus, failing)}
    stub = fixes["stub_length_m"]
    fixed = _stub_bus(float(stub.value), rate_bps=5e6, edge="edge-10ns")
    assert all(j.verdict is not Verdict.BREAKS for n, j in judge_bus(fixed).items() if n in failing)
    # Source: TI SLLA272, stub <= 0.1 * t_r * VF * c0, a conservative rule: simulation may allow more, not less.
    rule_m = 0.1 * 10e-9 * 0.78 * SPEED_OF_LIGHT_M_PER_S
    assert float(stub.value) >= rule_m
    assert stub.simulations <= 8  # zero-length check and five bisections, by construction


def _unterminated(rate_bps: float):
    return build_bus(
        load_plan(
            {
                "bit_rate_bps": rate_bps,
                "trunk_length_m": 400.0,
                "driver": {"transceiver": "edge-10ns", "source_ohm": 5.0},
                "nodes": [{"name": "mid", "position_m": 200.0}, {"name": "far", "position_m": 400.0}],
            }
        )
    )


def test_unterminated_fixes_terminator_at_z0_and_a_lower_rate():
    bus = _unterminated(1e6)
    failing = [n for n, j in judge_bus(bus).items() if j.verdict is Verdict.BREAKS]
    assert failing
    fixes = {f.parameter: f for f in compute_fixes(bus, failing)}
    # Source: TI SLLA272 (terminate both cable ends with R_T = Z0); 120 Ohm cable, E24 value 120 Ohm.
    assert fixes["termination_ohm"].value == pytest.approx(120.0, abs=0.5)
    rate = float(fixes["bit_rate_bps"].value)
    slower = _unterminated(rate)
    assert all(j.verdict is not Verdict.BREAKS for n, j in judge_bus(slower).items() if n in failing)
    # Source: B&B Electronics RS-422/485 application note: reflections settle when three round trips fit in
    # half a bit, i.e. rate <= 1 / (12 t_pd); the simulation may allow more, the rule cannot be beaten by less.
    t_pd = 400.0 / (0.78 * SPEED_OF_LIGHT_M_PER_S)
    assert rate >= 0.5 / (12.0 * t_pd)  # one common-rate step (at most x2) below the criterion
    assert rate < 1e6
