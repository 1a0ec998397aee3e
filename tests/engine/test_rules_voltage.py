"""Rule "signal.dc_level": DC differential level at each receiver through the cable's loop resistance."""

import numpy as np
import pytest
from pairline.engine.bus import build_bus
from pairline.engine.dc import DcElement, loop_resistance_ohm, solve_dc_cases_v, solve_dc_v
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.voltage import RECEIVER_THRESHOLD_V, check_receiver_voltage, driven_levels

TINY_UL = 1e-6  # a receiver that draws nothing, to compare with load-free hand formulas


def _bus(**changes):
    doc = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 1200.0,
        "driver": {"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": 1.0, "source_ohm": 0.0},
        "nodes": [{"name": "far", "position_m": 1200.0, "unit_loads": TINY_UL}],
        "terminations": [{"position_m": 1200.0, "resistance_ohm": 120.0}],
    }
    doc.update(changes)
    return build_bus(load_plan(doc))


def test_loop_resistance_of_a_kilometre_of_24_awg():
    # Source: ASTM B258, 24 AWG copper 84.2 Ohm/km per conductor; a pair's loop is both conductors.
    assert loop_resistance_ohm(1000.0, 0.0842) == pytest.approx(168.4, rel=1e-4)


def test_1200_m_of_24_awg_into_120_ohm_keeps_0_373_of_the_drive():
    # common practice: V_rx = V_drv R_far / (R_far + R_loop), 24 AWG 1200 m loop 202 Ohm into 120 Ohm -> 0.373.
    expected_ratio = 0.373
    levels = driven_levels(_bus())
    assert levels.driver_share_v[0] == pytest.approx(expected_ratio, abs=5e-4)  # published to 3 digits


def test_ladder_matches_the_hand_divider_with_a_real_receiver_and_driver():
    # Source: closed form: (R_T || R_in) / (R_s + R_loop + R_T || R_in) with R_in = 12 kOhm (one unit load,
    # TIA/EIA-485-A) and R_loop = 2 * 0.0842 Ohm/m * 1200 m (ASTM B258).
    r_load = 1.0 / (1 / 120.0 + 1 / 12_000.0)
    expected_v = 4.0 * r_load / (40.0 + 202.08 + r_load)
    bus = _bus(
        driver={"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": 4.0, "source_ohm": 40.0},
        nodes=[{"name": "far", "position_m": 1200.0, "unit_loads": 1.0}],
    )
    assert driven_levels(bus).driver_share_v[0] == pytest.approx(expected_v, rel=1e-9)


def test_library_driver_meets_the_1_5_v_into_54_ohm_requirement():
    # Source: TIA/EIA-485-A driver output: |V_OD| >= 1.5 V into a 54 Ohm load.
    required_v = 1.5
    bus = _bus(
        driver={"transceiver": "edge-100ns"},
        cable={"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0},
        terminations=[{"position_m": 1200.0, "resistance_ohm": 54.0}],
    )
    assert driven_levels(bus).driver_share_v[0] >= required_v


def test_receiver_threshold_is_200_mv():
    # Source: TIA/EIA-485-A receiver input sensitivity +/-200 mV.
    assert pytest.approx(0.200, abs=1e-12) == RECEIVER_THRESHOLD_V


@pytest.mark.parametrize(
    ("open_circuit_v", "level_v", "verdict"),
    [
        # common practice (divider): V_oc x 120 / (120 + 202.08) over 1200 m of 24 AWG loop (2 x 84.2 Ohm/km,
        # ASTM B258): 0.5 V -> 0.186 V, under the 200 mV threshold of TIA/EIA-485-A: breaks.
        (0.5, 0.1863, Verdict.BREAKS),
        # 0.6 V -> 0.224 V nominal; at the corner (0.57 V, 114 Ohm, loop 1.23 x 202.08 Ohm) 0.179 V: tight.
        (0.6, 0.2236, Verdict.TIGHT),
        # 0.8 V -> 0.298 V nominal; 0.239 V at the corner: holds.
        (0.8, 0.2981, Verdict.HOLDS),
    ],
)
def test_the_200_mv_threshold_decides_the_dc_level_verdict(open_circuit_v, level_v, verdict):
    bus = _bus(
        driver={"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": open_circuit_v, "source_ohm": 0.0},
        cable={"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0842},
    )
    finding = check_receiver_voltage(bus)[0]
    assert finding.value == pytest.approx(level_v, abs=2e-4)  # V, hand value to 4 digits
    assert finding.verdict is verdict


def test_one_finding_per_receiver_and_a_weak_far_end_breaks():
    # Source: TIA/EIA-485-A threshold 200 mV; 0.2 V drive through 202 Ohm into 120 Ohm gives 0.0746 V (divider).
    bus = _bus(
        driver={"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": 0.2, "source_ohm": 0.0},
        nodes=[
            {"name": "near", "position_m": 0.0, "unit_loads": TINY_UL},
            {"name": "far", "position_m": 1200.0, "unit_loads": TINY_UL},
        ],
    )
    found = {f.node: f for f in check_receiver_voltage(bus)}
    assert set(found) == {"near", "far"}
    assert found["far"].verdict is Verdict.BREAKS
    assert found["far"].value == pytest.approx(0.2 * 0.373, rel=2e-3)
    assert "far" in found["far"].fix and "AWG" in found["far"].fix
    assert all(f.rule_id == "signal.dc_level" and f.source for f in found.values())


def test_mid_trunk_driver_feeds_both_ends_alike():
    # Source: symmetry of the circuit (driver at the centre, equal terminators and cable to both ends).
    bus = _bus(
        trunk_length_m=1000.0,
        driver={"transceiver": "edge-100ns", "position_m": 500.0},
        nodes=[{"name": "west", "position_m": 0.0}, {"name": "east", "position_m": 1000.0}],
        terminations=[{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 1000.0, "resistance_ohm": 120.0}],
    )
    west, east = driven_levels(bus).driver_share_v
    assert west == pytest.approx(east, rel=1e-9)


def test_bias_network_weakens_one_driven_state_by_superposition():
    # Source: superposition on a lossless wire (closed form). Bias share: V_S R_p / (R_up + R_down + R_p) with
    # R_p = source || terminators = 120 || 120 || 120 = 40 Ohm; driver share: V_OC R_q / (R_s + R_q) with
    # R_q = 120 || 120 || (R_up + R_down) = 58.25 Ohm. The weaker driven state is their difference.
    lossless = {"class_key": None, "z0_ohm": 120.0, "velocity_factor": 0.78, "resistance_ohm_per_m": 0.0}
    bus = _bus(
        cable=lossless,
        driver={"transceiver": None, "rise_time_s": 1e-6, "open_circuit_v": 1.0, "source_ohm": 120.0},
        terminations=[{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 1200.0, "resistance_ohm": 120.0}],
        bias={"position_m": 0.0, "pull_up_ohm": 1000.0, "pull_down_ohm": 1000.0, "supply_v": 5.0},
    )
    levels = driven_levels(bus)
    bias_share_v = 5.0 * 40.0 / (2000.0 + 40.0)
    r_q = 1.0 / (1 / 120.0 + 1 / 120.0 + 1 / 2000.0)
    driver_share_v = 1.0 * r_q / (120.0 + r_q)
    assert levels.bias_share_v[0] == pytest.approx(bias_share_v, rel=1e-6)
    assert levels.driver_share_v[0] == pytest.approx(driver_share_v, rel=1e-6)
    assert levels.weak_state_v[0] == pytest.approx(driver_share_v - bias_share_v, rel=1e-6)


def test_chain_solve_agrees_with_a_dense_nodal_solve_with_stub_nodes():
    # Source: an independent second route: Kirchhoff's current law written as a full nodal matrix with every
    # stub end as its own node, solved by numpy's LU solve.
    elements = [
        DcElement("drv", 30.0, 2.0, 40.0, 4.0),
        DcElement("a", 0.0, 0.0, 120.0),
        DcElement("b", 55.0, 7.5, 12_000.0),
        DcElement("c", 55.0, 1.0, 3_000.0),
        DcElement("bias", 80.0, 0.0, 1_000.0, 5.0),
        DcElement("d", 100.0, 3.0, 120.0),
    ]
    r_per_m = 0.0842
    got = solve_dc_v(elements, 100.0, r_per_m, np.array([[e.source_v] for e in elements]))[:, 0]

    trunk = sorted({0.0, 100.0, *(e.position_m for e in elements)})
    stubbed = [j for j, e in enumerate(elements) if e.stub_m > 0]
    node_of = [
        len(trunk) + stubbed.index(j) if j in stubbed else trunk.index(e.position_m) for j, e in enumerate(elements)
    ]
    n = len(trunk) + len(stubbed)
    g = np.zeros((n, n))
    i_in = np.zeros(n)

    def link(a, b, r):
        g[a, a] += 1 / r
        g[b, b] += 1 / r
        g[a, b] -= 1 / r
        g[b, a] -= 1 / r

    for k in range(len(trunk) - 1):
        link(k, k + 1, 2 * r_per_m * (trunk[k + 1] - trunk[k]))
    for j, e in enumerate(elements):
        if e.stub_m > 0:
            link(trunk.index(e.position_m), node_of[j], 2 * r_per_m * e.stub_m)
        g[node_of[j], node_of[j]] += 1 / e.resistance_ohm
        i_in[node_of[j]] += e.source_v / e.resistance_ohm
    want = np.linalg.solve(g, i_in)[node_of]
    np.testing.assert_allclose(got, want, rtol=1e-9)


def test_a_far_transceiver_talking_sets_the_weakest_level():
    # Source: closed-form ladder: the west transceiver (1 V, 0 Ohm) drives 500 m of 24 AWG (84.2 Ohm loop,
    # ASTM B258) to the listening primary driver (12 kOhm, one unit load), then 500 m more into 120 Ohm.
    r_half = 2 * 0.0842 * 500.0
    z_mid = 1.0 / (1 / 12_000.0 + 1 / (r_half + 120.0))
    expected_v = z_mid / (r_half + z_mid) * 120.0 / (r_half + 120.0)
    bus = _bus(
        trunk_length_m=1000.0,
        driver={
            "transceiver": None,
            "rise_time_s": 1e-6,
            "open_circuit_v": 1.0,
            "source_ohm": 0.0,
            "position_m": 500.0,
        },
        nodes=[
            {"name": "west", "position_m": 0.0, "unit_loads": TINY_UL, "role": "transceiver"},
            {"name": "east", "position_m": 1000.0, "unit_loads": TINY_UL},
        ],
        terminations=[{"position_m": 1000.0, "resistance_ohm": 120.0}],
    )
    east = next(f for f in check_receiver_voltage(bus) if f.node == "east")
    assert east.value == pytest.approx(expected_v, rel=1e-6)
    assert "'west' talks" in east.detail


def test_a_long_chain_swept_in_o_n_agrees_with_a_dense_nodal_solve():
    # Source: an independent second route: Kirchhoff's current law as a full nodal matrix, solved by numpy's LU
    # solve, for a ladder long enough (1500 taps, three cases that differ) that the engine sweeps the chain.
    rng = np.random.default_rng(7)
    n_taps, r_per_m, length_m = 1500, 0.0842, 749.5
    elements = [DcElement(f"t{k}", 0.5 * k, 0.0, float(rng.uniform(100.0, 20_000.0))) for k in range(n_taps)]
    resistance = np.tile([e.resistance_ohm for e in elements], (3, 1))
    resistance[:, 0] = 40.0
    resistance[1, 700] = 120.0  # a terminator in one case only: each case has its own matrix
    resistance[2, 1499] = 120.0
    sources = np.zeros((3, n_taps))
    sources[:, 0] = [4.0, 4.0, 2.5]
    got = solve_dc_cases_v(elements, resistance, sources, length_m, r_per_m)
    link = 1.0 / (2.0 * r_per_m * 0.5)
    for case in range(3):
        g = np.diag(1.0 / resistance[case]) + np.diag(np.full(n_taps, 2.0 * link))
        g[0, 0] -= link  # the chain's ends have one neighbour each
        g[-1, -1] -= link
        idx = np.arange(n_taps - 1)
        g[idx, idx + 1] = -link
        g[idx + 1, idx] = -link
        want = np.linalg.solve(g, sources[case] / resistance[case])
        np.testing.assert_allclose(got[case], want, rtol=1e-9, atol=1e-12)  # V
