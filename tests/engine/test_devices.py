"""Every node its own device: the library's classes, a device's values over its class, failsafe receivers in the
idle-bus rule, mixed classes in the load and level rules, and what a unit load is across the pair."""

import math

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.check import check_plan
from pairline.engine.devices import covers, resolve_device
from pairline.engine.findings import Verdict
from pairline.engine.library import STANDARD_MINIMUM, TRANSCEIVERS
from pairline.engine.plan import DeviceSpec, load_plan
from pairline.engine.rules.bias import check_failsafe_bias, size_bias
from pairline.engine.rules.loads import check_driver_load, check_unit_loads, driver_load_ohm
from pairline.engine.rules.voltage import check_receiver_voltage
from pairline.engine.units import parallel_ohm

LOSSLESS = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0}
ENDS = [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 500.0, "resistance_ohm": 120.0}]


def _plan(**changes):
    doc = {
        "format_version": 2,
        "bit_rate_bps": 9600,
        "trunk_length_m": 500.0,
        "cable": LOSSLESS,
        "default_device": "failsafe-eighth-slew",
        "nodes": [{"name": f"n{i}", "position_m": 500.0 * i / 255} for i in range(1, 256)],
        "terminations": ENDS,
    }
    doc.update(changes)
    return load_plan(doc)


# --- the library ------------------------------------------------------------------------------------------------


def test_the_library_has_the_usual_classes():
    classes = TRANSCEIVERS.values()
    # Source: TIA-485-A unit load; 1/2, 1/4 and 1/8 UL receivers (TI SLLA166).
    assert {t.unit_loads for t in classes} >= {1.0, 0.5, 0.25, 0.125}
    assert {t.failsafe for t in classes} == {"none", "open_short", "idle_bus"}
    assert any(t.isolated and t.isolation_grade == "basic" for t in classes)
    assert any(t.isolated and t.isolation_grade == "reinforced" for t in classes)
    assert any(not t.isolated for t in classes)
    # Source: TIA/EIA-485-A common-mode range -7 V .. +12 V; an extended part goes beyond it.
    assert any(t.common_mode_max_v > 12.0 and t.common_mode_min_v < -7.0 for t in classes)
    # common practice: slew-limited edges (microseconds) beside fast ones (nanoseconds).
    assert min(t.rise_time_s for t in classes) <= 10e-9 and max(t.rise_time_s for t in classes) >= 1e-6


@pytest.mark.parametrize("key", sorted(TRANSCEIVERS))
def test_every_class_names_a_source_for_every_value(key):
    t = TRANSCEIVERS[key]
    named = dict(t.sources)
    wanted = {
        "unit loads",
        "edge",
        "edge range",
        "driver output",
        "output common mode",
        "failsafe and thresholds",
        "input capacitance",
        "common-mode range",
    }
    assert wanted | ({"isolation"} if t.isolated else set()) == set(named)
    assert all(len(where) > 10 for where in named.values())


@pytest.mark.parametrize("key", sorted(TRANSCEIVERS))
def test_every_class_meets_the_standard(key):
    t = TRANSCEIVERS[key]
    # Source: TIA-485-A: a driver gives at least 1.5 V across its 54 Ohm test load.
    assert t.open_circuit_v * 54.0 / (54.0 + t.source_ohm) >= 1.5
    # Source: TIA/EIA-485-A: the receiver is sure of its output beyond +/-200 mV, so its window lies inside.
    assert -0.2 <= t.threshold_low_v < t.threshold_high_v <= 0.2
    # Source: TI SLLA628: a transition of at most 30 % of a bit at the class's rate.
    assert t.rise_time_s <= 0.3 / t.max_bit_rate_bps * (1 + 1e-9)
    lo, hi = t.rise_time_range_s()
    assert lo < t.rise_time_s < hi  # the typical edge inside the class's fastest and slowest


# --- a device's values ------------------------------------------------------------------------------------------


def test_a_device_takes_its_class_values_with_the_plan_overrides_on_top():
    spec = DeviceSpec(class_key="edge-25ns", unit_loads=0.125, threshold_high_v=-0.05, failsafe="idle_bus")
    d = resolve_device(spec, "edge-100ns")
    base = TRANSCEIVERS["edge-25ns"]
    assert (d.unit_loads, d.failsafe, d.threshold_high_v) == (0.125, "idle_bus", -0.05)
    assert (d.rise_time_s, d.open_circuit_v, d.threshold_low_v) == (base.rise_time_s, base.open_circuit_v, -0.2)
    assert resolve_device(None, "edge-100ns").unit_loads == TRANSCEIVERS["edge-100ns"].unit_loads


def test_a_driver_given_by_its_minimum_into_54_ohm_gives_that_into_54_ohm():
    # Source: TIA-485-A: the published |V_OD| is measured into 54 Ohm; modelled as that voltage behind 0 Ohm, it
    # gives exactly that into 54 Ohm and no less into any larger load.
    d = resolve_device(DeviceSpec(class_key=None, output_54_ohm_v=2.0, rise_time_s=1e-6), "edge-100ns")
    assert d.open_circuit_v * 54.0 / (54.0 + d.source_ohm) == pytest.approx(2.0, rel=1e-12)


def test_a_device_of_its_own_values_starts_from_the_standard_minimum():
    d = resolve_device(DeviceSpec(class_key=None, rise_time_s=200e-9), "edge-100ns")
    # Source: TIA-485-A: 1 UL, 1.5 V into 54 Ohm, +/-200 mV, -7 .. +12 V: the least the standard allows.
    assert (d.unit_loads, d.open_circuit_v, d.source_ohm) == (1.0, 1.5, 0.0)
    assert (d.threshold_low_v, d.threshold_high_v, d.failsafe) == (-0.2, 0.2, "none")
    assert (d.common_mode_min_v, d.common_mode_max_v) == (-7.0, 12.0)
    assert math.isnan(STANDARD_MINIMUM.rise_time_s) and d.rise_time_s == 200e-9


# --- failsafe receivers ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("window_v", "failsafe", "open_", "short", "idle"),
    [
        # Source: TIA/EIA-485-A: a plain receiver is undefined between -200 mV and +200 mV, so 0 V is no 1.
        ((-0.2, 0.2), "none", False, False, False),
        # Source: Exar AN-207 and ST AN1690: an open/short failsafe holds the output high with floating or shorted
        # inputs; across a terminator the idle pair is a low-impedance 0 V it cannot tell from a signal.
        ((-0.2, 0.2), "open_short", True, True, False),
        # Source: TI E2E FAQ "What is fail-safe biasing": open, shorted and idle buses all present 0 V; a window
        # wholly below 0 V reads them high. Published idle-bus windows: -200 .. -10 mV and -200 .. -20 mV (from
        # memory, TI failsafe transceiver families), -200 .. -50 mV (from memory, the older "true failsafe" parts).
        ((-0.2, -0.01), "idle_bus", True, True, True),
        ((-0.2, -0.02), "idle_bus", True, True, True),
        ((-0.2, -0.05), "idle_bus", True, True, True),
    ],
)
def test_what_each_failsafe_window_covers(window_v, failsafe, open_, short, idle):
    spec = DeviceSpec(class_key=None, failsafe=failsafe, threshold_low_v=window_v[0], threshold_high_v=window_v[1])
    d = resolve_device(spec, "edge-100ns")
    assert (covers(d, "open"), covers(d, "short"), covers(d, "idle")) == (open_, short, idle)


def test_256_eighth_load_failsafe_transceivers_hold_without_bias():
    plan = _plan()
    bus = build_bus(plan)
    # Source: TIA-485-A: 32 UL per driver; 256 receivers of 1/8 UL (255 nodes and the driver's own) are 32.0 UL.
    (ul,) = check_unit_loads(bus)
    assert ul.value == pytest.approx(32.0, abs=1e-12) and ul.verdict is Verdict.HOLDS
    # Source: TI E2E FAQ on fail-safe biasing: an idle-bus failsafe receiver reads the terminated idle bus (0 V)
    # as a 1, so no bias network is needed.
    (idle,) = check_failsafe_bias(bus)
    assert idle.verdict is Verdict.HOLDS and idle.figure("receivers_needing_bias") == 0.0
    assert not size_bias(bus, 0.0).needed


def test_one_plain_receiver_on_the_failsafe_bus_breaks_the_idle_level_and_is_named():
    nodes = [{"name": f"n{i}", "position_m": 500.0 * i / 255} for i in range(1, 256)]
    nodes[99] = nodes[99] | {"name": "old-meter", "device": "slew-1200ns"}  # 1/8 UL, no failsafe
    bus = build_bus(_plan(nodes=nodes))
    (idle,) = check_failsafe_bias(bus)
    # Source: TIA/EIA-485-A: a +/-200 mV receiver needs 200 mV on the idle pair, which no bias gives here.
    assert idle.verdict is Verdict.BREAKS and idle.figure("receivers_needing_bias") == 1.0
    assert idle.limit == pytest.approx(0.2, abs=1e-12)
    assert "'old-meter' needs bias" in idle.detail and "failsafe receivers at 'old-meter'" in idle.fix
    # The bias advised is sized for that one receiver: its corner limit matches a bus where every receiver
    # needs bias no better, and is finite.
    sizing = size_bias(bus, 0.0)
    assert sizing.needed and 0.0 < sizing.corner_max_ohm < math.inf


def test_an_open_short_failsafe_is_enough_on_a_line_without_a_parallel_terminator():
    rc = [{"position_m": 500.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 10e-9}]
    nodes = [{"name": f"n{i}", "position_m": 50.0 * i} for i in range(1, 11)]
    plan = _plan(default_device="open-failsafe-full", nodes=nodes, terminations=rc)
    (idle,) = check_failsafe_bias(build_bus(plan))
    # Source: Exar AN-207: an open/short failsafe reads floating inputs high; an RC terminator is open at DC, so
    # the undriven pair floats.
    assert idle.verdict is Verdict.HOLDS
    terminated = _plan(default_device="open-failsafe-full", nodes=nodes)
    (idle,) = check_failsafe_bias(build_bus(terminated))
    assert idle.verdict is Verdict.BREAKS and "terminators across the pair defeat" in idle.detail


def test_a_failsafe_bus_checks_clean_end_to_end():
    report = check_plan(_plan(bit_rate_bps=19200))
    verdicts = {f.rule_id: f.verdict for f in report.findings if f.node is None}
    assert verdicts["bias.idle_level"] is Verdict.HOLDS and verdicts["load.unit_loads"] is Verdict.HOLDS
    assert not report.advice.plan.bias  # the advice adds no bias network


# --- mixed classes: loads and levels by hand ----------------------------------------------------------------------


def _mixed():
    return build_bus(
        _plan(
            default_device="edge-100ns",  # 1/4 UL
            driver={"name": "head", "device": "edge-10ns"},  # 1 UL, 4 V behind 40 Ohm
            nodes=[
                {"name": "a", "position_m": 100.0, "device": "slew-1200ns"},  # 1/8 UL
                {"name": "b", "position_m": 200.0, "device": {"unit_loads": 0.5}},
                {"name": "c", "position_m": 300.0},  # the default class, 1/4 UL
                {"name": "d", "position_m": 400.0, "device": {"class_key": None, "unit_loads": 2.0}},
            ],
            bias=[{"position_m": 0.0, "pull_up_ohm": 1000.0, "pull_down_ohm": 1000.0}],
        )
    )


def test_mixed_classes_sum_their_unit_loads():
    (ul,) = check_unit_loads(_mixed())
    # Source: TIA-485-A unit-load budget; hand sum: 1 (driver) + 1/8 + 1/2 + 1/4 + 2 = 3.875 UL, plus the 1 kOhm
    # bias counted at 12 kOhm / 1 kOhm = 12 UL (TI SLLA272 counts bias as unit loads): 15.875 UL.
    assert ul.value == pytest.approx(15.875, abs=1e-9)


def test_mixed_classes_load_the_driver_as_the_standard_counts_them():
    bus = _mixed()
    # Source: TIA-485-A test load read as 32 UL beside two 120 Ohm terminators (TI SLLA628), i.e. 12 kOhm per UL
    # across the pair: 120 || 120 || 12k/1 || 12k/0.125 || 12k/0.5 || 12k/0.25 || 12k/2 || 2 kOhm.
    hand = parallel_ohm(120.0, 120.0, 12e3, 96e3, 24e3, 48e3, 6e3, 2000.0)
    assert driver_load_ohm(bus) == pytest.approx(hand, rel=1e-12)
    (load,) = check_driver_load(bus)
    assert load.verdict is Verdict.HOLDS  # above the 51.7 Ohm of a fully loaded bus


def test_mixed_classes_dc_level_at_the_far_node_by_hand():
    bus = _mixed()
    # Source: hand DC calculation on a lossless pair (all points at one potential): the driver's 4 V behind 40 Ohm
    # into the load above (its own receiver left out while it drives) gives V_drv; the 5 V bias behind 2 kOhm into
    # the rest gives V_bias; the low state is V_drv - V_bias (superposition), held against 200 mV (TIA/EIA-485-A).
    rest = parallel_ohm(120.0, 120.0, 96e3, 24e3, 48e3, 6e3)
    load = parallel_ohm(rest, 2000.0)
    v_drv = 4.0 * load / (load + 40.0)
    rest_with_driver = parallel_ohm(rest, 40.0)
    v_bias = 5.0 * rest_with_driver / (rest_with_driver + 2000.0)
    findings = {f.node: f for f in check_receiver_voltage(bus)}
    np.testing.assert_allclose(findings["d"].value, v_drv - v_bias, rtol=1e-6)  # the solver joins points by 1 µΩ


# --- a unit load across the pair ---------------------------------------------------------------------------------


def test_one_unit_load_across_the_pair_is_stated_both_ways():
    d = resolve_device(DeviceSpec(class_key=None, unit_loads=1.0), "edge-100ns")
    # Source: TIA-485-A unit load: 1 mA at +12 V on one line, the other at 0 V: 12 kOhm from each line to the
    # receiver's reference. Across the pair the two lines' networks are in series, 24 kOhm; to a common-mode source
    # both lines in parallel, 6 kOhm. The budget counts 12 kOhm across the pair (the 54 Ohm test load as 32 UL
    # beside two 120 Ohm terminators, TI SLLA628).
    assert (d.differential_input_ohm, d.common_mode_input_ohm, d.budget_input_ohm) == (24e3, 6e3, 12e3)
    report = check_plan(_plan())
    ul = next(f for f in report.findings if f.rule_id == "load.unit_loads")
    assert "1 UL = 24 kΩ across the pair" in ul.detail and "12 kΩ across the pair" in ul.detail
