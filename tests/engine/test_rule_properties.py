"""Properties of the rules over many generated plans (hypothesis, derandomised so every run is the same)."""

import copy
import json
import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pairline.engine.bus import build_bus
from pairline.engine.capacity import receiver_capacity
from pairline.engine.check import check_plan, report_to_dict
from pairline.engine.design import COVERED_RULES, apply_changes, best_design
from pairline.engine.findings import Verdict
from pairline.engine.library import CABLES, TRANSCEIVERS
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.engine.rules.cable_ends import end_tolerance_m
from pairline.engine.rules.loads import check_unit_loads, spare_unit_loads, unit_load_total
from pairline.engine.rules.stubs import check_stubs
from pairline.engine.rules.termination import placement_verdict
from pairline.engine.ruleset import RULES

SETTINGS = settings(
    derandomize=True,
    database=None,
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)
UNIT_LOADS = [0.125, 0.25, 0.5, 1.0, 2.0]


def zero_or(low: float, high: float, either_sign: bool = False) -> st.SearchStrategy[float]:
    """0, or a magnitude from low to high: the plan model refuses non-zero values below a physical floor
    (1 mm, 1 mV), as no one lays out a 1e-300 m stub."""
    sides = [st.floats(low, high)] + ([st.floats(-high, -low)] if either_sign else [])
    return st.one_of(st.just(0.0), *sides)


@st.composite
def plan_docs(draw, min_terminations=0, min_length_m=5.0, max_stub_m=20.0, max_length_m=4000.0, max_nodes=12):
    standard = draw(st.sampled_from(["rs485", "rs422"]))
    length_m = draw(st.floats(min_length_m, max_length_m))
    n_nodes = draw(st.integers(1, max_nodes))
    nodes = [
        {
            "name": f"node-{i}",
            "position_m": draw(zero_or(1e-2, 1.0)) * length_m,
            "stub_length_m": draw(zero_or(1e-3, max_stub_m)),
            "unit_loads": draw(st.sampled_from(UNIT_LOADS)),
            "role": "receiver" if standard == "rs422" else draw(st.sampled_from(["receiver", "transceiver"])),
            "ground_offset_v": draw(zero_or(1e-3, 10.0, either_sign=True)),
        }
        for i in range(n_nodes)
    ]
    terminations = []
    for _ in range(draw(st.integers(min_terminations, 4))):
        kind = draw(st.sampled_from(["parallel", "rc"]))
        term = {
            "position_m": draw(st.sampled_from([0.0, 1.0, draw(zero_or(1e-2, 1.0))])) * length_m,
            "kind": kind,
            "resistance_ohm": draw(st.floats(50.0, 200.0)),
        }
        if kind == "rc":
            term["capacitance_f"] = draw(st.floats(1e-9, 1e-6))
        terminations.append(term)
    bias = None
    if draw(st.booleans()):
        r = draw(st.floats(200.0, 50_000.0))
        bias = {"position_m": draw(zero_or(1e-2, 1.0)) * length_m, "pull_up_ohm": r, "pull_down_ohm": r}
    return {
        "standard": standard,
        "bit_rate_bps": draw(st.sampled_from([1200.0, 9600.0, 115_200.0, 1e6, 10e6])),
        "trunk_length_m": length_m,
        "cable": {"class_key": draw(st.sampled_from(sorted(CABLES)))},
        "driver": {
            "position_m": draw(zero_or(1e-2, 1.0)) * length_m,
            "stub_length_m": draw(zero_or(1e-3, 5.0)),
            "transceiver": draw(st.sampled_from(sorted(TRANSCEIVERS))),
        },
        "nodes": nodes,
        "terminations": terminations,
        "bias": bias,
    }


def _bus(doc):
    return build_bus(load_plan(doc))


@SETTINGS
@given(doc=plan_docs(), unit_loads=st.sampled_from(UNIT_LOADS), where=zero_or(1e-2, 1.0))
def test_adding_a_receiver_never_lowers_the_unit_load_total(doc, unit_loads, where):
    before = _bus(doc)
    more = copy.deepcopy(doc)
    more["nodes"].append({"name": "added", "position_m": where * doc["trunk_length_m"], "unit_loads": unit_loads})
    after = _bus(more)
    assert unit_load_total(after) >= unit_load_total(before)
    assert spare_unit_loads(after) <= spare_unit_loads(before)
    worst_before = max(f.verdict.rank for f in check_unit_loads(before))
    worst_after = max(f.verdict.rank for f in check_unit_loads(after))
    assert worst_after >= worst_before


@SETTINGS
@given(doc=plan_docs(min_terminations=1), pick=st.integers(0, 3), where=st.floats(0.0, 1.0))
def test_moving_a_terminator_to_mid_bus_never_improves_placement(doc, pick, where):
    before = _bus(doc)
    length = doc["trunk_length_m"]
    tol = end_tolerance_m(before)
    moved = copy.deepcopy(doc)
    index = pick % len(doc["terminations"])
    # Somewhere strictly inside the trunk, further than the end tolerance from both ends.
    moved["terminations"][index]["position_m"] = tol + 0.01 + where * (length - 2 * tol - 0.02)
    after = _bus(moved)
    assert placement_verdict(after).rank >= placement_verdict(before).rank


@SETTINGS
@given(doc=plan_docs(), pick=st.integers(0, 11), extra_m=zero_or(1e-3, 50.0))
def test_a_longer_stub_never_improves_the_stub_verdict(doc, pick, extra_m):
    index = pick % len(doc["nodes"])
    longer = copy.deepcopy(doc)
    longer["nodes"][index]["stub_length_m"] = min(100.0, doc["nodes"][index]["stub_length_m"] + extra_m)
    name = doc["nodes"][index]["name"]
    before = next(f for f in check_stubs(_bus(doc)) if f.node == name)
    after = next(f for f in check_stubs(_bus(longer)) if f.node == name)
    assert after.verdict.rank >= before.verdict.rank


# Checking a plan simulates it twice (as laid out and as advised): fewer, smaller examples keep this fast.
CHECK_SETTINGS = settings(SETTINGS, max_examples=20)
TERMINATION_RULES = {"termination.placement", "termination.value", "termination.rc", "termination.may_omit"}


@CHECK_SETTINGS
@given(doc=plan_docs(min_length_m=0.1, max_stub_m=100.0, max_length_m=1500.0, max_nodes=8))
def test_any_valid_plan_checks_and_its_advice_holds_when_built(doc):
    report = check_plan(doc)
    for f in report.findings:
        assert f.source and f.criterion
        assert f.verdict is Verdict.HOLDS or f.fix
        assert f.node is None or f"'{f.node}'" not in f.title  # the node is shown beside the title, not in it
        for number in (f.value, f.limit):
            assert number is None or math.isfinite(number)
    json.dumps(report_to_dict(report), allow_nan=False)
    advice = report.advice
    # The change list applied to the plan gives the advised plan, which is a valid plan like any other.
    assert apply_changes(report.plan, advice.changes) == advice.plan
    assert load_plan(plan_to_dict(advice.plan)) == advice.plan
    # Terminators can always be placed and sized: the advised plan never breaks a termination rule.
    advised_breaks = {f.rule_id for f in advice.findings if f.verdict is Verdict.BREAKS}
    assert not advised_breaks & TERMINATION_RULES
    # Every rule the advised plan still breaks is stated, with why and what can meet it.
    unmet = {u.rule_id: u for u in advice.unmet}
    assert set(unmet) == advised_breaks
    assert all(u.why and u.remedies for u in unmet.values())

    # The advice never leaves more of the rules it covers breaking than the plan had.
    def covered_breaks(findings):
        return sum(f.verdict is Verdict.BREAKS for f in findings if f.rule_id in COVERED_RULES)

    assert covered_breaks(advice.findings) <= covered_breaks(report.findings)


def _scaled(doc, factor):
    """Every length of the plan (trunk, positions, stubs) times factor; a stub stays at least the plan's 1 mm
    floor for a non-zero length."""
    out = copy.deepcopy(doc)
    out["trunk_length_m"] *= factor
    for part in [out["driver"], *out["nodes"], *out["terminations"], *([out["bias"]] if out["bias"] else [])]:
        for key in ("position_m", "stub_length_m"):
            if key in part:
                scaled = min(part[key] * factor, 100.0 if key == "stub_length_m" else out["trunk_length_m"])
                part[key] = max(scaled, 1e-3) if part[key] > 0 else 0.0
    return out


def _limits(doc):
    """Every reported limit and figure of the rules that need no simulation, the highest bit rate, the longest
    path at any rate, and how many more receivers fit (on the advised design)."""
    bus = build_bus(load_plan(doc))
    findings = [f for rule in RULES[:-1] for f in rule(bus)]
    numbers = {}
    for f in findings:
        key = (f.rule_id, f.node, f.title)
        numbers[key + ("limit",)] = f.limit
        for name, value in f.figures:
            numbers[key + (name,)] = value
    rates = [r for f in findings if (r := f.figure("max_bit_rate_bps")) is not None]
    design = best_design(bus)
    advised = build_bus(design.plan)
    capacity = receiver_capacity(advised, design.findings)
    return numbers, min(rates), {c.label: c.count for c in capacity.classes}


@settings(SETTINGS, max_examples=30)
@given(doc=plan_docs(min_length_m=1.0, max_length_m=2000.0, max_nodes=6), relative=st.sampled_from([1e-7, -1e-7]))
def test_a_tiny_change_of_length_makes_a_tiny_change_of_every_limit(doc, relative):
    # common practice: every limit Pairline reports is continuous in the plan's lengths, so a change of 1e-7 of
    # every length moves each by far less than 0.1 % and never turns a number into "none" (or back); a count of
    # further receivers moves by at most one.
    numbers, rate, counts = _limits(doc)
    numbers2, rate2, counts2 = _limits(_scaled(doc, 1.0 + relative))
    assert math.isfinite(rate) and math.isfinite(rate2)
    assert rate2 == pytest.approx(rate, rel=1e-3)
    for key in numbers.keys() & numbers2.keys():
        a, b = numbers[key], numbers2[key]
        assert (a is None) == (b is None), key
        if a is not None and math.isfinite(a):
            assert b == pytest.approx(a, rel=1e-3, abs=1e-9), key
    assert counts.keys() == counts2.keys()
    assert all(abs(counts[k] - counts2[k]) <= 1 for k in counts)
