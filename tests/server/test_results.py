"""What the server asks of the engine for a view: metrics for every receiver, waveforms for the drawn ones,
and the length-versus-rate limit behind the curve."""

import pytest
from pairline.engine.bus import build_bus
from pairline.engine.plan import load_plan
from pairline.server.results import check_and_simulate, length_rate_limit, worst_receiver

PLAN = {
    "bit_rate_bps": 19_200,
    "trunk_length_m": 300.0,
    "driver": {"name": "head", "transceiver": "slew-2500ns"},
    "nodes": [{"name": f"rx-{k}", "position_m": 60.0 * (k + 1), "stub_length_m": 0.5} for k in range(5)],
    "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 300.0, "resistance_ohm": 120.0}],
    "test_pattern": "0101100111010001",
}


def test_metrics_cover_every_receiver_and_waveforms_only_the_drawn_ones():
    checked = check_and_simulate(load_plan(PLAN), chosen_receiver="rx-0")
    assert [m.receiver for m in checked.metrics] == [f"rx-{k}" for k in range(5)]
    worst = worst_receiver(checked.metrics)
    assert checked.waveforms.receiver_names[0] == worst.receiver
    assert set(checked.waveforms.receiver_names) == {worst.receiver, "rx-0"}
    assert checked.waveforms.bits == PLAN["test_pattern"]
    rank = {f.node: f.verdict.rank for f in checked.report.findings if f.rule_id == "signal.integrity"}
    same = [m for m in checked.metrics if rank.get(m.receiver, 0) == rank.get(worst.receiver, 0)]
    assert all(rank.get(m.receiver, 0) <= rank.get(worst.receiver, 0) for m in checked.metrics)
    assert all(m.min_sample_v >= worst.min_sample_v for m in same)


def test_worst_receiver_is_the_one_whose_signal_finding_breaks_not_the_least_margin():
    import json
    from pathlib import Path

    samples = Path(__file__).resolve().parents[2] / "sample_buses"
    plan = load_plan(json.loads((samples / "print-hall-fast-drop.json").read_text()))
    expected = json.loads((samples / "expected" / "print-hall-fast-drop.json").read_text())["verdicts"]
    checked = check_and_simulate(plan)
    worst = worst_receiver(checked.metrics, checked.report.findings)
    # Source: the sample's stored verdicts: press-2 rings back through the threshold (breaks) although
    # another receiver samples a smaller voltage.
    assert expected[f"signal.integrity@{worst.receiver}"]["verdict"] == "breaks"
    least_margin = min(checked.metrics, key=lambda m: m.min_sample_v)
    assert least_margin.receiver != worst.receiver  # the case the margin alone got wrong
    assert checked.waveforms.receiver_names[0] == worst.receiver


def test_rate_rule_bounds_the_curve_at_high_rates():
    rates, lengths = length_rate_limit(build_bus(load_plan(PLAN)))
    at = {round(r): L for r, L in zip(rates, lengths, strict=True)}
    # Source: common practice, length (m) x rate (bit/s) <= 1e8: 1 Mbit/s -> 100 m, 10 Mbit/s -> 10 m.
    assert at[1_000_000] == pytest.approx(100.0, rel=1e-9)
    assert at[10_000_000] == pytest.approx(10.0, rel=1e-9)
    assert all(a >= b for a, b in zip(lengths, lengths[1:], strict=False))  # never longer at a higher rate


def test_cable_loss_bounds_the_curve_at_low_rates():
    rates, lengths = length_rate_limit(build_bus(load_plan(PLAN)))
    # Source: TIA/EIA-422-B Annex A, the length-versus-rate curve's 1200 m (4000 ft) plateau for 24 AWG pair below
    # about 90 kbit/s, which the loss rule applies (ASTM B258: this cable is 24 AWG, 84.2 Ohm/km per conductor).
    assert rates[0] < 90e3
    assert lengths[0] == pytest.approx(1200.0, rel=1e-9)


def test_without_a_pattern_the_page_uses_the_engines_default_and_its_figures():
    from pairline.engine.metrics import receiver_metrics

    plan = load_plan({k: v for k, v in PLAN.items() if k != "test_pattern"})
    checked = check_and_simulate(plan)
    assert checked.metrics == receiver_metrics(build_bus(plan))


def test_the_curve_is_the_engines_sweep_with_the_rules_beside_it():
    from pairline.engine.sweep import length_rate_curve

    plan = load_plan(PLAN)
    checked = check_and_simulate(plan)
    expected = length_rate_curve(build_bus(plan))
    assert list(checked.curve.bit_rate_bps) == list(expected.bit_rate_bps)
    assert list(checked.curve.max_length_m) == list(expected.max_length_m)
    assert checked.curve.plan_inside == (plan.trunk_length_m <= checked.curve.plan_max_length_m)
    assert checked.rule_bit_rate_bps.size == checked.rule_max_length_m.size > 10
