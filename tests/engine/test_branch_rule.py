"""Rule stub.branch: a branch is one stub to the trunk, as long as its longest run from the junction, held to the
stub limit of TI SLLA272 (stub delay at most a tenth of the driver's rise time), with the daisy chain among the
fixes; and the whole plan's other rules see each branch node as its run from the trunk."""

import pytest
from pairline.engine.check import check_plan
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.topology import arrival_times_s
from pairline.engine.segments import plan_parts

from tests.engine.topology_plans import with_spur

C0_M_PER_S = 299_792_458.0  # exact, SI definition of the metre
VF = 0.7
RISE_S = 100e-9  # the edge-100ns class's rise time
# TI SLLA272: stub delay <= t_r / 10, so L <= 0.1 t_r VF c0 = 2.0985 m here.
LIMIT_M = 0.1 * RISE_S * VF * C0_M_PER_S


def _plan(branch_m: float, nodes_along: tuple[float, ...], own_stub_m: float = 0.0, bit_rate: float = 115200.0):
    return {
        "format_version": 3,
        "bit_rate_bps": bit_rate,
        "trunk_length_m": 100.0,
        "cable": {"class_key": None, "z0_ohm": 120.0, "velocity_factor": VF, "resistance_ohm_per_m": 0.0},
        "default_device": "edge-100ns",
        "driver": {"name": "head"},
        "branches": [{"name": "spur", "junction_position_m": 50.0, "length_m": branch_m}],
        "nodes": [
            {"name": "tail", "position_m": 100.0},
            *(
                {"name": f"on-{i}", "branch": "spur", "position_m": x, "stub_length_m": own_stub_m}
                for i, x in enumerate(nodes_along)
            ),
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 100.0, "resistance_ohm": 120.0}],
        "bias": [{"position_m": 0.0, "pull_up_ohm": 680.0, "pull_down_ohm": 680.0}],
    }


def _branch_finding(doc):
    report = check_plan(load_plan(doc))
    (found,) = [f for f in report.findings if f.rule_id == "stub.branch"]
    return found, report


def test_the_limit_is_the_design_guide_s_stub_limit():
    found, _ = _branch_finding(_plan(1.0, (1.0,)))
    assert found.limit == pytest.approx(LIMIT_M, rel=1e-9) and found.branch == "spur" and found.node is None


@pytest.mark.parametrize(
    ("branch_m", "along", "own", "run_m"),
    [
        (1.5, (0.5, 1.5), 0.0, 1.5),  # the branch's own length
        (1.0, (0.4, 1.0), 0.8, 1.8),  # a node's way along plus its own stub
        (5.0, (1.0,), 0.0, 5.0),  # bare cable past the last node still reflects
    ],
)
def test_the_run_is_the_longest_cable_from_the_junction(branch_m, along, own, run_m):
    # Hand sums of the layouts above.
    found, _ = _branch_finding(_plan(branch_m, along, own))
    assert found.value == pytest.approx(run_m)


@pytest.mark.parametrize(
    ("run_fraction", "verdict"),
    [(0.85, Verdict.HOLDS), (0.95, Verdict.TIGHT), (1.5, Verdict.BREAKS)],
)
def test_verdict_bands(run_fraction, verdict):
    # Tight from limit / 1.1 (a run 10 % longer as built; common practice for routing allowances) to the limit.
    length = run_fraction * LIMIT_M
    found, _ = _branch_finding(_plan(length, (length,)))
    assert found.verdict is verdict


def test_a_long_branch_breaks_names_the_daisy_chain_and_shows_the_ringing():
    found, report = _branch_finding(_plan(8.0, (4.0, 8.0)))
    assert found.verdict is Verdict.BREAKS and found.value == pytest.approx(8.0)
    assert "daisy chain" in found.fix and "'on-0', 'on-1'" in found.fix
    assert "about 16 m more trunk" in found.fix
    # the detail states what the simulation measured at the branch's own receivers
    assert "Simulated at its receivers" in found.detail and "re-crossing" in found.detail
    # the shortened run the fix offers holds as built: limit / 1.1 = 1.91 m, shown rounded down to 1.9 m
    assert "<= 1.9 m" in found.fix


def test_a_fix_for_a_slower_edge_is_offered_only_within_30_percent_of_a_bit():
    # 8 m needs t_r >= 8 * 1.1 / (0.1 * 0.7 * c0) = 419 ns; 30 % of a bit at 115.2 kbit/s is 2.6 µs: offered.
    found, _ = _branch_finding(_plan(8.0, (8.0,)))
    assert "rise time" in found.fix
    # at 1 Mbit/s 30 % of a bit is 300 ns < 419 ns: not offered (TI SLLA628, transition <= 30 % of a bit)
    found, _ = _branch_finding(_plan(8.0, (8.0,), bit_rate=1e6))
    assert "rise time" not in found.fix


def test_a_branch_node_s_stub_rule_holds_its_own_stub_off_the_branch():
    report = check_plan(load_plan(_plan(1.5, (1.0,), own_stub_m=0.3)))
    (stub,) = [f for f in report.findings if f.rule_id == "stub.length" and f.node == "on-0"]
    assert stub.value == pytest.approx(0.3) and stub.verdict is Verdict.HOLDS
    report = check_plan(load_plan(_plan(4.0, (1.0,), own_stub_m=3.0)))
    (stub,) = [f for f in report.findings if f.rule_id == "stub.length" and f.node == "on-0"]
    assert stub.verdict is Verdict.BREAKS and "stub of node 'on-0' off branch 'spur'" in stub.fix


def test_the_advice_says_terminators_do_not_shorten_a_branch():
    report = check_plan(load_plan(_plan(8.0, (8.0,))))
    unmet = {u.rule_id: u for u in report.advice.unmet}
    assert "stub.branch" in unmet and "do not shorten a branch" in unmet["stub.branch"].why


def test_the_advised_plan_keeps_the_branches():
    doc = _plan(1.0, (1.0,))
    doc["bias"] = []  # terminated both ends, plain receivers: the idle bus needs bias (common practice)
    report = check_plan(load_plan(doc))
    advised = report.advice.plan
    assert [b.name for b in advised.branches] == ["spur"] and advised.nodes[1].branch == "spur"
    assert advised.nodes[1].position_m == 1.0  # along the branch, as typed
    assert advised.bias  # the advice adds the bias


def test_end_to_end_delay_counts_a_branch_node_s_run():
    # Hand: the master at 0 m; s2 sits 40 m along a branch leaving at 150 m (190 m of cable), a1 at 100 m on a
    # 0.5 m stub (100.5 m); both on the plan's cable, VF 0.78 (the 24 AWG 120 Ω class; TI SLLA272's tables).
    plan = load_plan(with_spur())
    times = arrival_times_s(plan, plan_parts(plan))
    assert times["s2"][0] - times["a1"][0] == pytest.approx((190.0 - 100.5) / (0.78 * C0_M_PER_S), rel=1e-9)
