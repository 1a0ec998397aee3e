"""Stub length vs driver rise time: the 1/10 rule's published table and the per-node findings."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.findings import Verdict
from pairline.engine.plan import load_plan
from pairline.engine.rules.stubs import (
    check_stubs,
    max_bit_rate_for_stubs_bps,
    max_stub_length_m,
    rise_time_needed_s,
)


def _bus(stubs_m, transceiver="edge-100ns", bit_rate_bps=115_200, driver_stub_m=0.0):
    doc = {
        "bit_rate_bps": bit_rate_bps,
        "trunk_length_m": 100.0,
        "cable": {"class_key": "pair-24awg-120"},  # VF 0.78
        "driver": {"transceiver": transceiver, "stub_length_m": driver_stub_m},
        "nodes": [
            {"name": f"node-{i}", "position_m": 10.0 * (i + 1), "stub_length_m": s} for i, s in enumerate(stubs_m)
        ],
    }
    return build_bus(load_plan(doc))


# Source: TI SLLA272 The RS-485 Design Guide, stub-length rule L <= 0.1 t_r VF c0 and its table at VF 0.78;
# the tolerance is half a unit of the table's last printed digit.
@pytest.mark.parametrize(
    ("rise_time_s", "published_m", "abs_m"),
    [
        (2e-9, 0.05, 0.005),
        (3e-9, 0.07, 0.005),
        (10e-9, 0.23, 0.005),
        (25e-9, 0.6, 0.05),
        (100e-9, 2.34, 0.005),
        (120e-9, 2.8, 0.05),
    ],
)
def test_stub_limit_matches_published_table_at_vf_078(rise_time_s, published_m, abs_m):
    assert max_stub_length_m(rise_time_s, 0.78) == pytest.approx(published_m, abs=abs_m)


def test_slew_limited_driver_allows_long_stubs():
    # common practice: the 1/10 rule (TI SLLA272) with t_r 1.2 us, VF 0.66 -> 23.7 m.
    assert max_stub_length_m(1.2e-6, 0.66) == pytest.approx(23.7, abs=0.05)  # metres


def test_rise_time_needed_inverts_the_limit():
    # Source: closed form of TI SLLA272's rule; c0 = 299 792 458 m/s exact.
    assert rise_time_needed_s(max_stub_length_m(60e-9, 0.78), 0.78) == pytest.approx(60e-9, rel=1e-12)


def test_one_finding_per_node_and_the_driver_with_its_limit():
    bus = _bus([0.5, 1.0, 3.0])
    findings = check_stubs(bus)
    assert [f.node for f in findings] == ["driver", "node-0", "node-1", "node-2"]
    # Source: TI SLLA272 table, 100 ns at VF 0.78 -> 2.34 m.
    assert all(f.limit == pytest.approx(2.34, abs=0.005) for f in findings)
    assert [f.verdict for f in findings] == [Verdict.HOLDS, Verdict.HOLDS, Verdict.HOLDS, Verdict.BREAKS]
    assert all(f.rule_id == "stub.length" and f.unit == "m" and f.source for f in findings)


def test_tight_band_is_the_stub_ten_percent_longer_as_built():
    # common practice: a stub as built runs up to 10 % longer than drawn, so it is tight from 1/1.1 = 90.9 % of
    # the limit (TI SLLA272: 0.1 t_r VF c0) and breaks beyond the limit.
    limit = max_stub_length_m(100e-9, 0.78)
    findings = check_stubs(_bus([0.90 * limit, 0.92 * limit, 0.99 * limit, 1.01 * limit]))[1:]
    assert [f.verdict for f in findings] == [Verdict.HOLDS, Verdict.TIGHT, Verdict.TIGHT, Verdict.BREAKS]


def test_fix_names_node_shorter_stub_and_slower_driver():
    finding = check_stubs(_bus([3.0]))[1]
    # Source: TI SLLA272 rule at VF 0.78: 100 ns allows 2.34 m; a fix that holds as built (10 % longer, common
    # practice) asks for 2.34 / 1.1 = 2.13 m (shown rounded down, 2.1 m), or t_r >= 3.3 / (0.1 * 0.78 * c0) = 141 ns.
    assert finding.fix == "Shorten the stub of node 'node-0' to <= 2.1 m, or use a driver with >= 141 ns rise time."


def test_fix_refuses_a_driver_too_slow_for_the_bit_rate():
    # 20 m needs ~855 ns, more than 30 % of a bit at 1 Mbit/s (TI SLLA628: transition <= 30 % of a bit).
    finding = check_stubs(_bus([20.0], bit_rate_bps=1e6))[1]
    assert finding.verdict is Verdict.BREAKS
    assert "more than 30 % of a bit" in finding.fix and "node-0" in finding.fix


def test_driver_stub_is_checked_too():
    findings = check_stubs(_bus([0.1], driver_stub_m=5.0))
    assert findings[0].node == "driver" and findings[0].verdict is Verdict.BREAKS


def test_stub_view_of_the_highest_bit_rate():
    # Source: TI SLLA628 (transition <= 30 % of a bit): a 100 ns driver -> 3 Mbit/s when stubs are short.
    assert max_bit_rate_for_stubs_bps(_bus([0.5])) == pytest.approx(3e6, rel=1e-9)
    # A 3 m stub needs 128 ns (TI SLLA272 rule), so 0.3 / 128 ns ~ 2.34 Mbit/s.
    assert max_bit_rate_for_stubs_bps(_bus([3.0])) == pytest.approx(0.3 / rise_time_needed_s(3.0, 0.78), rel=1e-9)
