"""Unit-load budget and total driver load, against published limits and their arithmetic."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.loads import (
    bias_unit_loads,
    check_driver_load,
    check_unit_loads,
    driver_load_ohm,
    further_nodes,
    max_nodes,
    unit_load_total,
)
from pairline.engine.units import parallel_ohm


def _bus(n_nodes=2, unit_loads=1.0, standard="rs485", terminations=(0.0, 300.0), term_ohm=120.0, **extra):
    doc = {
        "standard": standard,
        "bit_rate_bps": 9600,
        "trunk_length_m": 300.0,
        "driver": {"transceiver": "edge-10ns"},  # 1 UL receiver in the driver's transceiver
        "nodes": [
            {"name": f"n{i}", "position_m": 300.0 * (i + 1) / n_nodes, "unit_loads": unit_loads} for i in range(n_nodes)
        ],
        "terminations": [{"position_m": p, "resistance_ohm": term_ohm} for p in terminations],
    }
    doc.update(extra)
    return build_bus(load_plan(doc))


def test_eighth_unit_load_receivers_allow_256_nodes():
    # Source: TI SLLA166 (RS-485 unit load and maximum number of bus connections): 1/8 UL -> 256 nodes.
    assert max_nodes(0.125) == 256


def test_half_and_quarter_unit_load_node_counts():
    # Source: TI SLLA166: 1/2 UL -> 64 nodes, 1/4 UL -> 128 nodes.
    assert max_nodes(0.5) == 64
    assert max_nodes(0.25) == 128


def test_bias_taking_20_unit_loads_leaves_96_eighth_load_nodes():
    # Source: TI SLLA272 The RS-485 Design Guide: bias consuming 20 UL leaves (32 - 20) / (1/8) = 96 nodes.
    assert further_nodes(32.0 - 20.0)["1/8 UL"] == 96


def test_a_12_kohm_bias_resistor_is_one_unit_load():
    # Source: TIA-485-A unit load: 1 mA with the line at +12 V, i.e. 12 kOhm.
    assert bias_unit_loads(pull_up_ohm=12_000.0, pull_down_ohm=12_000.0) == pytest.approx(1.0, rel=1e-12)


def test_a_600_ohm_bias_takes_20_unit_loads_and_leaves_96_eighth_load_nodes():
    # Source: TI SLLA272 The RS-485 Design Guide: a bias network taking 20 UL leaves 96 nodes of 1/8 UL;
    # 12 kOhm / 600 Ohm = 20 UL (common practice arithmetic).
    taken = bias_unit_loads(pull_up_ohm=600.0, pull_down_ohm=600.0)
    assert taken == pytest.approx(20.0, rel=1e-12)
    assert further_nodes(32.0 - taken)["1/8 UL"] == 96


def test_bias_counts_with_its_worse_line():
    # common practice: the 32 UL budget holds per line, and the smaller resistor loads its line more.
    assert bias_unit_loads(pull_up_ohm=1_200.0, pull_down_ohm=2_400.0) == pytest.approx(10.0, rel=1e-12)


def test_unit_load_total_counts_nodes_driver_receiver_and_bias():
    bus = _bus(n_nodes=4, unit_loads=0.5, bias={"pull_up_ohm": 12_000.0, "pull_down_ohm": 6_000.0})
    # common practice: 4 x 1/2 UL + the driver's 1 UL receiver + the bias's worse line, 12 kOhm / 6 kOhm = 2 UL.
    assert unit_load_total(bus) == pytest.approx(2.0 + 1.0 + 2.0, rel=1e-12)


def test_thirty_two_unit_loads_are_at_the_limit_and_33_break():
    # Source: TIA-485-A: a driver must drive 32 unit loads (31 nodes + the driver's own receiver here). Receiver
    # ratings are maxima, so with no resistor on the bus there is no tolerance to make it tight.
    full = check_unit_loads(_bus(n_nodes=31))[0]
    assert full.value == pytest.approx(32.0) and full.limit == 32.0
    assert full.verdict is Verdict.HOLDS
    over = check_unit_loads(_bus(n_nodes=32))[0]
    assert over.verdict is Verdict.BREAKS and "32 UL" in over.fix


def test_a_bias_that_only_its_tolerance_takes_over_the_budget_is_tight():
    # Source: TIA-485-A 32 UL; TI SLLA272 (the bias counts 12 kOhm / R unit loads); IEC 60063 E24 parts are 5 %:
    # 12 nodes + the driver = 13 UL; 12 kOhm / 640 Ohm = 18.75 UL -> 31.75 UL nominal, and 12 kOhm / 608 Ohm
    # (5 % low) = 19.74 UL -> 32.74 UL at the corner.
    bias = {"position_m": 0.0, "pull_up_ohm": 640.0, "pull_down_ohm": 640.0}
    finding = check_unit_loads(_bus(n_nodes=12, bias=bias))[0]
    assert finding.value == pytest.approx(31.75, abs=0.005)  # UL
    assert finding.verdict is Verdict.TIGHT
    assert "32.74 UL" in finding.detail and "-0.00" not in finding.fix


def test_rs422_allows_ten_receivers():
    # Source: TIA/EIA-422-B: one driver, up to 10 receivers.
    ten = check_unit_loads(_bus(n_nodes=10, standard="rs422", terminations=(300.0,), term_ohm=100.0))
    eleven = check_unit_loads(_bus(n_nodes=11, standard="rs422", terminations=(300.0,), term_ohm=100.0))
    # A count has no tolerance: ten receivers are within the limit, not near a tolerance edge.
    assert ten[0].limit == 10 and ten[0].verdict is Verdict.HOLDS
    assert eleven[0].verdict is Verdict.BREAKS and eleven[0].fix


def test_two_120_ohm_terminators_make_60_ohm():
    # Source: TIA-485-A design load arithmetic (common practice): 120 || 120 = 60 Ohm.
    assert parallel_ohm(120.0, 120.0) == pytest.approx(60.0, rel=1e-12)


def test_full_rs485_bus_loads_the_driver_with_51_7_ohm():
    bus = _bus(n_nodes=31)  # 31 x 12 kOhm + the driver's own 12 kOhm = 32 UL -> 375 Ohm
    # Source: TIA-485-A 54 Ohm design load = two 120 Ohm terminators and 32 UL; arithmetic 60 || 375 = 51.7 Ohm.
    assert driver_load_ohm(bus) == pytest.approx(51.7, abs=0.05)  # ohm, published to 0.1 Ohm
    finding = check_driver_load(bus)[0]
    # Source: TI SLLA628 RS-485 compliance note: the 54 Ohm test load stands for two 120 Ohm terminators and
    # 32 UL, so the limit is that full bus, 60 || 375 = 51.7 Ohm. The full bus sits on the limit: with 5 %
    # terminators (IEC 60063 E24) at their low end, 57 || 57 || 375 = 49.5 Ohm is below it, so it is tight.
    assert finding.limit == pytest.approx(51.7, abs=0.05)  # ohm
    assert finding.verdict is Verdict.TIGHT and finding.limit_kind == "min"


def test_half_loaded_rs485_bus_is_55_6_ohm_and_holds():
    bus = _bus(n_nodes=15)  # 16 UL -> 750 Ohm
    # common practice: 60 || 750 = 55.6 Ohm, above the 54 Ohm design load (TIA-485-A); with 5 % terminators
    # at their low end 57 || 57 || 750 = 52.5 Ohm, still above the 51.7 Ohm full bus.
    assert driver_load_ohm(bus) == pytest.approx(55.6, abs=0.05)  # ohm
    assert check_driver_load(bus)[0].verdict is Verdict.HOLDS


def test_rs422_ten_4k_receivers_with_100_ohm_is_80_ohm():
    bus = _bus(n_nodes=10, unit_loads=3.0, standard="rs422", terminations=(300.0,), term_ohm=100.0)
    # common practice (arithmetic on figures TIA/EIA-422-B states: a 100 Ohm generator test load, up to 10
    # receivers of at least 4 kOhm): 10 x 4 kOhm || 100 = 80 Ohm. The standard itself gives no total-load figure
    # here; the rule's limit is this arithmetic, and a bus exactly at it is tight (a 5 % low terminator is below).
    assert driver_load_ohm(bus) == pytest.approx(80.0, rel=1e-9)
    finding = check_driver_load(bus)[0]
    assert finding.limit == pytest.approx(80.0, rel=1e-6)
    assert finding.verdict is Verdict.TIGHT
    assert "arithmetic" in finding.source


def test_rs485_load_below_the_full_bus_breaks():
    # Source: TIA-485-A full bus 51.7 Ohm (two 120 Ohm and 32 UL) is the limit; below it the driver is loaded
    # beyond what the standard asks of it. common practice (arithmetic): 115 || 115 || 375 = 49.9 Ohm.
    broken = check_driver_load(_bus(n_nodes=31, term_ohm=115.0))[0]
    assert broken.value == pytest.approx(49.9, abs=0.05)  # ohm
    assert broken.verdict is Verdict.BREAKS


def test_terminating_sixteen_star_rays_gives_7_5_ohm_and_breaks():
    positions = tuple(float(p) for p in range(0, 320, 20))
    bus = _bus(n_nodes=1, terminations=positions)
    assert len(bus.plan.terminations) == 16
    # Source: B&B Electronics RS-422/485 application note (star topology); arithmetic 120 / 16 = 7.5 Ohm.
    assert parallel_ohm(*[t.resistance_ohm for t in bus.plan.terminations]) == pytest.approx(7.5, rel=1e-12)
    finding = check_driver_load(bus)[0]
    assert finding.verdict is Verdict.BREAKS
    assert "16" in finding.fix


def test_rc_terminators_count_at_the_edge_but_not_at_dc():
    doc_terms = [
        {"position_m": 0.0, "resistance_ohm": 120.0},
        {"position_m": 300.0, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 100e-9},
    ]
    doc = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 300.0,
        "nodes": [{"name": "a", "position_m": 300.0}],
        "terminations": doc_terms,
    }
    bus = build_bus(load_plan(doc))
    # common practice: 120 || 120 || 12 kOhm || 48 kOhm (driver 1/4 UL) at the edge; the RC branch open at DC.
    edge = parallel_ohm(120.0, 120.0, 12_000.0, 48_000.0)
    dc = parallel_ohm(120.0, 12_000.0, 48_000.0)
    assert driver_load_ohm(bus, edge=True) == pytest.approx(edge, rel=1e-12)
    assert driver_load_ohm(bus, edge=False) == pytest.approx(dc, rel=1e-12)
    finding = check_driver_load(bus)[0]
    assert finding.value == pytest.approx(edge, rel=1e-12)
    assert "DC view" in finding.detail


def test_further_nodes_per_class_from_a_spare_budget():
    # common practice: 32 - (3 + 1) = 28 UL spare -> 28, 56, 112, 224 nodes (TI SLLA166: 32 / UL per node).
    assert further_nodes(28.0) == {"1 UL": 28, "1/2 UL": 56, "1/4 UL": 112, "1/8 UL": 224}
