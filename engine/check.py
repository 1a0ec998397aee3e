"""Check a bus plan in one pass: every rule's findings, the simulation they ran, the advised plan and its own
check, and a summary read off that check.

plan -> bus -> rules (engine.ruleset, one simulation) -> advice (engine.advice: the advised plan, checked in
full) -> verified fixes (engine.verify) -> capacity and summary (engine.capacity, engine.summary). Nothing is
solved twice: the server renders from the PlanReport.
"""

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

from pairline.engine import ENGINE_VERSION
from pairline.engine.advice import Advice, advise
from pairline.engine.bus import Bus, build_bus
from pairline.engine.capacity import Capacity, receiver_capacity
from pairline.engine.design import PlanChange
from pairline.engine.devices import FAILSAFE_STATES, UNIT_LOAD_TEXT, ResolvedDevice, covers
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import BusInputError, BusPlan, Problem, cross_field_problems, load_plan, plan_to_dict
from pairline.engine.rules.signal import Simulation
from pairline.engine.ruleset import RULES, run_rules
from pairline.engine.summary import BiasAdvice, BomItem, PlanSummary, TerminatorAdvice, summarise
from pairline.engine.verify import verified_findings


@dataclass(frozen=True, slots=True)
class PlanReport:
    plan: BusPlan
    bus: Bus
    findings: tuple[Finding, ...]  # the plan as laid out, fixes verified against the advice
    simulation: Simulation  # what the signal rule simulated for the plan as laid out
    advice: Advice  # the advised plan, its change list and its own check
    capacity: Capacity  # how many more receivers, on the advised plan
    summary: PlanSummary
    verdict: Verdict
    engine_version: str


def check_plan(plan: BusPlan | dict[str, Any], *, simulate_advice: bool = True) -> PlanReport:
    """Run every rule on a plan, advise, and summarise. A dict is validated first; input that cannot be modelled
    raises BusInputError. simulate_advice=False is the quick form for a verdict while typing (engine.advice.advise):
    the same verdict, advised plan, change list and spare capacity, without simulating the advised plan, and with
    the tolerance corners analysed only when the verdict needs them (engine.ruleset.run_rules, quick): when another
    finding is tight or breaks already, receivers tight only at their worst corner read as holding. Nor does it
    simulate a terminated bus without its terminators (a what-if finding that holds either way)."""
    if not isinstance(plan, BusPlan):
        plan = load_plan(plan)
    if not plan.is_one_bus:
        raise BusInputError([_not_one_bus(plan)])
    problems = cross_field_problems(plan_to_dict(plan))
    if problems:
        raise BusInputError(problems)
    bus = build_bus(plan)
    run = run_rules(bus, quick=not simulate_advice)
    advice = advise(run, simulate=simulate_advice)
    if plan.branches:  # the advice edits terminators and bias only: put them on the plan as wired
        advised = {"terminations": advice.plan.terminations, "bias": advice.plan.bias}
        advice = dataclasses.replace(advice, plan=plan.model_copy(update=advised))
    capacity = receiver_capacity(advice.run.bus, advice.findings)
    findings = verified_findings(run, advice)
    return PlanReport(
        plan=plan,
        bus=bus,
        findings=findings,
        simulation=run.simulation,
        advice=advice,
        capacity=capacity,
        summary=summarise(bus, advice, capacity),
        verdict=worst([f.verdict for f in findings]),
        engine_version=ENGINE_VERSION,
    )


def _not_one_bus(plan: BusPlan) -> Problem:
    """A plan of several parts goes to engine.network.check_network, which checks each part with check_plan."""
    field = "four_wire" if plan.four_wire is not None else "segments"
    return Problem(
        field,
        "Plan shape",
        {"segments": len(plan.segments), "repeaters": len(plan.repeaters), "four_wire": plan.four_wire is not None},
        {"rule": "one bus here; a plan of segments or pairs is checked part by part (engine.network.check_network)"},
        "This plan has several parts (segments joined by repeaters, or a four-wire pair set); it is checked part by "
        "part as a whole plan, not as one bus.",
    )


# --- JSON -------------------------------------------------------------------------------------------------


def _json_float(value: float | None) -> float | None:
    """Finite floats pass; inf and nan (an open circuit, no limit) become null."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def finding_to_dict(finding: Finding) -> dict[str, Any]:
    return {
        "rule_id": finding.rule_id,
        "title": finding.title,
        "verdict": finding.verdict.value,
        "value": _json_float(finding.value),
        "limit": _json_float(finding.limit),
        "unit": finding.unit,
        "node": finding.node,
        "criterion": finding.criterion,
        "source": finding.source,
        "fix": finding.fix,
        "detail": finding.detail,
        "limit_kind": finding.limit_kind,
        "figures": {name: _json_float(value) for name, value in finding.figures},
        "branch": finding.branch,
    }


def change_to_dict(change: PlanChange) -> dict[str, Any]:
    """One change of the advice: what, where, from what to what, why, and the rules it moves."""
    return {
        "part": change.part,
        "where": change.where,
        "from": change.before_text,
        "to": change.after_text,
        "text": change.text,
        "why": change.why,
        "rule_ids": list(change.rule_ids),
        "removed": [t.model_dump(mode="json") for t in change.removed],
        "added": [t.model_dump(mode="json") for t in change.added],
    }


def capacity_to_dict(capacity: Capacity) -> dict[str, Any]:
    return {
        "text": capacity.text,
        "spare_unit_loads": _json_float(capacity.spare_unit_loads),
        "classes": [
            {"label": c.label, "unit_loads": c.unit_loads, "count": c.count, "limited_by": c.limited_by}
            for c in capacity.classes
        ],
    }


def devices_to_list(bus: Bus) -> list[dict[str, Any]]:
    """Every distinct device on the bus with every value filled in, and the nodes that carry it."""
    by_device: dict[ResolvedDevice, list[str]] = {}
    for name, device in bus.devices.items():
        by_device.setdefault(device, []).append(name)
    return [
        {
            "key": d.key or None,
            "label": d.label,
            "unit_loads": d.unit_loads,
            "budget_input_ohm": d.budget_input_ohm,
            "differential_input_ohm": d.differential_input_ohm,
            "common_mode_input_ohm": d.common_mode_input_ohm,
            "failsafe": d.failsafe,
            "threshold_low_v": d.threshold_low_v,
            "threshold_high_v": d.threshold_high_v,
            "covers": {state: covers(d, state) for state in FAILSAFE_STATES},
            "open_circuit_v": d.open_circuit_v,
            "source_ohm": d.source_ohm,
            "rise_time_s": _json_float(d.rise_time_s),
            "input_capacitance_f": d.input_capacitance_f,
            "common_mode_min_v": d.common_mode_min_v,
            "common_mode_max_v": d.common_mode_max_v,
            "isolated": d.isolated,
            "isolation_rating_vrms": d.isolation_rating_vrms,
            "isolation_grade": d.isolation_grade,
            "source": d.source,
            "nodes": names,
        }
        for d, names in by_device.items()
    ]


def advice_to_dict(advice: Advice, *, with_findings: bool = True) -> dict[str, Any]:
    """The advised plan (a plan document like any other), its change list and its own check: its verdict and
    counts, and (with_findings) every finding."""
    findings = advice.findings
    out = {
        "plan": plan_to_dict(advice.plan),
        "changes": [change_to_dict(c) for c in advice.changes],
        "verdict": advice.verdict.value,
        "simulated": advice.simulated,
        "counts": {v.value: sum(1 for f in findings if f.verdict is v) for v in Verdict},
        "unmet": [
            {"rule_id": u.rule_id, "nodes": list(u.nodes), "why": u.why, "remedies": list(u.remedies), "text": u.text}
            for u in advice.unmet
        ],
    }
    if with_findings:
        out["findings"] = [finding_to_dict(f) for f in findings]
    return out


def report_to_dict(report: PlanReport, *, advice_findings: bool = True) -> dict[str, Any]:
    """The report as plain JSON types: strings, finite floats or null, ints, lists and dicts. advice_findings
    False leaves out the advised plan's own findings (its verdict and counts stay)."""
    s = report.summary
    counts = {v.value: sum(1 for f in report.findings if f.verdict is v) for v in Verdict}
    return {
        "engine_version": report.engine_version,
        "verdict": report.verdict.value,
        "counts": counts,
        "capacity": capacity_to_dict(report.capacity),
        "plan": plan_to_dict(report.plan),
        "resolved": {
            "cable": {
                "label": report.bus.cable.label,
                "z0_ohm": report.bus.cable.z0_ohm,
                "velocity_factor": report.bus.cable.velocity_factor,
                "resistance_ohm_per_m": report.bus.cable.resistance_ohm_per_m,
                "capacitance_f_per_m": report.bus.cable.capacitance_f_per_m,
                "source": report.bus.cable.source,
            },
            "driver": {
                "label": report.bus.driver.label,
                "rise_time_s": report.bus.driver.rise_time_s,
                "open_circuit_v": report.bus.driver.open_circuit_v,
                "source_ohm": report.bus.driver.source_ohm,
                "unit_loads": report.bus.driver.unit_loads,
                "source": report.bus.driver.source,
            },
            "devices": devices_to_list(report.bus),
            "unit_load": UNIT_LOAD_TEXT,
        },
        "findings": [finding_to_dict(f) for f in report.findings],
        "summary": {
            "terminators": [
                {
                    "position_m": t.position_m,
                    "kind": t.kind,
                    "resistance_ohm": t.resistance_ohm,
                    "capacitance_f": _json_float(t.capacitance_f),
                    "power_rating_w": t.power_rating_w,
                }
                for t in s.terminators
            ],
            "bias": [
                {
                    "position_m": b.position_m,
                    "pull_up_ohm": b.pull_up_ohm,
                    "pull_down_ohm": b.pull_down_ohm,
                    "supply_v": b.supply_v,
                    "idle_v": _json_float(b.idle_v),
                    "idle_corner_v": _json_float(b.idle_corner_v),
                    "power_rating_w": b.power_rating_w,
                }
                for b in s.bias
            ],
            "bias_note": s.bias_note,
            "max_stub_m": {name: _json_float(v) for name, v in s.max_stub_m.items()},
            "spare_unit_loads": _json_float(s.spare_unit_loads),
            # RS-422 counts receivers, not unit loads: the receivers one driver may still feed (negative: over).
            "spare_receivers": int(s.spare_unit_loads) if report.plan.standard == "rs422" else None,
            "further_nodes": dict(s.further_nodes),
            "capacity": capacity_to_dict(report.capacity),
            "max_bit_rate_bps": _json_float(s.max_bit_rate_bps),
            "max_path_m": _json_float(s.max_path_m),
            "path_m": _json_float(s.path_m),
            "rate_note": s.rate_note,
            "bom": [
                {"item": b.item, "value": b.value, "quantity": b.quantity, "rating": b.rating, "note": b.note}
                for b in s.bom
            ],
        },
        "advice": advice_to_dict(report.advice, with_findings=advice_findings),
    }


__all__ = [
    "RULES",
    "BiasAdvice",
    "BomItem",
    "PlanReport",
    "PlanSummary",
    "TerminatorAdvice",
    "advice_to_dict",
    "change_to_dict",
    "check_plan",
    "finding_to_dict",
    "report_to_dict",
]
