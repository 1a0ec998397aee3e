"""Four-wire (full-duplex) plans: the transmit pair is one driver to many receivers, the return pair many drivers to
the master's receiver; each is checked as the bus it is."""

import copy

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.check import check_plan
from pairline.engine.network import advised_plan, check_network
from pairline.engine.plan import load_plan
from pairline.engine.rules.loads import check_unit_loads
from pairline.engine.segments import plan_parts

from tests.engine.topology_plans import four_wire


def _key(findings):
    return [(f.rule_id, f.node, f.verdict, f.value, f.limit) for f in findings]


def test_the_transmit_pair_is_an_rs422_plan_of_the_same_layout():
    doc = four_wire("rs422")
    # The same layout written by hand as an RS-422 plan of one driver: the slaves are receivers, the one
    # terminator sits at the far end (B&B Electronics RS-422/485 application note, four-wire; National AN-903: an
    # RS-422 driver that never tri-states terminates its own end).
    rs422 = {
        "format_version": 2,
        "title": "Four wires (transmit pair)",
        "standard": "rs422",
        "bit_rate_bps": 38400,
        "trunk_length_m": 200.0,
        "default_device": "edge-100ns",
        "driver": {"name": "master", "position_m": 0.0},
        "nodes": [{"name": f"slave-{i}", "position_m": 50.0 * i, "stub_length_m": 0.5} for i in range(1, 5)],
        "terminations": [{"position_m": 200.0, "resistance_ohm": 120.0}],
    }
    report = check_network(doc, simulate_advice=False)
    transmit = report.parts[0]
    assert transmit.part.kind == "transmit_pair"
    alone = check_plan(rs422, simulate_advice=False)
    assert _key(transmit.report.findings) == _key(alone.findings)
    assert transmit.report.verdict is alone.verdict


def test_the_return_pair_has_every_replying_slave_talking_to_the_masters_receiver():
    parts = plan_parts(load_plan(four_wire("rs422")))
    back = parts[1].plan
    assert parts[1].kind == "return_pair" and back.standard == "rs485"
    # The farthest replying slave is the return pair's primary talker; the master listens there.
    assert back.driver.name == "slave-4" and [n.name for n in back.nodes] == ["master", "slave-1", "slave-2", "slave-3"]
    assert back.talkers() == ["slave-4", "slave-1", "slave-2", "slave-3"]
    budget = check_unit_loads(build_bus(back))[0]
    # Source: TIA-485-A unit load; TI SLLA272 (a bias network is 12 kOhm / R in unit loads). By hand: five
    # quarter-UL transceivers (four slaves, the master's receiver) = 1.25 UL, plus 12 kOhm / 560 Ohm = 21.43 UL.
    assert budget.value == pytest.approx(1.25 + 12_000.0 / 560.0, rel=1e-9)


def test_slaves_that_never_reply_leave_the_return_pair_out():
    doc = four_wire("rs485")
    for node in doc["nodes"]:
        node["may_drive"] = False
    report = check_network(doc, simulate_advice=False)
    assert [p.part.kind for p in report.parts] == ["transmit_pair"]
    assert [f.rule_id for f in report.findings] == ["pairs.return_idle"]


def test_a_return_pair_without_bias_or_terminators_is_checked_as_its_own_bus():
    doc = four_wire("rs485")
    doc["four_wire"]["return_bias"] = []
    report = check_network(doc, simulate_advice=False)
    back = report.parts[1].report
    idle = next(f for f in back.findings if f.rule_id == "bias.idle_level")
    # Source: TI SLLA272: a terminated RS-485 pair whose drivers are all off idles at 0 V, which a plain
    # +/-200 mV receiver (the master's) cannot read: the return pair idles between replies and needs bias.
    assert idle.verdict.value == "breaks"
    advised = advised_plan(report)
    assert advised.four_wire is not None and advised.four_wire.return_bias == back.advice.plan.bias
    assert advised.terminations == report.parts[0].report.advice.plan.terminations


def test_ground_offsets_on_the_return_pair_are_against_its_talker():
    doc = copy.deepcopy(four_wire("rs485"))
    doc["nodes"][3]["ground_offset_v"] = 3.0
    back = plan_parts(load_plan(doc))[1]
    # slave-4 (3 V against the master) is the return pair's reference: the master sits 3 V below it.
    assert back.ground_reference_v == 3.0
    assert {n.name: n.ground_offset_v for n in back.plan.nodes}["master"] == -3.0
