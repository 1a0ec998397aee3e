"""Page data of a plan of several parts (segments joined by repeaters, or four-wire pairs): the verdict over
everything and the plan-level findings on top, an overview of every part to one scale, then each part as the page
of its own bus (server.views.plan_data), its anchors prefixed so that every id on the page stays unique."""

import json
from typing import Any

from pairline.engine.findings import Verdict
from pairline.engine.network import NetworkReport, advised_plan, advised_verdict, network_to_dict
from pairline.engine.plan import BusPlan, plan_to_dict
from pairline.engine.segments import downstream_ground_v, repeater_isolated
from pairline.server.cautions import cautions_data, danger_data
from pairline.server.findings_view import capacity_data, finding_data, group_problems
from pairline.server.forms import FormState
from pairline.server.network_diagram import network_drawing
from pairline.server.quantities import UnitSystem, length_unit
from pairline.server.results import CheckedNetwork
from pairline.server.store import SavedPlan
from pairline.server.views import advice_data, editor_data, json_safe, plan_data
from pairline.server.wording import (
    VERDICT_HEADLINE,
    VERDICT_TEXT,
    counts_text,
    date_text,
    driven_text,
    quantity_text,
    shape_text,
)

_SEVERITY = {"breaks": 0, "tight": 1, "holds": 2}


def _prefixed(data: dict[str, Any], pid: str) -> dict[str, Any]:
    """A part's page data with every anchor it links to prefixed by `pid`, so parts share one page."""
    for fd in data["findings"]:
        fd["anchor"] = pid + fd["anchor"]
        fd["node_anchor"] = pid + fd["node_anchor"] if fd["node_anchor"] else ""
        fd["branch_anchor"] = pid + fd["branch_anchor"] if fd["branch_anchor"] else ""
    for node in data["nodes"]:
        node["anchor"] = pid + node["anchor"]
        for f in node["findings"]:
            f["anchor"] = pid + f["anchor"]
    for branch in data["branches"]:
        branch["anchor"] = pid + branch["anchor"]
        for f in branch["findings"]:
            f["anchor"] = pid + f["anchor"]
    for mark in [*data["drawing"]["nodes"], *data["drawing"]["branches"]]:
        mark["anchor"] = pid + mark["anchor"]
    for plot in data["waveforms"].get("plots", []):
        plot["signal"]["anchor"] = pid + plot["signal"]["anchor"] if plot["signal"]["anchor"] else ""
    data["problem_groups"] = group_problems(data["findings"])
    data.pop("report", None)  # the whole plan's report holds every part's
    return data


def _repeaters(plan: BusPlan) -> dict[str, tuple[str, float, float, bool]]:
    return {
        r.name: (
            r.upstream_segment,
            r.upstream_position_m,
            r.downstream_position_m,
            repeater_isolated(r, plan.default_device),
        )
        for r in plan.repeaters
    }


def network_data(
    checked: CheckedNetwork, saved: SavedPlan | None, chosen_receiver: str | None = None
) -> dict[str, Any]:
    """The checked plan of several parts: the verdict over everything, the plan-level findings, the overview, and
    every part's own page data (server.views.plan_data) under `parts`."""
    report = checked.report
    plan = report.plan
    units: UnitSystem = plan.display_units
    parts = []
    for k, (part_report, part_checked) in enumerate(zip(report.parts, checked.parts, strict=True)):
        pid = f"p{k + 1}-"
        part = part_report.part
        parts.append(
            {
                "key": pid,
                "anchor": f"part-{k + 1}",
                "kind": part.kind,
                "name": part.name,
                "label": part.label[:1].upper() + part.label[1:],
                "driven_text": driven_text(part),
                "verdict": part_report.report.verdict.value,
                "ground_reference_v": part.ground_reference_v,
                "data": _prefixed(plan_data(part_checked, None, chosen_receiver), pid),
            }
        )
    anchors = {}
    for p in parts:
        for node in p["data"]["nodes"]:
            anchors.setdefault(node["name"], node["anchor"])
    ordered = sorted(report.findings, key=lambda f: (_SEVERITY[f.verdict.value], f.rule_id))
    every = [*report.findings, *(f for p in report.parts for f in p.report.findings)]
    counts = {v.value: sum(1 for f in every if f.verdict is v) for v in Verdict}
    plan_id = saved.id if saved else None
    drawing = network_drawing(
        [p.part for p in report.parts],
        [{n["name"]: n["verdict"] for n in p["data"]["nodes"]} for p in parts],
        [p["verdict"] for p in parts],
        [p["anchor"] for p in parts],
        _repeaters(plan),
        units,
        [{b["name"]: b["verdict"] for b in p["data"]["branches"]} for p in parts],
    )
    data: dict[str, Any] = json_safe(
        {
            "page": "network",
            "title": plan.title or "Untitled bus",
            "id": plan_id,
            "url": f"/plans/{plan_id}" if plan_id else None,
            "parent_id": saved.parent_id if saved else None,
            "created_at": saved.created_at if saved else None,
            "created_text": date_text(saved.created_at) if saved else None,
            "saved_with_engine": saved.engine_version if saved else None,
            "checked_with_engine": report.engine_version,
            "units": units,
            "length_unit": length_unit(units),
            "verdict": report.verdict.value,
            "verdict_text": VERDICT_HEADLINE[report.verdict.value],
            "counts": counts,
            "counts_text": counts_text(counts),
            "facts": {
                "standard": "RS-485" if plan.standard == "rs485" else "RS-422",
                "rate": quantity_text(plan.bit_rate_bps, "bit/s", units),
                "shape": shape_text(report),
            },
            "plan": plan_to_dict(plan),
            "findings": [
                finding_data(f, i, units, anchors) | {"anchor": f"net-{i + 1}-{f.rule_id}"}
                for i, f in enumerate(ordered)
            ],
            "repeaters": _repeater_rows(plan, units),
            "parts": parts,
            "drawing": drawing,
            "advice": {
                "verdict": advised_verdict(report).value,
                "plan": plan_to_dict(advised_plan(report)),
                "open_url": f"/plans/{plan_id}/advised" if plan_id else None,
                "draft_json": None if plan_id else json.dumps(plan_to_dict(plan)),
            },
            "cautions": cautions_data(_widest(report)),
            "verdict_words": VERDICT_TEXT,
            "danger": danger_data(_widest(report)),
        }
    )
    data["report"] = network_to_dict(report)
    return data


def _widest(report: NetworkReport) -> BusPlan:
    """The part whose cautions and dangers say the most: the one with the largest ground offset (the master's
    segment when none has any), so the page's cautions speak of the worst place on the plan."""
    best = max(report.parts, key=lambda p: max((abs(n.ground_offset_v) for n in p.report.plan.nodes), default=0.0))
    return best.report.plan


def _repeater_rows(plan: BusPlan, units: UnitSystem) -> list[dict[str, Any]]:
    return [
        {
            "name": r.name,
            "upstream": r.upstream_segment,
            "upstream_position_text": quantity_text(r.upstream_position_m, "m", units),
            "downstream": r.downstream_segment,
            "downstream_position_text": quantity_text(r.downstream_position_m, "m", units),
            "delay_text": quantity_text(r.delay_s, "s", units),
            "isolated": repeater_isolated(r, plan.default_device),
            "ground_text": f"{r.ground_offset_v:g} V / {downstream_ground_v(r, plan.default_device):g} V",
        }
        for r in plan.repeaters
    ]


def network_check_data(report: NetworkReport) -> dict[str, Any]:
    """A checked plan of several parts without pictures (the JSON API's check and the editor's live verdict):
    the verdict over everything, the findings that do not hold (plan-level first, then each part's, named by
    part), each part's load, and the full report."""
    plan = report.plan
    units: UnitSystem = plan.display_units
    every = [*report.findings, *(f for p in report.parts for f in p.report.findings)]
    counts = {v.value: sum(1 for f in every if f.verdict is v) for v in Verdict}
    problems = [finding_data(f, i, units, {}) for i, f in enumerate(report.findings) if f.verdict is not Verdict.HOLDS]
    loads = []
    for part in report.parts:
        capacity = capacity_data(part.report)
        loads.append(f"{part.part.name}: {capacity['unit_loads_text']}")
        problems += [
            finding_data(f, i, units, {}) | {"part": part.part.name, "title": f"{part.part.name}: {f.title}"}
            for i, f in enumerate(part.report.findings)
            if f.verdict is not Verdict.HOLDS
        ]
    problems.sort(key=lambda fd: _SEVERITY[fd["verdict"]])
    data: dict[str, Any] = json_safe(
        {
            "page": "check",
            "title": plan.title or "Untitled bus",
            "units": units,
            "verdict": report.verdict.value,
            "verdict_text": VERDICT_HEADLINE[report.verdict.value],
            "counts": counts,
            "counts_text": counts_text(counts),
            "capacity": {
                "unit_loads_text": "; ".join(loads),
                "more_text": "per part: " + "; ".join(f"{p.part.name}: {p.report.capacity.text}" for p in report.parts),
            },
            "problems": problems,
            "parts": [
                {
                    "name": p.part.name,
                    "label": p.part.label,
                    "verdict": p.report.verdict.value,
                    "capacity": capacity_data(p.report),
                }
                for p in report.parts
            ],
        }
    )
    data["report"] = network_to_dict(report)
    return data


def advised_network_editor_data(
    report: NetworkReport, state: FormState, *, saved_from: SavedPlan | None = None
) -> dict[str, Any]:
    """The editor opened on a plan of several parts as advised: a new, unsaved draft, every part's changes listed."""
    data = editor_data(state, title="Advised plan: a new draft, not saved yet", saved_from=saved_from)
    units: UnitSystem = report.plan.display_units
    changes = []
    for part in report.parts:
        advice = advice_data(part.report, units, None)
        changes += [
            c | {"text": f"{part.part.label[:1].upper() + part.part.label[1:]}: {c['text']}"} for c in advice["changes"]
        ]
    data["advice"] = {
        "verdict": advised_verdict(report).value,
        "counts": {
            v.value: sum(1 for p in report.parts for f in p.report.advice.findings if f.verdict is v) for v in Verdict
        },
        "changes": changes,
        "unmet": [u for p in report.parts for u in advice_data(p.report, units, None)["unmet"]],
        "from_title": report.plan.title or "Untitled bus",
    }
    return data
