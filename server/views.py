"""Page data: one plain dict per page, rendered as HTML by its template or returned as its JSON twin.

`*_data` functions take validated plans and engine results and return JSON-safe dicts (numbers, strings,
lists). SVG coordinates come from `server.diagram` and `server.plots`; this module only assembles them.
"""

import json
import math
from collections.abc import Mapping
from dataclasses import asdict, fields, is_dataclass
from enum import Enum
from typing import Any

import numpy as np
from pairline.engine import ENGINE_VERSION
from pairline.engine.devices import UNIT_LOAD_TEXT
from pairline.engine.findings import Verdict, worst
from pairline.engine.library import CABLES, STANDARD_MINIMUM, TRANSCEIVERS
from pairline.engine.plan import BusPlan, Problem, plan_to_dict
from pairline.engine.rules.power import rating_text
from pairline.engine.units import si_format
from pairline.server.cautions import cautions_data, danger_data
from pairline.server.diagram import branch_anchor, bus_drawing, node_anchor
from pairline.server.findings_view import (
    capacity_data,
    deciding_rules,
    finding_data,
    group_problems,
    holding_rules,
)
from pairline.server.form_fields import BRANCH, FOUR_WIRE, REPEATER, REPEATER_COLUMNS, SEGMENT, SEGMENT_ROWS
from pairline.server.forms import (
    BIAS,
    CABLE,
    CUSTOM_DEVICE,
    DEVICE,
    DEVICE_PICKER,
    DRIVER,
    GROUNDING,
    NODE,
    NODE_COLUMNS,
    PROBE,
    SAMPLING,
    TERMINATION,
    TOLERANCES,
    TOP,
    FieldSpec,
    FormState,
)
from pairline.server.messages import problem_message, value_text
from pairline.server.plots import curve_plot, eye_plot, waveform_plot
from pairline.server.quantities import UnitSystem, format_quantity, length_unit
from pairline.server.results import (
    CURVE_CRITERIA,
    RULE_CRITERION,
    RULE_SOURCE,
    SIGNAL_RULE,
    CheckedPlan,
    report_to_dict,
    worst_receiver,
)
from pairline.server.store import SampleEntry, SavedPlan
from pairline.server.wording import (
    VERDICT_HEADLINE,
    VERDICT_TEXT,
    counts_text,
    date_text,
    in_plan_units,
    lengths_in_text,
    quantity_text,
)

_SEVERITY = {"breaks": 0, "tight": 1, "holds": 2}


def json_safe(value: Any) -> Any:
    """Dataclasses, numpy values and tuples to plain JSON types; NaN and infinities become None."""
    if isinstance(value, Enum):
        return value.value
    if value is None or isinstance(value, str | bool | int):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return json_safe(value.tolist())
    if isinstance(value, np.generic):
        return json_safe(value.item())
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: json_safe(getattr(value, f.name)) for f in fields(value)}
    return value


def bom_rows(bom: Any, units: UnitSystem) -> list[dict[str, Any]]:
    """Bill-of-materials rows for the page and the CSV, positions in the plan's display unit."""
    return [
        asdict(item) | {"value": lengths_in_text(item.value, units), "note": lengths_in_text(item.note, units)}
        for item in bom
    ]


def _field_meta(units: UnitSystem) -> dict[str, dict[str, dict[str, Any]]]:
    groups: dict[str, tuple[FieldSpec, ...]] = {
        "plan": TOP,
        "cable": CABLE,
        "driver": DRIVER,
        "nodes": NODE,
        "branches": BRANCH,
        "terminations": TERMINATION,
        "bias": BIAS,
        "grounding": GROUNDING,
        "device": (DEVICE_PICKER, *DEVICE),
        "sampling_window": SAMPLING,
        "tolerances": TOLERANCES,
        "probes": PROBE,
        "segments": SEGMENT,
        "repeaters": REPEATER,
        "four_wire": FOUR_WIRE,
    }
    return {
        name: {
            s.key: {
                "label": s.label,
                "unit": s.unit_label(units),
                "hint": s.hint,
                "placeholder": s.placeholder,
                "choices": [list(c) for c in s.choices],
            }
            for s in specs
        }
        for name, specs in groups.items()
    }


def _class_defaults(units: UnitSystem) -> dict[str, dict[str, dict[str, str]]]:
    """Each library class's values as input text, shown as placeholders of the override inputs; a custom device
    starts from the standard's minimum device."""
    cable_keys = [s for s in CABLE if s.kind]
    device_keys = [s for s in DEVICE if s.kind]

    def device_text(t: Any) -> dict[str, str]:
        out = {}
        for s in device_keys:
            value = getattr(t, s.key, None)
            if isinstance(value, float) and math.isfinite(value):
                out[s.key] = format_quantity(value, s.kind or "plain", units, s.bare, 4)
        return out

    return {
        "cable": {
            key: {s.key: format_quantity(getattr(c, s.key), s.kind or "plain", units, s.bare, 4) for s in cable_keys}
            for key, c in CABLES.items()
        },
        "device": {key: device_text(t) for key, t in TRANSCEIVERS.items()}
        | {CUSTOM_DEVICE: device_text(STANDARD_MINIMUM)},
    }


def _open_devices(state: FormState, errors: Mapping[str, str]) -> list[str]:
    """The device prefixes whose values the editor shows open: every device (the driver's, a node's) that is
    custom, has a value typed, has a problem, or was asked open. A node's closed values are not sent at all; the
    driver's are, folded."""
    prefixes = (
        ["driver.device"]
        + [f"nodes.{i}.device" for i in range(state.n_nodes)]
        + [f"{g}.{i}.device" for g in _node_tables(state) for i in range(state.count(g))]
    )
    values = state.values
    return [
        prefix
        for prefix in prefixes
        if prefix in state.open_devices
        or values.get(f"{prefix}.class_key") == CUSTOM_DEVICE
        or any(values.get(f"{prefix}.{s.key}") for s in DEVICE)
        or any(path.startswith(prefix + ".") for path in errors)
    ]


def _node_tables(state: FormState) -> list[str]:
    """The other tables whose rows carry a device: the repeaters and each further segment's nodes."""
    return ["repeaters"] + [f"segments.{i}.nodes" for i in range(state.count("segments"))]


def _uses_four_wire(state: FormState) -> bool:
    values = state.values
    return bool(values.get("four_wire.master")) or any(
        values.get(path) for path in values if path.endswith(".drives_pair")
    )


def _topology_data(state: FormState) -> dict[str, Any]:
    """The editor's segments, repeaters and four-wire return pair: each table's rows and columns."""
    four_wire = _uses_four_wire(state)
    return {
        "node_columns": [s.key for s in NODE_COLUMNS] + (["drives_pair"] if four_wire else []),
        "four_wire": four_wire,
        "segment_fields": [s.key for s in SEGMENT],
        "segments": [
            {
                "index": i,
                "prefix": f"segments.{i}",
                "counts": {k: state.count(f"segments.{i}.{k}") for k in SEGMENT_ROWS},
            }
            for i in range(state.count("segments"))
        ],
        "n_repeaters": state.count("repeaters"),
        "repeater_columns": [s.key for s in REPEATER_COLUMNS],
        "n_return_terminations": state.count("four_wire.return_terminations"),
        "n_return_bias": state.count("four_wire.return_bias"),
    }


# whole-table problems link to the table
TABLES = {
    "nodes": "node-rows",
    "terminations": "termination-rows",
    "branches": "branch-rows",
    "bias": "bias-rows",
    "probes": "probe-rows",
    "segments": "segment-list",
    "repeaters": "repeater-rows",
    "four_wire": "four-wire",
}


def editor_data(state: FormState, *, title: str, saved_from: SavedPlan | None = None) -> dict[str, Any]:
    """The plan editor: every input's text by dotted path, problems by field, and the field descriptions."""
    by_field: dict[str, str] = {}
    general: list[dict[str, Any]] = []
    for p in state.problems:
        message = problem_message(p, state.units)
        # A problem with a whole table ("nodes") sits beside that table; its id is the table's.
        on_form = p.field in state.values or p.field.endswith(("class_key", "transceiver")) or p.field in TABLES
        if on_form:
            by_field.setdefault(p.field, message)
        # The list links the label; a message that starts with it goes on after the link rather than repeating it.
        rest = message[len(p.label) :] if p.label and message.startswith(p.label) else None
        general.append(
            {
                "field": p.field,
                "target": TABLES.get(p.field, f"f-{p.field}"),
                "label": p.label,
                "message": message,
                "rest": rest,
                "on_form": on_form,
            }
        )
    return {
        "page": "editor",
        "title": title,
        "units": state.units,
        "chosen_units": state.chosen_units or state.units,
        "length_unit": length_unit(state.units),
        "values": state.values,
        "n_nodes": state.n_nodes,
        "n_terminations": state.n_terminations,
        "n_bias": state.n_bias,
        "n_probes": state.n_probes,
        "parent_id": state.parent_id,
        "saved_from": saved_from.id if saved_from else None,
        "errors": by_field,
        "problems": general,
        "fields": _field_meta(state.units),
        "device_values": [s.key for s in DEVICE],
        "open_devices": _open_devices(state, by_field),
        "termination_columns": [s.key for s in TERMINATION],
        "branch_columns": [s.key for s in BRANCH],
        "n_branches": state.count("branches"),
        "bias_columns": [s.key for s in BIAS],
        "probe_columns": [s.key for s in PROBE],
        "tolerance_keys": [s.key for s in TOLERANCES],
        "node_table": state.values.get("node_table", ""),
        "class_defaults": _class_defaults(state.units),
        "cables": {k: json_safe(c) for k, c in CABLES.items()},
        "transceivers": {k: json_safe(t) for k, t in TRANSCEIVERS.items()},
        "engine_version": ENGINE_VERSION,
    } | _topology_data(state)


def start_data(
    samples: list[SampleEntry], problems: list[Problem] | None = None, pasted: str = "", units: UnitSystem = "metric"
) -> dict[str, Any]:
    return {
        "page": "start",
        "title": "Pairline",
        "samples": [{"slug": s.slug, "title": s.title, "url": f"/plans/{s.plan_id}"} for s in samples],
        "problems": [
            {"field": p.field, "label": p.label, "message": problem_message(p, units)} for p in problems or []
        ],
        "pasted": pasted,
        "engine_version": ENGINE_VERSION,
    }


def plan_data(checked: CheckedPlan, saved: SavedPlan | None, chosen_receiver: str | None = None) -> dict[str, Any]:
    """The checked plan: verdicts, findings, per-node table, drawing, waveforms, curve, summary, BOM, cautions."""
    report = checked.report
    plan: BusPlan = report.plan
    units: UnitSystem = plan.display_units
    anchors = {n.name: node_anchor(i) for i, n in enumerate(plan.nodes)} | {plan.driver.name: "driver"}
    ordered = sorted(report.findings, key=lambda f: (_SEVERITY[f.verdict.value], f.rule_id))
    findings = [finding_data(f, i, units, anchors) for i, f in enumerate(ordered)]
    branch_anchors = {b.name: branch_anchor(k) for k, b in enumerate(plan.branches)}
    for fd in findings:
        fd["branch_anchor"] = branch_anchors.get(fd["branch"] or "", "")
    per_node: dict[str, list[dict[str, Any]]] = {}
    on_branch = {b.name: [n.name for n in plan.nodes if n.branch == b.name] for b in plan.branches}
    for fd in findings:
        if fd["node"]:
            per_node.setdefault(fd["node"], []).append(fd)
        for name in on_branch.get(fd["branch"] or "", []):  # a branch's finding is its nodes' too
            per_node.setdefault(name, []).append(fd)
    junction = {b.name: b.junction_position_m for b in plan.branches}
    node_verdicts = {name: worst([Verdict(fd["verdict"]) for fd in items]).value for name, items in per_node.items()}
    node_rules = {
        name: deciding_rules(items, node_verdicts[name]) for name, items in per_node.items()
    }  # the rules that set each node's verdict
    metrics = {m.receiver: m for m in checked.metrics}
    summary = report.summary
    nodes = [
        {
            "index": i,
            "anchor": node_anchor(i),
            "name": n.name,
            "position_text": quantity_text(n.position_m, "m", units)
            if n.branch is None
            else f"{quantity_text(n.position_m, 'm', units)} along branch '{n.branch}' (from "
            f"{quantity_text(junction[n.branch], 'm', units)})",
            "stub_text": quantity_text(n.stub_length_m, "m", units),
            "max_stub_text": quantity_text(summary.max_stub_m.get(n.name), "m", units)
            if n.name in summary.max_stub_m
            else "—",
            "unit_loads": report.bus.devices[n.name].unit_loads,
            "device": report.bus.devices[n.name].label,
            "failsafe": report.bus.devices[n.name].failsafe,
            "isolated": report.bus.devices[n.name].isolated,
            "may_drive": n.may_drive,
            "ground_offset_v": n.ground_offset_v,
            "signal": _signal_data(metrics.get(n.name), units),
            "verdict": node_verdicts.get(n.name, "holds"),
            "decided_by": node_rules.get(n.name, []),
            "findings": [
                {"anchor": fd["anchor"], "rule_id": fd["rule_id"], "verdict": fd["verdict"]}
                for fd in per_node.get(n.name, [])
            ],
        }
        for i, n in enumerate(plan.nodes)
    ]
    counts = {v.value: sum(1 for f in report.findings if f.verdict == v) for v in Verdict}
    problem_groups = group_problems(findings)
    waveforms = _waveforms_data(checked, chosen_receiver, findings, node_verdicts, node_rules)
    length_findings = [fd for fd in findings if fd["rule_id"] in LENGTH_RULES and not fd["node"]]
    curve_verdict = worst([Verdict(fd["verdict"]) for fd in length_findings]).value
    sweep = checked.curve
    curve = curve_plot(
        sweep.bit_rate_bps,
        sweep.max_length_m,
        plan.bit_rate_bps,
        sweep.plan_length_m,
        units,
        rule=(checked.rule_bit_rate_bps, checked.rule_max_length_m),
    )
    plan_id = saved.id if saved else None
    data: dict[str, Any] = json_safe(
        {
            "page": "plan",
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
            "counts_text": counts_text(counts),
            "capacity": capacity_data(report),
            "facts": {
                "standard": "RS-485" if plan.standard == "rs485" else "RS-422",
                "rate": quantity_text(plan.bit_rate_bps, "bit/s", units),
                "trunk": quantity_text(plan.trunk_length_m, "m", units),
            },
            "counts": counts,
            "plan": plan_to_dict(plan),
            "cable_label": report.bus.cable.label,
            "driver_label": report.bus.driver.label,
            "findings": findings,
            "problem_groups": problem_groups,
            "holding_rules": holding_rules(findings),
            "nodes": nodes,
            "branches": branches_data(plan, list(zip(ordered, findings, strict=True)), units),
            "devices": _devices_data(report.bus),
            "unit_load_text": UNIT_LOAD_TEXT,
            "summary": _summary_data(summary, units),
            "advice": advice_data(report, units, plan_id),
            "waveforms": waveforms,
            "probes": _probes_data(checked, units),
            "curve": {
                "bit_rate_bps": sweep.bit_rate_bps,
                "max_length_m": sweep.max_length_m,
                "criterion": sweep.criterion,
                "criterion_text": in_plan_units(CURVE_CRITERIA.get(sweep.criterion, sweep.criterion), units),
                "source": in_plan_units(sweep.source, units),
                "plan_max_length_m": sweep.plan_max_length_m,
                "plan_max_length_text": quantity_text(sweep.plan_max_length_m, "m", units),
                "plan_inside": sweep.plan_inside,
                "plan_verdict": curve_verdict,
                "plan_decided_by": deciding_rules(length_findings, curve_verdict),
                "sweep_end_text": value_text(max(sweep.max_length_m), "m", units) if len(sweep.max_length_m) else "",
                "rule": {
                    "bit_rate_bps": checked.rule_bit_rate_bps,
                    "max_length_m": checked.rule_max_length_m,
                    "criterion_text": in_plan_units(RULE_CRITERION, units),
                    "source": in_plan_units(RULE_SOURCE, units),
                },
                "svg": curve,
            },
            "drawing": bus_drawing(
                plan,
                node_verdicts | {plan.driver.name: node_verdicts.get(plan.driver.name, "holds")},
                units,
                {name: ", ".join(rules) for name, rules in node_rules.items()},
                {
                    f.branch: f.verdict.value
                    for f in sorted(report.findings, key=lambda f: -_SEVERITY[f.verdict.value])
                    if f.branch
                },
            ),
            "cautions": cautions_data(plan),
            "verdict_words": VERDICT_TEXT,
            "danger": danger_data(plan),
        }
    )
    data["report"] = report_to_dict(report)  # already JSON-safe: the same JSON as `pairline check --json`
    return data


def branches_data(plan: BusPlan, findings: list[tuple[Any, dict[str, Any]]], units: UnitSystem) -> list[dict[str, Any]]:
    """Each branch of the trunk: its junction, its length, its nodes, and the verdict of the findings about it
    (each finding beside its page data)."""
    rows = []
    for k, b in enumerate(plan.branches):
        own = [fd for f, fd in findings if f.branch == b.name]
        verdict = worst([Verdict(fd["verdict"]) for fd in own]).value if own else "holds"
        rows.append(
            {
                "anchor": branch_anchor(k),
                "name": b.name,
                "junction_text": quantity_text(b.junction_position_m, "m", units),
                "length_text": quantity_text(b.length_m, "m", units),
                "nodes": [n.name for n in plan.nodes if n.branch == b.name],
                "verdict": verdict,
                "findings": [
                    {"anchor": fd["anchor"], "rule_id": fd["rule_id"]}
                    for fd in own
                    if fd["verdict"] == verdict and verdict != "holds"
                ],
            }
        )
    return rows


def _devices_data(bus: Any) -> list[dict[str, Any]]:
    """Each distinct device on the bus, its values as text, and the nodes that carry it (the driver first)."""
    by_device: dict[Any, list[str]] = {}
    for name, device in bus.devices.items():
        by_device.setdefault(device, []).append(name)
    rows = []
    for d, names in by_device.items():
        edge = si_format(d.rise_time_s, "s") if math.isfinite(d.rise_time_s) else "not stated (receives only)"
        isolation = f"{d.isolation_rating_vrms:g} Vrms, {d.isolation_grade}" if d.isolated else "not isolated"
        shown = ", ".join(names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")
        source = si_format(d.source_ohm, "Ω") if d.source_ohm else "0 Ω"
        rows.append(
            {
                "label": d.label,
                "unit_loads_text": f"{d.unit_loads:g} UL ({si_format(d.differential_input_ohm, 'Ω')} across the pair)",
                "failsafe_text": d.failsafe_text,
                "driver_text": f"{d.open_circuit_v:g} V behind {source}, edge {edge}",
                "common_mode_text": f"{d.common_mode_min_v:+g} V to {d.common_mode_max_v:+g} V",
                "isolation_text": isolation,
                "nodes_text": shown,
                "count": len(names),
                "source": d.source,
            }
        )
    return rows


def _signal_data(m: Any, units: UnitSystem) -> dict[str, Any] | None:
    """One receiver's simulated figures for the node table (None for a node that is not simulated)."""
    if m is None:
        return None
    return {
        "amplitude_v": m.amplitude_v,
        "min_sample_v": m.min_sample_v,
        "eye_height_v": m.eye_height_v,
        "eye_width_ui": m.eye_width_ui,
        "overshoot_ratio": m.overshoot_ratio,
        "threshold_recrossings": m.threshold_recrossings,
        "sample_errors": m.sample_errors,
        "propagation_delay_s": m.propagation_delay_s,
        "amplitude_text": quantity_text(m.amplitude_v, "V", units),
        "min_sample_text": quantity_text(m.min_sample_v, "V", units),
        "eye_text": quantity_text(m.eye_height_v, "V", units),
        "delay_text": quantity_text(m.propagation_delay_s, "s", units),
        "below_threshold": m.min_sample_v < m.threshold_v,
    }


LENGTH_RULES = ("length.rate_rule", "length.loss")  # the rules the length-against-rate picture stands for


def lineage_data(parent: SavedPlan | None) -> dict[str, Any]:
    """The plan this one was copied from, by title, date and link. Later copies are not listed: each is the
    link of whoever made it, and one shared link must not lead to everyone's edits."""
    if parent is None:
        return {"parent": None}
    return {
        "parent": {
            "id": parent.id,
            "url": f"/plans/{parent.id}",
            "title": parent.title or "Untitled bus",
            "date": date_text(parent.created_at),
        }
    }


def _waveforms_data(
    checked: CheckedPlan,
    chosen: str | None,
    findings: "list[dict[str, Any]]",
    node_verdicts: Mapping[str, str],
    node_rules: Mapping[str, list[str]],
) -> dict[str, Any]:
    wf = checked.waveforms
    worst = worst_receiver(checked.metrics, checked.report.findings)
    receivers = [m.receiver for m in checked.metrics]
    if wf is None or worst is None:
        return {"available": False, "note": checked.simulation_note, "receivers": receivers}
    by_name = {m.receiver: m for m in checked.metrics}
    signal = {fd["node"]: fd for fd in findings if fd["rule_id"] == SIGNAL_RULE and fd["node"]}
    chosen_name = chosen if chosen in by_name else None
    plots = []
    for k, name in enumerate(wf.receiver_names):
        m = by_name[name]
        # Each receiver samples mid-bit in its own frame: the pattern's instants shifted by its delay.
        delay = m.propagation_delay_s if math.isfinite(m.propagation_delay_s) else 0.0
        samples = np.asarray(wf.sample_times_s, dtype=float) + delay
        plots.append(
            {
                "receiver": name,
                "role": "worst" if name == worst.receiver else "chosen",
                "verdict": node_verdicts.get(name, "holds"),
                "decided_by": node_rules.get(name, []),
                "signal": _signal_finding(signal.get(name)),
                "margin_v": m.min_sample_v,
                "margin_text": quantity_text(m.min_sample_v, "V", "metric"),
                "eye_height_v": m.eye_height_v,
                "eye_text": quantity_text(m.eye_height_v, "V", "metric"),
                "delay_text": quantity_text(m.propagation_delay_s, "s", "metric"),
                "svg": waveform_plot(wf.time_s, wf.v_diff_v[k], samples, name, wf.bit_time_s),
                "eye": eye_plot(wf.time_s, wf.v_diff_v[k], samples, wf.bit_time_s, name),
            }
        )
    return {
        "available": True,
        "bits": wf.bits,
        "bit_time_s": wf.bit_time_s,
        "bit_time_text": si_format(wf.bit_time_s, "s"),
        "receivers": receivers,
        "worst": worst.receiver,
        "chosen": chosen_name,
        "chosen_unknown": chosen if chosen and chosen_name is None else None,
        "plots": plots,
        "note": checked.simulation_note,
    }


def _probes_data(checked: CheckedPlan, units: UnitSystem) -> list[dict[str, Any]]:
    """The waveform at each of the plan's own probes (plan.probes): the bit pattern or a single step."""
    wf = checked.probes
    if wf is None:
        return []
    signal = f"the bit pattern {wf.bits}" if wf.bits else "a single step from 0 V to high at 0 s"
    return [
        {
            "probe": in_plan_units(name, units),
            "signal": signal,
            "svg": waveform_plot(wf.time_s, wf.v_diff_v[k], (), in_plan_units(name, units), wf.bit_time_s),
        }
        for k, name in enumerate(wf.receiver_names)
    ]


def _signal_finding(fd: "dict[str, Any] | None") -> dict[str, Any]:
    """What the signal-integrity rule said of one receiver, for its waveform's caption."""
    if fd is None:
        return {"verdict": "holds", "text": "no signal finding for this receiver", "anchor": ""}
    numbers = ", ".join(t for t in (fd["value_text"], f"limit {fd['limit_text']}" if fd["limit_text"] else "") if t)
    return {
        "verdict": fd["verdict"],
        "text": f"{fd['title']} ({numbers})" if numbers else fd["title"],
        "anchor": fd["anchor"],
    }


def _summary_data(summary: Any, units: UnitSystem) -> dict[str, Any]:
    terminators = [
        {
            "position_text": quantity_text(t.position_m, "m", units),
            "kind": t.kind,
            "resistance_text": quantity_text(t.resistance_ohm, "Ω", units),
            "capacitance_text": quantity_text(t.capacitance_f, "F", units) if t.capacitance_f else "",
            "power_text": rating_text(t.power_rating_w),
            **asdict(t),
        }
        for t in summary.terminators
    ]
    bias = [
        {
            **asdict(b),
            "position_text": quantity_text(b.position_m, "m", units),
            "pull_up_text": quantity_text(b.pull_up_ohm, "Ω", units),
            "pull_down_text": quantity_text(b.pull_down_ohm, "Ω", units),
            "supply_text": quantity_text(b.supply_v, "V", units),
            "idle_text": quantity_text(b.idle_v, "V", units),
            "idle_corner_text": quantity_text(b.idle_corner_v, "V", units),
            "power_text": rating_text(b.power_rating_w),
        }
        for b in summary.bias
    ]
    rate = quantity_text(summary.max_bit_rate_bps, "bit/s", units)
    return {
        "terminators": terminators,
        "bias": bias,
        "spare_unit_loads": summary.spare_unit_loads,
        "further_nodes": dict(summary.further_nodes),
        "capacity_text": summary.capacity.text,
        "max_bit_rate_bps": summary.max_bit_rate_bps,
        "max_bit_rate_text": rate,
        "max_path_m": summary.max_path_m,
        "max_path_text": quantity_text(summary.max_path_m, "m", units),
        "rate_note": in_plan_units(summary.rate_note, units),
        "bias_note": in_plan_units(summary.bias_note, units),
        "bom": bom_rows(summary.bom, units),
    }


def check_data(report: Any) -> dict[str, Any]:
    """A checked plan without simulated pictures (the JSON API's check and the editor's live verdict): the report
    without the advised plan's own findings (its verdict, counts and changes stay; a saved plan's page has them)."""
    plan: BusPlan = report.plan
    units: UnitSystem = plan.display_units
    anchors = {n.name: node_anchor(i) for i, n in enumerate(plan.nodes)} | {plan.driver.name: "driver"}
    ordered = sorted(report.findings, key=lambda f: (_SEVERITY[f.verdict.value], f.rule_id))
    counts = {v.value: sum(1 for f in report.findings if f.verdict == v) for v in Verdict}
    data: dict[str, Any] = json_safe(
        {
            "page": "check",
            "title": plan.title or "Untitled bus",
            "units": units,
            "verdict": report.verdict.value,
            "verdict_text": VERDICT_HEADLINE[report.verdict.value],
            "counts": counts,
            "counts_text": counts_text(counts),
            "capacity": capacity_data(report),
            # Those that do not hold, ready to read; every finding is in the report below.
            "problems": [
                finding_data(f, i, units, anchors) for i, f in enumerate(ordered) if f.verdict != Verdict.HOLDS
            ],
            "summary": _summary_data(report.summary, units),
            "advice": advice_data(report, units, None),
            "danger": danger_data(plan),
        }
    )
    data["report"] = report_to_dict(report, advice_findings=False)
    return data


def advice_data(report: Any, units: UnitSystem, plan_id: str | None) -> dict[str, Any]:
    """The advised plan's verdict, its change list and what cannot be met, and where the editor opens it."""
    advice = report.advice
    return {
        "verdict": advice.verdict.value,
        "counts": {v.value: sum(1 for f in advice.findings if f.verdict is v) for v in Verdict},
        "changes": [
            {
                "part": c.part,
                "where": in_plan_units(c.where, units),
                "text": in_plan_units(c.text[:1].upper() + c.text[1:], units),
                "from": in_plan_units(c.before_text, units),
                "to": in_plan_units(c.after_text, units),
                "why": c.why[:1].upper() + c.why[1:],
                "rule_ids": list(c.rule_ids),
            }
            for c in advice.changes
        ],
        "unmet": [
            {
                "rule_id": u.rule_id,
                "nodes": list(u.nodes),
                "why": in_plan_units(u.why, units),
                "remedies": [in_plan_units(r, units) for r in u.remedies],
            }
            for u in advice.unmet
        ],
        "plan": plan_to_dict(advice.plan),
        # Saved plans open their advice by link; a draft posts its plan back (it has no id yet).
        "open_url": f"/plans/{plan_id}/advised" if plan_id else None,
        "draft_json": None if plan_id else json.dumps(plan_to_dict(report.plan)),
    }


def advised_editor_data(report: Any, state: FormState, *, saved_from: SavedPlan | None = None) -> dict[str, Any]:
    """The editor opened on the advised plan as a new, unsaved draft, with the changes that made it listed."""
    title = "Advised plan: a new draft, not saved yet"
    data = editor_data(state, title=title, saved_from=saved_from)
    data["advice"] = advice_data(report, state.units, None) | {"from_title": report.plan.title or "Untitled bus"}
    return data


def not_found_data(path: str) -> dict[str, Any]:
    return {"page": "not_found", "status": 404, "title": "Not found", "path": path}
