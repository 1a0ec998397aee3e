"""Rule "signal.integrity" (one verdict per receiver from the simulated waveform, with computed fixes) and
rule "signal.confirms" (the simulation set against the stub and unterminated-line rules of thumb)."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.signal import check_signal_integrity
from pairline.engine.units import m_from_ft


def _by(findings, rule_id):
    return [f for f in findings if f.rule_id == rule_id]


def _terminated_bus():
    return build_bus(
        load_plan(
            {
                "bit_rate_bps": 115_200,
                "trunk_length_m": 300.0,
                "nodes": [
                    {"name": "pump-1", "position_m": 100.0, "stub_length_m": 1.0},
                    {"name": "pump-2", "position_m": 300.0},
                ],
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": 120.0},
                    {"position_m": 300.0, "resistance_ohm": 120.0},
                ],
            }
        )
    )


def test_well_terminated_bus_holds_with_eye_of_twice_the_settled_level():
    bus = _terminated_bus()
    findings = check_signal_integrity(bus)
    integrity = _by(findings, "signal.integrity")
    assert [f.node for f in integrity] == ["pump-1", "pump-2"]
    assert all(f.verdict is Verdict.HOLDS for f in integrity)
    # Source: closed form, DC divider at the far end: V_oc * R_far / (R_s + R_loop + R_far) seen from a
    # 120 Ohm near-end terminator: R_in = 120 || (R_loop + 120 || 12k || 48k), R_loop = 2 * 0.0842 * 300 Ohm.
    r_loop = 2 * 0.0842 * 300.0
    r_far = 1.0 / (1 / 120.0 + 1 / 12_000.0)
    r_in = 1.0 / (1 / 120.0 + 1 / 48_000.0 + 1 / 12_000.0 + 1 / (r_loop + r_far))
    v_far = 4.0 * r_in / (40.0 + r_in) * r_far / (r_loop + r_far)
    # The headline of a holding receiver is its lowest sampled level: on a clean, settled waveform that is the
    # settled level; 5 % for the skin-effect tail.
    assert integrity[1].title.startswith("Simulated waveform: lowest sampled level")
    assert integrity[1].value == pytest.approx(v_far, rel=0.05)


def test_long_stub_with_fast_edges_breaks_and_confirms_the_stub_rule():
    bus = build_bus(
        load_plan(
            {
                "bit_rate_bps": 5e6,
                "trunk_length_m": 60.0,
                "driver": {"transceiver": "edge-10ns"},
                "nodes": [
                    {"name": "drop", "position_m": 30.0, "stub_length_m": 40.0},
                    {"name": "end", "position_m": 60.0},
                ],
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": 120.0},
                    {"position_m": 60.0, "resistance_ohm": 120.0},
                ],
            }
        )
    )
    findings = check_signal_integrity(bus)
    drop = next(f for f in _by(findings, "signal.integrity") if f.node == "drop")
    assert drop.verdict is Verdict.BREAKS
    assert "shorten the stub of 'drop'" in drop.fix
    confirm = next(f for f in _by(findings, "signal.confirms") if f.node == "drop")
    # Source: TI SLLA272 stub rule, 0.1 * 10 ns * 0.78 * c0 = 0.23 m, far below 40 m: the rule BREAKS.
    assert "confirms the stub rule's BREAKS" in confirm.detail


def test_published_unterminated_example_is_confirmed():
    # Source: B&B Electronics RS-422/485 application note: 2000 ft at 9600 bit/s, VF 0.66, needs no terminator.
    length_m = m_from_ft(2000.0)
    bus = build_bus(
        load_plan(
            {
                "bit_rate_bps": 9600,
                "trunk_length_m": length_m,
                "cable": {"class_key": "pair-22awg-120"},
                "driver": {"transceiver": "slew-2500ns"},
                "nodes": [{"name": "far", "position_m": length_m}],
            }
        )
    )
    findings = check_signal_integrity(bus)
    confirm = next(f for f in _by(findings, "signal.confirms") if "Unterminated" in f.title)
    assert confirm.verdict is not Verdict.BREAKS
    assert "confirms the rule" in confirm.detail
    assert all(f.verdict is not Verdict.BREAKS for f in _by(findings, "signal.integrity"))


def _transceiver_bus(n_nodes: int):
    return build_bus(
        load_plan(
            {
                "bit_rate_bps": 9600,
                "trunk_length_m": 400.0,
                "driver": {"transceiver": "slew-2500ns"},
                "nodes": [
                    {
                        "name": f"t-{i:03d}",
                        "position_m": 400.0 * (i + 1) / n_nodes,
                        "role": "transceiver",
                        "unit_loads": 0.125,
                        "stub_length_m": 3.0 if i == 7 else 0.5,
                    }
                    for i in range(n_nodes)
                ],
                "terminations": [
                    {"position_m": 0.0, "resistance_ohm": 120.0},
                    {"position_m": 400.0, "resistance_ohm": 120.0},
                ],
            }
        )
    )


def test_every_driver_is_simulated_on_a_32_node_bus():
    from pairline.engine.rules.signal import MAX_DRIVERS_ALL, drivers_to_simulate

    bus = _transceiver_bus(32)
    # Pairline's own simulation budget (MAX_DRIVERS_ALL, a cost choice, not a limit of TIA/EIA-485-A): every node
    # that may drive is simulated up to 33 drivers, which covers 32 transceivers and the primary driver.
    assert MAX_DRIVERS_ALL == 33
    assert drivers_to_simulate(bus) == bus.drivers_possible and len(bus.drivers_possible) == 33


def test_large_bus_samples_the_ends_and_the_longest_stub():
    from pairline.engine.rules.signal import MAX_DRIVERS_SAMPLED, drivers_to_simulate

    bus = _transceiver_bus(100)
    picked = drivers_to_simulate(bus)
    assert len(picked) == MAX_DRIVERS_SAMPLED
    # common practice: the worst reflections come from drivers at the cable ends and on the longest stubs.
    assert {"driver", "t-000", "t-099", "t-007"} <= set(picked)
