"""Ground and shield wiring: where each interface ground sits, the signal-ground conductor's current, isolated
nodes, the boundary the isolation fix names, and cautions that match the size of the offset."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.grounding import ground_state
from pairline.engine.plan import load_plan
from pairline.engine.rules.common_mode import RULE_ID, check_common_mode, isolation_advice
from pairline.engine.rules.ground_wiring import GROUND_RULE_ID, SHIELD_RULE_ID, check_ground_wiring

ENDS = [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 100.0, "resistance_ohm": 120.0}]


def _bus(nodes, grounding=None, **changes):
    doc = {
        "format_version": 2,
        "bit_rate_bps": 9600,
        "trunk_length_m": 100.0,
        "default_device": "slew-1200ns",
        "nodes": nodes,
        "terminations": ENDS,
        "bias": [{"position_m": 0.0, "pull_up_ohm": 680.0, "pull_down_ohm": 680.0}],
    }
    if grounding is not None:
        doc["grounding"] = grounding
    doc.update(changes)
    return build_bus(load_plan(doc))


def _by_node(findings, rule_id=RULE_ID):
    return {f.node: f for f in findings if f.rule_id == rule_id}


CONDUCTOR = {"signal_ground": "conductor", "ground_conductor_ohm_per_m": 0.1, "ground_series_ohm": 100.0}


def test_a_signal_ground_conductor_with_100_ohm_resistors_by_hand():
    nodes = [
        {"name": "mid", "position_m": 50.0, "ground_offset_v": 3.0, "device": "isolated-eighth-slew"},
        {"name": "far", "position_m": 100.0, "ground_offset_v": 10.0},
    ]
    state = ground_state(_bus(nodes, CONDUCTOR))
    # Source: hand DC calculation (Ohm's law): the earths 0 V and 10 V drive I = 10 V / (100 + 10 + 100) Ohm
    # = 47.62 mA through both series resistors and 100 m of 0.1 Ohm/m conductor; the conductor sits at 4.762 V at
    # the driver, 5.238 V at 'far' and 5.000 V halfway, where the isolated node takes its reference (it draws no
    # current); each earthed interface stays on its own earth.
    current_a = 10.0 / 210.0
    assert state.reference_v == pytest.approx([0.0, 5.0, 10.0], abs=1e-9)
    assert state.series_current_a == pytest.approx([current_a, 0.0, -current_a], rel=1e-9)
    assert state.series_power_w[0] == pytest.approx(current_a**2 * 100.0, rel=1e-9)  # 0.227 W
    (ground, _) = check_ground_wiring(_bus(nodes, CONDUCTOR))
    findings = check_common_mode(_bus(nodes, CONDUCTOR))
    assert ground.value == pytest.approx(0.2268, abs=1e-4) and ground.verdict is Verdict.HOLDS
    cm = _by_node(findings)
    # Source: Intersil RS-485 budget, V_OC 2.5 V and 2.5 V noise in -7 .. +12 V: 7 V of offset allowed: the
    # isolated node 5 V from the driver's ground holds, 'far' 10 V away breaks.
    assert cm["mid"].value == pytest.approx(5.0, abs=1e-9) and cm["mid"].verdict is Verdict.HOLDS
    assert cm["far"].value == pytest.approx(10.0, abs=1e-9) and cm["far"].verdict is Verdict.BREAKS


def test_without_a_conductor_an_isolated_receiver_floats_with_the_bus():
    nodes = [{"name": "far", "position_m": 100.0, "ground_offset_v": 11.0, "device": "isolated-eighth-slew"}]
    cm = _by_node(check_common_mode(_bus(nodes)))
    # Source: common practice (TI SLLA272): an isolated interface has no path to its local earth, so the bus's
    # common mode is its own and the 11 V between earths falls across the isolation barrier.
    assert cm["far"].value == pytest.approx(0.0, abs=1e-12) and cm["far"].verdict is Verdict.HOLDS


def test_an_isolated_talker_settles_where_the_receivers_pull_it():
    nodes = [
        {"name": "near", "position_m": 10.0, "device": {"unit_loads": 1.0}},
        {"name": "hut", "position_m": 90.0, "ground_offset_v": 6.0, "device": {"unit_loads": 0.5}},
    ]
    bus = _bus(nodes, driver={"name": "head", "device": "isolated-eighth-slew"})
    state = ground_state(bus)
    # Source: hand DC calculation: a floating driver's common mode settles where the receivers' common-mode input
    # currents cancel, sum G_k (V - e_k) = 0 with G = 1 / (6 kOhm / UL) (TIA-485-A unit load, both lines to the
    # receiver's reference): V = (1 x 0 V + 0.5 x 6 V) / 1.5 = 2 V.
    assert state.talker_reference_v(0) == pytest.approx(2.0, rel=1e-12)
    assert state.offsets_v([0])[0] == pytest.approx([0.0, -2.0, 4.0], abs=1e-12)


def _two_buildings(offset_v):
    nodes = [{"name": f"shop-{k}", "position_m": 10.0 * k} for k in range(1, 5)]
    nodes += [{"name": f"store-{k}", "position_m": 80.0 + 10.0 * k, "ground_offset_v": offset_v} for k in range(3)]
    return _bus(nodes)


def test_the_fix_names_the_boundary_not_every_node():
    cm = _by_node(check_common_mode(_two_buildings(11.0)))
    fix = cm["store-1"].fix
    # Source: common practice (TI SLLA272, B&B RS-422/485 application note): isolate where the earths differ; the
    # nodes on the driver's earth need none.
    assert cm["store-0"].verdict is Verdict.BREAKS and cm["shop-1"].verdict is Verdict.HOLDS
    assert "boundary between earths" in fix and "'store-0', 'store-1', 'store-2'" in fix
    assert "shop-" not in fix and "the 5 on the shared earth need none" in fix


def test_tens_of_volts_between_earths_is_a_fault_to_find_first():
    fix = _by_node(check_common_mode(_two_buildings(30.0)))["store-0"].fix
    # common practice: a few volts between outlets of one installation is usual; tens of volts is a fault.
    assert "itself a fault to investigate" in fix and "before any isolation is chosen" in fix
    assert fix.index("fault") < fix.index("Isolate")


def test_mains_level_offsets_stop_first_and_name_reinforced_isolation():
    findings = check_common_mode(_two_buildings(230.0))
    fix = _by_node(findings)["store-0"].fix
    # Source: IEC 61140 extra-low voltage 50 V a.c.: above it, stop; above 30 Vrms a barrier needs reinforced
    # insulation (TI "Our isolators are certified"; IEC 60747-17 reinforced, a 5 kVrms class), or fibre.
    assert fix.startswith("DANGER") and "stop" in fix
    assert "reinforced" in fix and "fibre" in fix and "basic" not in isolation_advice(230.0)
    # An isolated node with basic insulation across that difference breaks on its own barrier.
    nodes = [{"name": "store", "position_m": 100.0, "ground_offset_v": 230.0, "device": "isolated-eighth-slew"}]
    store = _by_node(check_common_mode(_bus(nodes)))["store"]
    assert store.verdict is Verdict.BREAKS and "basic insulation" in store.fix and "reinforced" in store.fix


def test_shield_earthed_at_both_ends_across_different_earths_is_tight():
    nodes = [{"name": "far", "position_m": 100.0, "ground_offset_v": 4.0}]
    both = [f for f in check_ground_wiring(_bus(nodes, {"shield": "both_ends"})) if f.rule_id == SHIELD_RULE_ID]
    one = [f for f in check_ground_wiring(_bus(nodes, {"shield": "one_end"})) if f.rule_id == SHIELD_RULE_ID]
    # Source: B&B RS-422/485 application note: a shield earthed at both ends across different earths carries
    # their loop current; earthed at one end it carries none.
    assert both[0].verdict is Verdict.TIGHT and both[0].value == pytest.approx(4.0)
    assert one[0].verdict is Verdict.HOLDS


def test_a_conductor_without_series_resistors_between_different_earths_breaks():
    nodes = [{"name": "far", "position_m": 100.0, "ground_offset_v": 2.0}]
    grounding = CONDUCTOR | {"ground_series_ohm": 0.0}
    (ground,) = [f for f in check_ground_wiring(_bus(nodes, grounding)) if f.rule_id == GROUND_RULE_ID]
    # Source: TI SLLA272: a 100 Ohm resistor in series with each node's ground connection limits the loop current.
    assert ground.verdict is Verdict.BREAKS and "100 Ω resistor in series" in ground.fix
