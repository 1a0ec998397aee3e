"""The plan editor's form fields <-> the plan document.

Input names are the plan's dotted paths (`trunk_length_m`, `nodes.2.stub_length_m`, `nodes.2.device.class_key`),
so a problem's `field` from `engine.plan.load_plan` is also the name of the input it belongs beside. Values are
typed text: a bare number is read in the unit shown beside the input (metres or feet by the plan's display units),
and a number with a unit or SI prefix ("30 ft", "4.7 nF", "115.2k") is read as written.

A device (the driver's, or a node's) is a class picker and the values that may override it: the picker's blank
choice is the plan's default class, "custom" a device of its own values (class_key null).

Rows of nodes, terminators and bias networks may arrive with gaps in their indices (rows removed in the browser);
blank and removed rows are dropped and the rest renumbered before validation, and the form is re-rendered with the
same numbering, so every message lands beside the right input.
"""

import json
import re
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

from pairline.engine.library import TRANSCEIVERS
from pairline.engine.plan import (
    DEFAULT_DEVICE,
    PLAN_FORMAT,
    PLAN_FORMAT_VERSION,
    BusInputError,
    BusPlan,
    Problem,
    current_document,
    load_plan,
)
from pairline.server.form_fields import (
    BIAS,
    CABLE,
    CUSTOM_CABLE,
    CUSTOM_DEVICE,
    DEVICE,
    DEVICE_CLASSES,
    DEVICE_PICKER,
    DRIVER,
    GROUNDING,
    GROUPS,
    MAX_FORM_FIELDS,
    MAX_FORM_ROWS,
    NODE,
    NODE_COLUMNS,
    PROBE,
    ROW_NAME,
    ROWS,
    SAMPLING,
    SEGMENT_ROWS,
    TERMINATION,
    TOLERANCES,
    TOP,
    FieldSpec,
    row_specs,
    spec_for,
)
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.messages import field_allowed, not_a_number_message, range_text
from pairline.server.quantities import QuantityError, UnitSystem, format_quantity, parse_quantity

__all__ = [
    "BIAS",
    "CABLE",
    "CUSTOM_DEVICE",
    "DEVICE",
    "DEVICE_CLASSES",
    "DEVICE_PICKER",
    "DRIVER",
    "GROUNDING",
    "GROUPS",
    "MAX_FORM_FIELDS",
    "MAX_FORM_ROWS",
    "NODE",
    "NODE_COLUMNS",
    "PROBE",
    "ROWS",
    "SAMPLING",
    "TERMINATION",
    "TOLERANCES",
    "TOP",
    "FieldSpec",
    "FormState",
    "ParsedForm",
    "form_from_plan",
    "merge_problems",
    "parse_form",
    "plan_from_body",
    "spec_for",
    "with_units",
]


@dataclass(slots=True)
class FormState:
    """What the editor template needs: each input's text by dotted path, row counts and the unit system."""

    values: dict[str, str]
    n_nodes: int
    n_terminations: int
    units: UnitSystem  # the system the inputs' bare numbers are shown in
    parent_id: str | None = None
    problems: list[Problem] = field(default_factory=list)
    chosen_units: UnitSystem | None = None  # the system picked to keep with the plan, when it differs
    n_bias: int = 0
    open_devices: set[str] = field(default_factory=set)  # device prefixes ("nodes.3.device") shown open
    n_probes: int = 0
    rows: dict[str, int] = field(default_factory=dict)  # rows of the other tables: segments, repeaters, ...

    def count(self, group: str) -> int:
        """The rows shown in a table ("nodes", "segments.1.bias", "repeaters")."""
        own = {"nodes": self.n_nodes, "terminations": self.n_terminations, "bias": self.n_bias, "probes": self.n_probes}
        return own[group] if group in own else self.rows.get(group, 0)

    def add_row(self, group: str) -> None:
        """One more (blank) row in a table."""
        if group in ("nodes", "terminations", "bias", "probes"):
            name = "n_nodes" if group == "nodes" else f"n_{group}"
            setattr(self, name, getattr(self, name) + 1)
        else:
            self.rows[group] = self.rows.get(group, 0) + 1


@dataclass(slots=True)
class ParsedForm:
    doc: dict[str, Any]  # the plan document, not yet validated
    state: FormState  # the typed text, rows renumbered, for re-rendering
    problems: list[Problem]  # text that did not parse as a quantity
    action: str


def _path(group: str, key: str) -> str:
    return f"{group}.{key}" if group else key


def _raw(source: Any, key: str) -> Any:
    """The value at a dotted key ("device.unit_loads") of a raw document part; a device given as its class key
    alone ("device": "edge-25ns") has that key as its class_key and no values."""
    head, _, rest = key.partition(".")
    value = source.get(head) if isinstance(source, Mapping) else None
    if not rest:
        return value
    if head == "device" and isinstance(value, str):
        return value if rest == "class_key" else None
    return _raw(value, rest)


def _text(spec: FieldSpec, source: Any, units: UnitSystem) -> str:
    """An input's text for a raw value: a quantity formatted in the form's units, a device picker's choice, a
    yes/no select's "true" or "false", or the text itself."""
    raw = _raw(source, spec.key)
    if spec.key.endswith("device.class_key"):
        device = _raw(source, spec.key.removesuffix(".class_key"))
        if device is None:
            return ""
        return CUSTOM_DEVICE if raw is None else str(raw)
    if spec.kind and isinstance(raw, int | float) and not isinstance(raw, bool):
        return format_quantity(float(raw), spec.kind, units, spec.bare)
    if spec.boolean and isinstance(raw, bool):
        return "true" if raw else "false"
    if spec.key == "class_key" and isinstance(source, Mapping) and "class_key" not in source:
        return "pair-24awg-120"
    if spec.key == "cable.class_key":  # a further segment's cable: blank is the plan's
        cable = _raw(source, "cable")
        return "" if cable is None else CUSTOM_CABLE if raw is None else str(raw)
    return "" if raw is None else str(raw)


def row_tables(plan: Mapping[str, Any]) -> list[tuple[str, list[Any]]]:
    """Every table of rows in a plan document: (its group, its rows), each further segment's own tables after the
    segments ("segments.0.nodes")."""
    out = []
    for group in ROWS:
        head, _, key = group.partition(".")
        holder = plan.get(head) if key else plan
        rows = holder.get(key or head) if isinstance(holder, Mapping) else None
        out.append((group, rows if isinstance(rows, list) else []))
        if group == "segments":
            for i, seg in enumerate(out[-1][1][:MAX_FORM_ROWS]):
                for key in SEGMENT_ROWS:
                    nested = seg.get(key) if isinstance(seg, Mapping) else None
                    out.append((f"segments.{i}.{key}", nested if isinstance(nested, list) else []))
    return out


def form_from_plan(plan: Mapping[str, Any], units: UnitSystem | None = None, parent_id: str | None = None) -> FormState:
    """Input text for a plan document (validated or not; a version-1 document is read as its version-2 twin).
    Missing values give empty inputs."""
    plan = current_document(plan)
    system: UnitSystem = units or ("imperial" if plan.get("display_units") == "imperial" else "metric")
    values: dict[str, str] = {}
    for group, specs in GROUPS.items():
        source = plan if not group else plan.get(group)
        source = source if isinstance(source, Mapping) else {}
        for spec in specs:
            values[_path(group, spec.key)] = _text(spec, source, system)
    counts = {}
    for group, rows in row_tables(plan):
        specs = row_specs(group) or ()
        for i, row in enumerate(rows[:MAX_FORM_ROWS]):
            for spec in specs:
                values[f"{group}.{i}.{spec.key}"] = _text(spec, row, system)
        counts[group] = len(rows[:MAX_FORM_ROWS])
    values.setdefault("standard", "rs485")
    if not values.get("default_device"):
        values["default_device"] = DEFAULT_DEVICE
    for group in (g for g in counts if g.endswith("nodes")):
        for i in range(counts[group]):
            values[f"{group}.{i}.may_drive"] = values[f"{group}.{i}.may_drive"] or "false"
    for group in ("", "grounding"):
        for spec in GROUPS[group]:
            if spec.choices and not values.get(_path(group, spec.key)):
                values[_path(group, spec.key)] = spec.choices[0][0]
    return FormState(
        values,
        counts["nodes"],
        counts["terminations"],
        system,
        parent_id,
        n_bias=counts["bias"],
        n_probes=counts["probes"],
        rows={g: n for g, n in counts.items() if g not in ("nodes", "terminations", "bias", "probes")},
    )


STARTER_RATE_BPS = 115_200.0


def driver_class_for_rate(bit_rate_bps: float) -> str:
    """The plain library class built for the lowest rate at or above `bit_rate_bps`: the slowest edge that still
    suits the rate, since slower edges reflect less on stubs (common practice); the fastest class when none is
    built for the rate. Plain: no failsafe receiver, not isolated, the standard's common-mode range."""
    plain = [
        t for t in TRANSCEIVERS.values() if t.failsafe == "none" and not t.isolated and t.common_mode_max_v == 12.0
    ]
    fitting = [t for t in plain if t.max_bit_rate_bps >= bit_rate_bps]
    chosen = min(fitting, key=lambda t: t.max_bit_rate_bps, default=None)
    return chosen.key if chosen else max(plain, key=lambda t: t.max_bit_rate_bps).key


def starter_plan(units: UnitSystem) -> dict[str, Any]:
    """The new plan's document: 115.2 kbit/s, a device class that suits it, 100 m (or 300 ft) terminated at
    both ends, no nodes yet."""
    trunk_m = 300 * 0.3048 if units == "imperial" else 100.0  # a round 300 ft rather than 328.08 ft
    return {
        "format": PLAN_FORMAT,
        "format_version": PLAN_FORMAT_VERSION,
        "title": "",
        "standard": "rs485",
        "display_units": units,
        "bit_rate_bps": STARTER_RATE_BPS,
        "supply_v": 5.0,
        "trunk_length_m": trunk_m,
        "cable": {"class_key": "pair-24awg-120"},
        "default_device": driver_class_for_rate(STARTER_RATE_BPS),
        "driver": {"name": "controller", "position_m": 0.0, "stub_length_m": 0.0},
        "nodes": [],
        "terminations": [
            {"position_m": 0.0, "kind": "parallel", "resistance_ohm": 120.0},
            {"position_m": trunk_m, "kind": "parallel", "resistance_ohm": 120.0},
        ],
        "bias": [],
    }


_DEVICE_VALUES_ACTION = re.compile(
    r"^device_values:((?:driver|(?:segments\.\d{1,3}\.)?nodes\.\d{1,6}|repeaters\.\d{1,6})\.device)$"
)


def _put(target: dict[str, Any], key: str, value: Any) -> None:
    """Set a dotted key ("device.unit_loads") in a nested dict."""
    head, _, rest = key.partition(".")
    if rest:
        _put(target.setdefault(head, {}), rest, value)
    else:
        target[head] = value


def _cable_from_picker(segment: dict[str, Any], plan_cable: Any) -> None:
    """A further segment's cable as the form gave it turned into the plan's: the picker's blank choice with no
    values is the plan's cable (no cable), blank with values is values on the plan's cable class, "custom" a cable
    of its own values (class_key null)."""
    cable = segment.get("cable")
    if not isinstance(cable, dict):
        return
    pick = cable.pop("class_key", None)
    if pick in (None, "") and not cable:
        segment.pop("cable")
    elif pick == CUSTOM_CABLE:
        segment["cable"] = {"class_key": None, **cable}
    else:
        plan_key = plan_cable.get("class_key") if isinstance(plan_cable, dict) else None
        segment["cable"] = {"class_key": pick or plan_key, **cable}


def _device_from_picker(part: dict[str, Any]) -> None:
    """A part's device as the form gave it turned into the plan's: the picker's blank choice with no values is no
    device (the plan's default class), blank with values is values on the default class, "custom" is class_key
    null."""
    device = part.get("device")
    if not isinstance(device, dict):
        return
    pick = device.pop("class_key", None)
    if pick in (None, "") and not device:
        part.pop("device")
    elif pick == CUSTOM_DEVICE:
        part["device"] = {"class_key": None, **device}
    elif pick not in (None, ""):
        part["device"] = {"class_key": pick, **device}


def parse_form(form: Mapping[str, str]) -> ParsedForm:
    """Read the editor form into a plan document, collecting text that does not parse as a quantity.

    `shown_units` says which unit system the bare numbers were typed in; `display_units` is the system the
    user chose to keep with the plan (they differ right after the choice is changed)."""
    shown: UnitSystem = "imperial" if form.get("shown_units") == "imperial" else "metric"
    chosen: UnitSystem = "imperial" if form.get("display_units") == "imperial" else "metric"
    action = str(form.get("action") or "check")
    problems: list[Problem] = []
    values: dict[str, str] = {}
    doc: dict[str, Any] = {"format": PLAN_FORMAT, "format_version": PLAN_FORMAT_VERSION, "display_units": chosen}

    def read(path: str, spec: FieldSpec, target: dict[str, Any], text: str, row_name: str = "") -> None:
        text = text.strip() if spec.key not in ("notes",) else text
        values[path] = text
        if text == "":
            if spec.key.endswith("class_key"):
                _put(target, spec.key, None)
            elif spec.required:
                problems.append(_empty_problem(path, spec, shown))
            return
        if spec.boolean and text in ("true", "false"):
            _put(target, spec.key, text == "true")
            return
        if spec.kind is None:
            _put(target, spec.key, text)
            return
        try:
            _put(target, spec.key, parse_quantity(text, spec.kind, shown, spec.bare))
        except QuantityError as exc:
            label = _label_for(path, spec, row_name)
            allowed = field_allowed(path) | {
                "input_unit": spec.unit_label(shown),
                "format": "a number, optionally with a unit or SI prefix",
            }
            problems.append(
                Problem(path, label, text, allowed, not_a_number_message(label, text, path, spec, shown, exc))
            )
            _put(target, spec.key, text)  # so the plan validator does not also report it missing

    for group, specs in GROUPS.items():
        target = doc if not group else {}
        for spec in specs:
            path = _path(group, spec.key)
            if path in form or spec.key.endswith("class_key"):
                read(path, spec, target, str(form.get(path, "")))
        if group == "driver":
            _device_from_picker(target)
        if group:
            doc[group] = target

    raw_tables: dict[str, dict[int, dict[str, str]]] = {}
    for name, text in form.items():
        m = ROW_NAME.match(name)
        if m:
            raw_tables.setdefault(m.group(1), {}).setdefault(int(m.group(2)), {})[m.group(3)] = str(text)
    counts: dict[str, int] = {}

    def kept(group: str, raw_rows: dict[int, dict[str, str]], filled: Any = None) -> list[tuple[int, dict[str, str]]]:
        """The rows not removed and not blank, with their index as sent; blank rows are counted for re-rendering
        after the filled ones, so their numbering matches the messages."""
        rows, blank = [], 0
        for index in sorted(raw_rows)[:MAX_FORM_ROWS]:
            raw = raw_rows[index]
            if raw.get("remove"):
                continue
            # Selects always carry a value, so they do not count when deciding whether a row is blank; the driver's
            # pins need no place; a segment with rows of its own is not blank.
            needs_nothing = (group == "probes" and raw.get("kind") == "driver_pin") or bool(filled and filled(index))
            if not needs_nothing and all(
                not raw.get(s.key, "").strip() for s in row_specs(group) or () if not s.choices
            ):
                blank += 1
                continue
            rows.append((index, raw))
        counts[group] = min(len(rows) + blank, MAX_FORM_ROWS)
        return rows

    def table(group: str, rows: list[tuple[int, dict[str, str]]], name_as: str = "") -> list[dict[str, Any]]:
        items = []
        for i, (_, raw) in enumerate(rows):
            item: dict[str, Any] = {}
            for spec in row_specs(name_as or group) or ():
                read(f"{group}.{i}.{spec.key}", spec, item, raw.get(spec.key, ""), raw.get("name", "").strip())
            _device_from_picker(item)
            items.append(item)
        return items

    for group in ROWS:
        if group == "segments":

            def filled(index: int) -> bool:
                return any(raw_tables.get(f"segments.{index}.{key}") for key in SEGMENT_ROWS)

            rows = kept(group, raw_tables.get(group, {}), filled)
            segments = table(group, rows)
            for i, ((index, _), segment) in enumerate(zip(rows, segments, strict=True)):
                _cable_from_picker(segment, doc.get("cable"))
                for key in SEGMENT_ROWS:
                    nested = kept(f"segments.{i}.{key}", raw_tables.get(f"segments.{index}.{key}", {}))
                    segment[key] = table(f"segments.{i}.{key}", nested, key)
            doc["segments"] = segments
            continue
        head, _, key = group.partition(".")
        holder = doc.setdefault(head, {}) if key else doc
        holder[key or head] = table(group, kept(group, raw_tables.get(group, {})))
    four_wire = doc.get("four_wire") or {}
    if not any(four_wire.get(k) for k in ("master", "return_terminations", "return_bias")):
        doc.pop("four_wire", None)

    if doc.get("test_pattern") == "":
        doc.pop("test_pattern")
    parent = form.get("parent_id") or None
    state = FormState(
        values,
        counts["nodes"],
        counts["terminations"],
        shown,
        parent,
        list(problems),
        chosen,
        n_bias=counts["bias"],
        n_probes=counts["probes"],
        rows={g: n for g, n in counts.items() if g not in ("nodes", "terminations", "bias", "probes")},
    )
    opened = _DEVICE_VALUES_ACTION.match(action)
    if opened:
        state.open_devices.add(opened.group(1))
        action = "device_values"
    return ParsedForm(doc, state, problems, action)


def _empty_problem(path: str, spec: FieldSpec, units: UnitSystem) -> Problem:
    """A required input left blank: "Transceiver supply is empty; write a value in V, allowed 1.5 to 15 V."."""
    label = _label_for(path, spec)
    allowed = field_allowed(path)
    if spec.kind:
        allowed |= {"input_unit": spec.unit_label(units)}
    unit = spec.unit_label(units) if spec.kind else ""
    write = f"write a value in {unit}" if unit else "write a value"
    shown = range_text(allowed, units, spec)
    message = f"{label} is empty; {write}" + (f", allowed {shown}" if shown else "") + "."
    return Problem(path, label, "", allowed, message)


_ROW_WORDS = {
    "nodes": "Node",
    "branches": "Branch",
    "terminations": "Terminator",
    "bias": "Bias network",
    "probes": "Probe",
    "segments": "Segment",
    "repeaters": "Repeater",
    "four_wire.return_terminations": "Return-pair terminator",
    "four_wire.return_bias": "Return-pair bias network",
}


def _label_for(path: str, spec: FieldSpec, row_name: str = "") -> str:
    """The label of an input in messages, as the plan validator words it: "Node 4 ('d') ground offset",
    "Segment 1 node 2 position"."""
    m = ROW_NAME.match(path)
    if m:
        within, _, group = m.group(1).rpartition(".") if m.group(1).startswith("segments.") else ("", "", m.group(1))
        what = _ROW_WORDS[group]
        named = f" ('{row_name}')" if row_name and what in ("Node", "Branch", "Segment", "Repeater") else ""
        label = f"{what} {int(m.group(2)) + 1}{named} {spec.label.lower()}"
        return f"Segment {int(within.split('.')[1]) + 1} {label[0].lower()}{label[1:]}" if within else label
    group = path.split(".")[0] if "." in path else ""
    return f"{group.capitalize()} {spec.label.lower()}" if group else spec.label


def merge_problems(form_problems: list[Problem], plan_problems: list[Problem]) -> list[Problem]:
    """Form parse problems first; a plan problem on a field the form already reported is dropped."""
    seen = {p.field for p in form_problems}
    return [*form_problems, *(p for p in plan_problems if p.field not in seen)]


def with_units(state: FormState, doc: Mapping[str, Any], units: UnitSystem) -> FormState:
    """The same form shown in another unit system: parsed values re-formatted, unparsed text kept."""
    fresh = form_from_plan(doc, units, state.parent_id)
    for path, text in state.values.items():
        if path not in fresh.values or (fresh.values[path] == "" and text):
            fresh.values[path] = text
    fresh.n_nodes, fresh.n_terminations, fresh.n_bias = state.n_nodes, state.n_terminations, state.n_bias
    fresh.open_devices = state.open_devices
    fresh.n_probes = state.n_probes
    fresh.rows = dict(state.rows)
    return fresh


def draft_fields(state: FormState) -> str:
    """The typed form of a checked draft as JSON, for its "Edit this draft" button: every input's text."""
    fields = dict(state.values) | {"shown_units": state.units, "display_units": state.chosen_units or state.units}
    if state.parent_id:
        fields["parent_id"] = state.parent_id
    return json.dumps(fields, ensure_ascii=False)


def fields_from_draft(text: str) -> dict[str, str]:
    """Form fields back from `draft_fields`; text that is not such a JSON object gives an empty form."""
    try:
        doc = load_json(text)
    except JsonInputError:
        return {}
    if not isinstance(doc, dict):
        return {}
    return {str(k): v for k, v in list(doc.items())[:MAX_FORM_FIELDS] if isinstance(v, str)}


def plan_from_body(body: Any) -> BusPlan:
    """A plan from a JSON body: a plan document, or {"form": {...}} holding the editor's typed fields (what the
    editor's live verdict sends). Typed text is read as the form reads it; problems name the inputs."""
    if not (isinstance(body, dict) and set(body) == {"form"} and isinstance(body["form"], dict)):
        return load_plan(body)
    from pairline.server.messages import problem_message

    fields = {str(k): str(v) for k, v in list(body["form"].items())[:MAX_FORM_FIELDS]}
    parsed = parse_form(fields)
    try:
        plan = load_plan(parsed.doc)
    except BusInputError as exc:
        problems = merge_problems(parsed.problems, exc.problems)
        raise BusInputError([replace(p, message=problem_message(p, parsed.state.units)) for p in problems]) from exc
    if parsed.problems:
        raise BusInputError(parsed.problems)
    return plan
