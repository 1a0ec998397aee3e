"""Check a plan of any shape: every part (engine.segments) checked as the stand-alone bus it is, and the findings
only the whole plan shows (engine.rules.topology) on top.

plan -> parts -> check_plan per part (rules, advice, summary, each part's own simulation) -> plan-level findings.
The verdict is the worst of everything. A plan of one bus is its own only part, with no plan-level finding.
"""

from dataclasses import dataclass
from typing import Any

from pairline.engine import ENGINE_VERSION
from pairline.engine.check import PlanReport, check_plan, finding_to_dict, report_to_dict
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import BusInputError, BusPlan, cross_field_problems, load_plan, plan_to_dict
from pairline.engine.rules.topology import check_topology
from pairline.engine.segments import PlanPart, plan_parts


@dataclass(frozen=True, slots=True)
class PartReport:
    part: PlanPart
    report: PlanReport


@dataclass(frozen=True, slots=True)
class NetworkReport:
    plan: BusPlan
    parts: tuple[PartReport, ...]  # outward from the master: segments, or the transmit pair then the return pair
    findings: tuple[Finding, ...]  # what only the whole plan shows
    verdict: Verdict  # the worst of the plan-level findings and of every part's
    engine_version: str


def check_network(plan: BusPlan | dict[str, Any], *, simulate_advice: bool = True) -> NetworkReport:
    """Check every part of a plan as its own bus (engine.check.check_plan, simulate_advice as there) and the plan
    as a whole. A dict is validated first; input that cannot be modelled raises BusInputError."""
    if not isinstance(plan, BusPlan):
        plan = load_plan(plan)
    problems = cross_field_problems(plan_to_dict(plan))
    if problems:
        raise BusInputError(problems)
    parts = plan_parts(plan)
    reports = tuple(PartReport(p, check_plan(p.plan, simulate_advice=simulate_advice)) for p in parts)
    findings = tuple(check_topology(plan, parts))
    verdicts = [f.verdict for f in findings] + [r.report.verdict for r in reports]
    return NetworkReport(plan, reports, findings, worst(verdicts), ENGINE_VERSION)


def part_to_dict(part: PartReport) -> dict[str, Any]:
    p = part.part
    return {
        "kind": p.kind,
        "name": p.name,
        "label": p.label,
        "feeder": p.feeder,
        "hops": list(p.hops),
        "ground_reference_v": p.ground_reference_v,
        "verdict": part.report.verdict.value,
        "report": report_to_dict(part.report),
    }


def network_to_dict(report: NetworkReport) -> dict[str, Any]:
    """The whole plan's report as plain JSON types: the plan-level verdict and findings on top, then every part's
    own report (engine.check.report_to_dict)."""
    every = [*report.findings, *(f for p in report.parts for f in p.report.findings)]
    return {
        "engine_version": report.engine_version,
        "verdict": report.verdict.value,
        "counts": {v.value: sum(1 for f in every if f.verdict is v) for v in Verdict},
        "plan": plan_to_dict(report.plan),
        "findings": [finding_to_dict(f) for f in report.findings],
        "parts": [part_to_dict(p) for p in report.parts],
    }


def advised_plan(report: NetworkReport) -> BusPlan:
    """The whole plan as advised: every part's advised terminators and bias (engine.advice changes nothing else)
    put back where they belong: the plan's own trunk, a further segment, or the four-wire return pair."""
    plan = report.plan
    update: dict[str, Any] = {}
    segments = list(plan.segments)
    for part_report in report.parts:
        part, advised = part_report.part, part_report.report.advice.plan
        rows = {"terminations": list(advised.terminations), "bias": list(advised.bias)}
        if part.kind == "return_pair" and plan.four_wire is not None:
            update["four_wire"] = plan.four_wire.model_copy(
                update={"return_terminations": rows["terminations"], "return_bias": rows["bias"]}
            )
        elif part.feeder is None:
            update |= rows
        else:
            i = next(k for k, s in enumerate(segments) if s.name == part.name)
            segments[i] = segments[i].model_copy(update=rows)
    if segments:
        update["segments"] = segments
    return plan.model_copy(update=update)


def advised_verdict(report: NetworkReport) -> Verdict:
    """The advised plan's verdict: every part's advice checked, with the plan-level findings (terminators and bias
    move none of them)."""
    return worst([f.verdict for f in report.findings] + [p.report.advice.verdict for p in report.parts])
