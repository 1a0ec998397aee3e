"""The readable report of a plan of several parts (segments joined by repeaters, or four-wire pairs): the
verdict over everything and the plan-level findings on top, then each part as its own bus, in the words of the
one-bus report (server.cli)."""

from pairline.engine.devices import UNIT_LOAD_TEXT
from pairline.engine.findings import Verdict
from pairline.engine.network import NetworkReport, PartReport, advised_verdict
from pairline.server.cli import (
    SAFETY_NOTE,
    advice_head,
    branch_lines,
    capacity_line,
    change_lines,
    finding_lines,
    lengths_in_feet,
    quantity_text,
    report_body,
    verdict_line,
)
from pairline.server.wording import driven_text, shape_text


def part_head(part_report: PartReport) -> str:
    part, plan = part_report.part, part_report.report.plan
    label = part.label[:1].upper() + part.label[1:]
    return (
        f"{label} ({driven_text(part)}; trunk {plan.trunk_length_m:g} m, {len(plan.nodes)} node(s), cable "
        f"{part_report.report.bus.cable.label})"
    )


def network_text(report: NetworkReport, path: str = "") -> str:
    """The whole plan's report: the verdict over everything, the plan-level findings, then every part (its verdict
    per rule and per node, fixes, advice and summary) under its own heading."""
    plan = report.plan
    every = [*report.findings, *(f for p in report.parts for f in p.report.findings)]
    nodes = sum(len(p.report.plan.nodes) for p in report.parts)
    out = [
        f"Pairline check: {plan.title or '(untitled plan)'}" + (f"  [{path}]" if path else ""),
        f"  {plan.standard.upper().replace('RS', 'RS-')}, {quantity_text(plan.bit_rate_bps, 'bit/s')}; "
        f"{shape_text(report)}; {nodes} connection(s) to the pairs in all",
        f"  {UNIT_LOAD_TEXT}.",
        "",
        verdict_line("Overall", report.verdict, every),
        f"Advised plan: {advised_verdict(report).value.upper()} (every part with its advised terminators and bias)",
        "",
    ]
    if report.findings:
        out.append(verdict_line("The plan as a whole", _worst(report), report.findings))
        for f in report.findings:
            out += finding_lines(f, "  ")
            if f.detail and f.verdict is Verdict.HOLDS:
                out.append(f"          {f.detail}")
        out.append("")
    for part_report in report.parts:
        out.append(part_head(part_report))
        out += branch_lines(part_report.report.plan)
        out += ["  " + line if line else "" for line in report_body(part_report.report, "Verdict")]
        out.append("")
    out.append(SAFETY_NOTE)
    text = "\n".join(out)
    return lengths_in_feet(text) if plan.display_units == "imperial" else text


def _worst(report: NetworkReport) -> Verdict:
    ranks = [f.verdict for f in report.findings]
    return max(ranks, key=lambda v: v.rank, default=Verdict.HOLDS)


def network_advise_text(report: NetworkReport, path: str = "") -> str:
    """What `pairline advise` prints for a plan of several parts: the verdicts before and after, then each part's
    change list."""
    plan = report.plan
    changes = sum(len(p.report.advice.changes) for p in report.parts)
    lines = [
        f"Pairline advice: {plan.title or '(untitled plan)'}" + (f"  [{path}]" if path else ""),
        f"  The plan as laid out: {report.verdict.value.upper()}",
        f"  Advised plan: {advised_verdict(report).value.upper()} after {changes} change(s) in {len(report.parts)} "
        "part(s)",
    ]
    for part_report in report.parts:
        lines += ["", part_head(part_report), f"  {advice_head(part_report.report)}"]
        lines.append(f"  {capacity_line(part_report.report)}")
        lines += change_lines(part_report.report, "  ")
    text = "\n".join(lines)
    return lengths_in_feet(text) if plan.display_units == "imperial" else text
