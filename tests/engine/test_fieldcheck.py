"""Field check against captures synthesised with ngspice from known installed variants of a plan.

Reference: ngspice transients (LTRA lossy lines) of each variant, probed where the capture was taken, sampled
2 ns apart with a random trigger position and seeded noise of 10 mV (about 0.4 % of the 2.4 V swing). The fit
must name the variant's difference and nothing else, and recover its value within the tolerance stated at
each check; terminator presence must always come out right.
"""

import numpy as np
import pytest
from pairline.engine.capture import parse_capture
from pairline.engine.fieldcheck import check_capture
from pairline.engine.fieldmodel import field_setup
from pairline.engine.plan import BusInputError, load_plan

from tests.engine.captures import Trace, capture_csv, sample
from tests.engine.field_buses import (
    DRIVER,
    FAR_NODE,
    JUNCTION_M,
    JUNCTION_PROBE,
    PLAN_DOC,
    TRUNK_M,
    capture_text,
    plan,
    trace,
)


def _check(text: str, at: str = DRIVER, **setup):
    bus_plan = plan()
    return check_capture(bus_plan, parse_capture(text), field_setup(bus_plan, at=at, **setup))


def _fitted(result, key: str) -> float | None:
    return next(q.fitted for q in result.quantities if q.key == key)


@pytest.mark.parametrize("at", [DRIVER, FAR_NODE])
def test_the_plan_as_planned_shows_no_difference(at):
    # Source: ngspice transient of the plan itself, probed at the driver and at the far node.
    result = _check(capture_text("planned", at, seed=2), at)
    assert result.matches, [d.sentence for d in result.differences]
    assert result.fitted_plan is None
    # the aligned prediction needs no scaling: within 2 % (ngspice and the engine agree to about 1 %)
    assert result.alignment.scale == pytest.approx(1.0, abs=0.02)
    for region in result.residuals:
        assert region.rms_v < 3.0 * 0.01, region  # within 3 noise sigmas of 10 mV


def test_far_terminator_missing():
    # Source: ngspice transient with the 120 Ohm terminator at 400 m removed.
    result = _check(capture_text("far_missing", seed=3))
    assert [d.key for d in result.differences] == ["end_siemens"]
    assert _fitted(result, "end_termination_ohm") is None  # found missing
    sentence = result.differences[0].sentence
    assert "missing" in sentence and "far end" in sentence
    # Source: round trip 2 x 400 m / (0.78 c0) = 3.42 µs, the reflection's time in the sentence.
    assert "3.42 µs" in sentence
    assert result.fitted_plan is not None
    assert [t.position_m for t in result.fitted_plan.terminations] == [0.0]


def test_far_terminator_missing_seen_at_the_far_node():
    # Source: ngspice transient with the far terminator removed, probed at the far node.
    result = _check(capture_text("far_missing", FAR_NODE, seed=4), FAR_NODE)
    assert [d.key for d in result.differences] == ["end_siemens"]
    assert _fitted(result, "end_termination_ohm") is None


def test_far_terminator_of_60_ohm_instead_of_120():
    # Source: ngspice transient with 60 Ohm at 400 m (a device's built-in 120 Ohm beside the planned one).
    result = _check(capture_text("far_60_ohm", seed=16))
    assert [d.key for d in result.differences] == ["end_siemens"]
    assert _fitted(result, "end_termination_ohm") == pytest.approx(60.0, rel=0.1)  # value within 10 %
    assert "instead of the planned 120 Ω" in result.differences[0].sentence
    assert [t.resistance_ohm for t in result.fitted_plan.terminations] == [120.0, pytest.approx(60.0, rel=0.1)]


def test_far_terminator_missing_seen_from_a_junction_on_the_trunk():
    # Source: ngspice transient with the far terminator removed, probed with 1 MOhm at a junction 200 m along.
    result = _check(
        capture_text(f"far_missing+{JUNCTION_PROBE}", JUNCTION_PROBE, seed=17), None, at_position_m=JUNCTION_M
    )
    assert [d.key for d in result.differences] == ["end_siemens"]
    assert _fitted(result, "end_termination_ohm") is None
    # Source: from the junction to the far end and back, 2 x 200 m / (0.78 c0) = 1.71 µs after the edge passes.
    assert "1.71 µs" in result.differences[0].sentence


def test_a_longer_stub_at_a_planned_node():
    # Source: ngspice transient with the device at 250 m ('screen-2') on an 8 m stub instead of on the trunk.
    result = _check(capture_text("stub_8m_at_screen_2", seed=18))
    assert [d.key for d in result.differences] == ["stub"]
    assert _fitted(result, "stub_position_m") == pytest.approx(250.0, abs=0.05 * TRUNK_M)  # 5 % of the trunk
    # the fit's stub carries no device at its end, the real one carries 100 pF: its length reads up to 20 % long
    assert _fitted(result, "stub_length_m") == pytest.approx(8.0, rel=0.2)
    assert "at node 'screen-2'" in result.differences[0].sentence


def test_cable_of_150_ohm_instead_of_120():
    # Source: ngspice transient with a 150 Ohm cable (same velocity factor and resistance).
    result = _check(capture_text("cable_150", seed=5))
    assert [d.key for d in result.differences] == ["z0_ohm"]
    assert _fitted(result, "z0_ohm") == pytest.approx(150.0, rel=0.05)  # Z0 within 5 %
    assert result.fitted_plan is not None and result.fitted_plan.cable.z0_ohm == pytest.approx(150.0, rel=0.05)


def test_extra_5_m_stub_at_300_m():
    # Source: ngspice transient with an extra device on a 5 m stub at 300 m.
    result = _check(capture_text("stub_5m_at_300m", seed=6))
    assert [d.key for d in result.differences] == ["stub"]
    assert _fitted(result, "stub_position_m") == pytest.approx(300.0, abs=0.05 * TRUNK_M)  # 5 % of the trunk
    assert _fitted(result, "stub_length_m") == pytest.approx(5.0, rel=0.2)  # length within 20 %
    assert result.fitted_plan is not None and len(result.fitted_plan.nodes) == 6


def test_trunk_20_percent_longer():
    # Source: ngspice transient of the run 20 % longer than drawn (480 m, every position 20 % further).
    result = _check(capture_text("longer_20pc", seed=7))
    assert [d.key for d in result.differences] == ["length_scale"]
    assert _fitted(result, "trunk_length_m") == pytest.approx(480.0, rel=0.05)  # length within 5 %
    assert "velocity factor" in result.differences[0].sentence


def test_edges_20_ns_slower():
    # Source: ngspice transient with a 45 ns driver ramp (10-90 %) instead of the plan's 25 ns.
    result = _check(capture_text("slower_edges", seed=8))
    assert [d.key for d in result.differences] == ["rise_time_s"]
    assert _fitted(result, "rise_time_s") == pytest.approx(45e-9, rel=0.1)  # edge time within 10 %


def test_differential_and_line_voltages_give_the_same_result():
    # Source: the same ngspice capture written as A-B and as A and B around a noisy 2.5 V common mode.
    as_diff = _check(capture_text("far_missing", seed=9))
    as_lines = _check(capture_text("far_missing", seed=9, lines=True))
    assert [d.sentence for d in as_lines.differences] == [d.sentence for d in as_diff.differences]
    for a, b in zip(as_diff.quantities, as_lines.quantities, strict=True):
        assert a.key == b.key
        if a.fitted is not None:
            assert b.fitted == pytest.approx(a.fitted, rel=1e-6)  # the files differ only in rounding


def test_a_falling_edge_is_compared_inverted():
    # Source: the ngspice capture of the missing far terminator, upside down (A and B swapped at the probe).
    result = _check(capture_text("far_missing", seed=10, invert=True))
    assert result.alignment.inverted
    assert [d.key for d in result.differences] == ["end_siemens"]


def _pattern_capture(name: str, bits: str, bit_time_s: float, seed: int) -> str:
    """A bit pattern as the superposition of ngspice's edge response (the bus is linear): the line rests at the
    first bit's level and each change of level adds the edge response, scaled by the change."""
    edge = trace(name)
    rest_v = edge.level_before_v  # the level of a 0, at the probe
    b = np.array([int(c) for c in bits])
    times = bit_time_s * (np.flatnonzero(np.diff(b)) + 1)
    signs = np.diff(b)[np.diff(b) != 0]
    start = edge_start = 0.5e-6
    time_s = 2e-9 * np.arange(int((start + len(bits) * bit_time_s + 3e-6) / 2e-9))
    v = np.full(time_s.size, rest_v if b[0] == 0 else -rest_v)
    for t_k, sign in zip(times, signs, strict=True):
        v += sign * (np.interp(time_s - edge_start - t_k, edge.time_s, edge.v_v, left=rest_v) - rest_v)
    t, v = sample(Trace(time_s, v, float(v[0])), n=time_s.size, dt_s=2e-9, edge_at_s=0.0, noise_v=0.01, seed=seed)
    return capture_csv(t, v)


def test_typed_bits_are_compared_as_sent():
    # Source: superposed ngspice edge responses of the missing far terminator, bits 0110 at 1 Mbit/s.
    result = _check(_pattern_capture("far_missing", "0110", 1e-6, seed=11), sent="bits", bits="0110")
    assert [d.key for d in result.differences] == ["end_siemens"]
    assert _fitted(result, "end_termination_ohm") is None


def test_the_plans_own_pattern_is_compared_as_sent():
    # Source: superposed ngspice edge responses of the missing far terminator, the plan's pattern 0110.
    bus_plan = load_plan(PLAN_DOC | {"test_pattern": "0110"})
    capture = parse_capture(_pattern_capture("far_missing", "0110", 1e-6, seed=15))
    result = check_capture(bus_plan, capture, field_setup(bus_plan, sent="pattern"))
    assert result.setup.bits == "0110"
    assert [d.key for d in result.differences] == ["end_siemens"]


def test_a_capture_far_longer_than_the_plan_window_is_trimmed_with_a_warning():
    # Source: ngspice transient of the plan, sampled every 20 ns for 100 µs (the plan's window is about 14 µs).
    t, v = sample(trace("planned"), n=5000, dt_s=20e-9, edge_at_s=1e-6, noise_v=0.01, seed=12)
    result = _check(capture_csv(t, v))
    assert any("far longer" in w for w in result.warnings)
    assert result.overlay.time_s[-1] < 30e-6
    assert result.matches


def test_too_few_samples_around_the_edge_is_an_error():
    # 500 ns apart, the plan's window of about 24 µs around the edge holds under 100 samples
    t, v = sample(trace("planned"), n=400, dt_s=500e-9, edge_at_s=50e-6, noise_v=0.01, seed=13)
    with pytest.raises(BusInputError) as exc:
        _check(capture_csv(t, v))
    assert exc.value.problems[0].field == "capture_csv"
    assert "samples" in exc.value.problems[0].message


def test_flat_tops_are_left_out_and_the_fit_still_holds():
    # Source: ngspice transient of the missing far terminator, cut at a scope rail of 3.1 V (the open end's
    # reflection lifts the driver's level to about 3.2 V late in the capture).
    t, v = sample(trace("far_missing"), n=3000, dt_s=2e-9, edge_at_s=1.2e-6, noise_v=0.01, seed=14)
    result = _check(capture_csv(t, np.minimum(v, 3.1)))
    assert any("clipped" in w for w in result.warnings)
    assert result.overlay.clipped.sum() > 100
    assert [d.key for d in result.differences] == ["end_siemens"]
