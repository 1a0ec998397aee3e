"""Findings as the page shows them: value and limit with the side the value must stay on, "close to the limit"
for tight, the rules that decided a verdict, a rule's problems at many nodes as one group, and the load on the
pair with the receivers that still fit.
"""

import math
from collections.abc import Mapping
from typing import Any

from pairline.engine.findings import Verdict, worst
from pairline.server.quantities import UnitSystem, number_text
from pairline.server.wording import counted, in_plan_units, quantity_text

LIMIT_SIGNS = {"max": "≤", "min": "≥"}


def limit_kind_of(finding: Any) -> str:
    """How a finding's value is held against its limit: "max" (at most), "min" (at least) or "none" (the
    limit is only a reference). Findings from engines that do not say are upper limits."""
    kind = getattr(finding, "limit_kind", None) or "max"
    return kind if kind in ("max", "min", "none") else "max"


def limit_text(limit: float | None, unit: str, kind: str, units: UnitSystem) -> str:
    """The limit for reading, with the side the value must stay on: "≤ 1.2 m", "≥ 54 Ω"; "" for no limit."""
    if kind == "none" or limit is None or not math.isfinite(limit):
        return ""
    return f"{LIMIT_SIGNS[kind]} {quantity_text(limit, unit, units)}"


def finding_data(f: Any, index: int, units: UnitSystem, node_anchors: Mapping[str, str]) -> dict[str, Any]:
    kind = limit_kind_of(f)
    return {
        "anchor": f"finding-{index + 1}-{f.rule_id}",
        "rule_id": f.rule_id,
        "title": in_plan_units(f.title, units),
        "verdict": f.verdict.value,
        "value": f.value,
        "limit": f.limit,
        "unit": f.unit,
        "value_text": quantity_text(f.value, f.unit, units),
        "limit_kind": kind,
        "limit_text": limit_text(f.limit, f.unit, kind, units),
        "node": f.node,
        "branch": getattr(f, "branch", None),
        "node_anchor": node_anchors.get(f.node, "") if f.node else "",
        "limit_note": TIGHT_NOTE if f.verdict == Verdict.TIGHT else "",
        "criterion": in_plan_units(f.criterion, units),
        "source": in_plan_units(f.source, units),
        "fix": in_plan_units(f.fix, units),
        "detail": in_plan_units(f.detail, units),
    }


TIGHT_NOTE = "close to the limit: inside what the rule allows, with little to spare"


def group_problems(findings: "list[dict[str, Any]]") -> list[dict[str, Any]]:
    """The findings that do not hold, in report order, as the page lists them: a finding about the bus on its
    own; a rule's findings at two or more nodes together, one row per node under the rule's criterion."""
    problems = [fd for fd in findings if fd["verdict"] != "holds"]
    per_rule: dict[str, list[dict[str, Any]]] = {}
    for fd in problems:
        if fd["node"]:
            per_rule.setdefault(fd["rule_id"], []).append(fd)
    groups: list[dict[str, Any]] = []
    placed: set[str] = set()
    for fd in problems:
        rows = per_rule.get(fd["rule_id"], []) if fd["node"] else []
        if len(rows) < 2:
            groups.append({"kind": "single", "finding": fd})
        elif fd["rule_id"] not in placed:
            placed.add(fd["rule_id"])
            verdict = worst([Verdict(r["verdict"]) for r in rows]).value
            groups.append(
                {
                    "kind": "nodes",
                    "rule_id": fd["rule_id"],
                    "verdict": verdict,
                    "title": fd["title"],
                    "where": counted(len(rows), "node", "nodes"),
                    "criterion": fd["criterion"],
                    "source": fd["source"],
                    "rows": rows,
                }
            )
    return groups


def holding_rules(findings: "list[dict[str, Any]]") -> list[dict[str, Any]]:
    """One row per rule whose findings hold: its id, title and where it holds ("the bus and 3 nodes")."""
    rows: dict[str, dict[str, Any]] = {}
    for fd in findings:
        if fd["verdict"] == "holds":
            row = rows.setdefault(fd["rule_id"], {"rule_id": fd["rule_id"], "title": fd["title"], "bus": 0, "nodes": 0})
            row["nodes" if fd["node"] else "bus"] += 1
    return [row | {"where": _where_text(row["bus"], row["nodes"])} for _, row in sorted(rows.items())]


def _where_text(bus: int, nodes: int) -> str:
    """Where a rule holds: "the bus", "12 nodes", "the bus and 3 nodes"."""
    parts = (["the bus"] if bus else []) + ([counted(nodes, "node", "nodes")] if nodes else [])
    return " and ".join(parts)


def deciding_rules(findings: "list[dict[str, Any]]", verdict: str) -> list[str]:
    """The rule ids whose findings carry `verdict` (the worst), each once, in report order; [] when all hold."""
    if verdict == "holds":
        return []
    return list(dict.fromkeys(fd["rule_id"] for fd in findings if fd["verdict"] == verdict))


def capacity_data(report: Any) -> dict[str, Any]:
    """The load on the pair, and how many more receivers fit: the engine's one answer, counted on the advised
    plan (engine.capacity), used as it is wherever spare capacity is mentioned."""
    plan, summary = report.plan, report.summary
    load = next((f for f in report.findings if f.rule_id == "load.unit_loads" and f.node is None), None)
    total = load.value if load is not None else None
    further = {str(k): int(v) for k, v in dict(summary.further_nodes).items()}
    if plan.standard == "rs422":
        load_text = f"{counted(len(plan.nodes), 'receiver', 'receivers')} of 10"
    else:
        load_text = f"{number_text(total)} UL of 32 UL" if total is not None else "—"
    return {
        "unit_loads": total,
        "unit_loads_text": load_text,
        "spare_unit_loads": summary.spare_unit_loads,
        "further_nodes": further,
        "more_text": report.capacity.text,
        "text": report.capacity.text,
    }
