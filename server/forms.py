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

from pairline.engine.library import CABLES, TRANSCEIVERS
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
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.messages import field_allowed, not_a_number_message, range_text
from pairline.server.quantities import Bare, QuantityError, UnitSystem, bare_unit, format_quantity, parse_quantity

MAX_FORM_ROWS = 512


@dataclass(frozen=True, slots=True)
class FieldSpec:
    key: str  # the plan attribute, last part of the dotted path
    label: str
    kind: str | None = None  # quantity kind (server.quantities.KINDS); None for text and choices
    bare: Bare | None = None  # overrides the kind's bare unit
    choices: tuple[tuple[str, str], ...] = ()  # (value, label) for a select
    hint: str = ""
    placeholder: str = ""  # what a blank input means (the plan's default)
    required: bool = False  # a cleared input is an error, not a silent default
    boolean: bool = False  # a yes / no select: "true" and "false" become JSON true and false

    def unit_label(self, units: UnitSystem) -> str:
        return bare_unit(self.kind, units, self.bare).label if self.kind else ""


def _choices(library: Mapping[str, Any], custom: str) -> tuple[tuple[str, str], ...]:
    return (*((key, item.label) for key, item in library.items()), ("", custom))


CUSTOM_DEVICE = "custom"  # the device picker's choice for a device of its own values (class_key null)
DEVICE_CLASSES = tuple((key, t.choice_label) for key, t in TRANSCEIVERS.items())
_YES_NO = (("false", "no"), ("true", "yes"))


TOP = (
    FieldSpec("title", "Plan title"),
    FieldSpec("standard", "Standard", choices=(("rs485", "RS-485 (multipoint)"), ("rs422", "RS-422 (one driver)"))),
    FieldSpec("bit_rate_bps", "Bit rate", "rate", hint="e.g. 115.2k, 1M"),
    FieldSpec("supply_v", "Transceiver supply", "voltage", required=True),
    FieldSpec("trunk_length_m", "Trunk length", "length"),
    FieldSpec("default_device", "Default device class", choices=DEVICE_CLASSES, hint="every node that names no class"),
    FieldSpec("test_pattern", "Test bit pattern", hint="0s and 1s; blank for a built-in pseudo-random run"),
    FieldSpec(
        "probe_signal",
        "Signal at the probes",
        choices=(("pattern", "the bit pattern"), ("step", "a single step from 0 V to high")),
    ),
    FieldSpec("notes", "Notes"),
)
CABLE = (
    FieldSpec("class_key", "Cable class", choices=_choices(CABLES, "Custom cable (enter all values)")),
    FieldSpec("z0_ohm", "Impedance Z0", "resistance"),
    FieldSpec("velocity_factor", "Velocity factor", "plain", hint="0.3 to 1, or a percentage"),
    FieldSpec("resistance_ohm_per_m", "Conductor resistance", "resistance_per_length", hint="per conductor"),
    FieldSpec("capacitance_f_per_m", "Capacitance", "capacitance_per_length"),
    FieldSpec("skin_effect_onset_hz", "Skin-effect onset", "frequency"),
    FieldSpec("dielectric_loss_tangent", "Loss tangent", "plain"),
)
# A device: the class picker, then the values that may override the class (engine.plan.DEVICE_VALUES).
DEVICE_PICKER = FieldSpec(
    "class_key",
    "Device",
    choices=(("", "the plan's default class"), *DEVICE_CLASSES, (CUSTOM_DEVICE, "Custom (its own values)")),
)
DEVICE = (
    FieldSpec("unit_loads", "Unit loads", "plain", hint="1, 1/2, 1/4, 1/8"),
    FieldSpec(
        "failsafe",
        "Receiver failsafe",
        choices=(
            ("", "as the class"),
            ("none", "none"),
            ("open_short", "open or shorted inputs"),
            ("idle_bus", "idle bus"),
        ),
    ),
    FieldSpec("threshold_low_v", "Low threshold", "voltage", hint="reads 0 at or below; e.g. -200 mV"),
    FieldSpec("threshold_high_v", "High threshold", "voltage", hint="reads 1 at or above; e.g. -10 mV"),
    FieldSpec("open_circuit_v", "Driver open-circuit output", "voltage"),
    FieldSpec("source_ohm", "Driver source resistance", "resistance"),
    FieldSpec("output_54_ohm_v", "Driver minimum into 54 Ω", "voltage", hint="instead of the two above"),
    FieldSpec("rise_time_s", "Edge time (10–90 %)", "time", hint="e.g. 100 ns, 1.2 µs"),
    FieldSpec("input_capacitance_f", "Input C", "capacitance"),
    FieldSpec("common_mode_min_v", "Common-mode range from", "voltage"),
    FieldSpec("common_mode_max_v", "Common-mode range to", "voltage"),
    FieldSpec("isolated", "Galvanically isolated", choices=(("", "as the class"), *_YES_NO), boolean=True),
    FieldSpec("isolation_rating_vrms", "Isolation rating (Vrms)", "voltage", hint="1-minute withstand"),
    FieldSpec(
        "isolation_grade",
        "Isolation grade",
        choices=(("", "as the class"), ("basic", "basic"), ("reinforced", "reinforced")),
    ),
)


def _device_fields(prefix: str) -> tuple[FieldSpec, ...]:
    """The picker and the device values under a prefix ("device."), as fields of their group or row."""
    return tuple(replace(s, key=prefix + s.key) for s in (DEVICE_PICKER, *DEVICE))


DRIVER = (
    FieldSpec("name", "Driver name", required=True),
    FieldSpec("position_m", "Position on trunk", "length", required=True),
    FieldSpec("stub_length_m", "Stub length", "length", placeholder="0"),
    *_device_fields("device."),
)
NODE_COLUMNS = (
    FieldSpec("name", "Name"),
    FieldSpec("position_m", "Position", "length"),
    FieldSpec("stub_length_m", "Stub", "length", placeholder="0"),
    replace(DEVICE_PICKER, key="device.class_key"),
    FieldSpec("may_drive", "May drive", choices=_YES_NO, boolean=True),
    FieldSpec("ground_offset_v", "Ground offset", "voltage", placeholder="0"),
)
NODE = (*NODE_COLUMNS, *_device_fields("device.")[1:])
TERMINATION = (
    FieldSpec("position_m", "Position", "length"),
    FieldSpec("kind", "Kind", choices=(("parallel", "parallel R"), ("rc", "series R–C (AC)"))),
    FieldSpec("resistance_ohm", "Resistance", "resistance"),
    FieldSpec("capacitance_f", "Capacitance", "capacitance", bare=Bare("nF", 1e-9, True), hint="RC only"),
)
BIAS = (
    FieldSpec("position_m", "Position", "length"),
    FieldSpec("pull_up_ohm", "Pull-up (A to supply)", "resistance"),
    FieldSpec("pull_down_ohm", "Pull-down (B to ground)", "resistance"),
    FieldSpec("supply_v", "Bias supply", "voltage", placeholder="the transceiver supply"),
)
GROUNDING = (
    FieldSpec(
        "signal_ground",
        "Signal-ground conductor",
        choices=(("none", "none"), ("conductor", "a conductor beside the pair")),
    ),
    FieldSpec(
        "ground_conductor_ohm_per_m",
        "Its resistance",
        "resistance_per_length",
        hint="blank: like one conductor of the pair",
    ),
    FieldSpec("ground_series_ohm", "Series resistor at each node", "resistance", placeholder="100 Ω"),
    FieldSpec(
        "shield",
        "Shield earthed at",
        choices=(("none", "no shield, or not stated"), ("one_end", "one end"), ("both_ends", "both ends")),
    ),
)
MAX_FORM_FIELDS = MAX_FORM_ROWS * (len(NODE) + 1) + 1000  # every node row with its device open, plus the rest
SAMPLING = (
    FieldSpec(
        "centre_ui", "Sampling instant", "plain", hint="bits after the start edge; a UART's is 0.5", placeholder="0.5"
    ),
    FieldSpec(
        "half_width_ui", "Window half-width", "plain", hint="bits either side; 2/16 for a UART", placeholder="0.125"
    ),
)
_OF_CLASS = "blank: the class's"
TOLERANCES = (
    FieldSpec("z0_tolerance", "Cable Z0 ±", "plain", hint="e.g. 10 %; " + _OF_CLASS),
    FieldSpec("velocity_factor_tolerance", "Velocity factor ±", "plain", hint=_OF_CLASS),
    FieldSpec("terminator_tolerance", "Terminators ±", "plain", hint="blank: 5 % (E24)"),
    FieldSpec("bias_tolerance", "Bias resistors ±", "plain", hint="blank: 5 % (E24)"),
    FieldSpec("rise_time_min_s", "Fastest driver edge", "time", hint=_OF_CLASS),
    FieldSpec("rise_time_max_s", "Slowest driver edge", "time", hint=_OF_CLASS),
    FieldSpec("input_capacitance_tolerance", "Receiver capacitance ±", "plain", hint="blank: 0.4x to 1.5x"),
    FieldSpec("unit_loads_min_ratio", "Lightest receiver load", "plain", hint="of its rating; blank: 0.5"),
    FieldSpec("monte_carlo_variants", "Monte Carlo variants", "plain", hint="0: corners only", placeholder="0"),
    FieldSpec("seed", "Random seed", "plain", placeholder="1"),
)
PROBE = (
    FieldSpec(
        "kind",
        "Probe at",
        choices=(("node", "a node's input"), ("junction", "a trunk point"), ("driver_pin", "the driver's pins")),
    ),
    FieldSpec("node", "Node"),
    FieldSpec("position_m", "Trunk position", "length"),
)
GROUPS: dict[str, tuple[FieldSpec, ...]] = {
    "": TOP,
    "cable": CABLE,
    "driver": DRIVER,
    "grounding": GROUNDING,
    "sampling_window": SAMPLING,
    "tolerances": TOLERANCES,
}
ROWS: dict[str, tuple[FieldSpec, ...]] = {"nodes": NODE, "terminations": TERMINATION, "bias": BIAS, "probes": PROBE}


def spec_for(path: str) -> FieldSpec | None:
    """The field spec of a dotted path such as `nodes.3.stub_length_m` or `driver.device.rise_time_s`."""
    parts = path.split(".")
    if len(parts) >= 3 and parts[0] in ROWS and parts[1].isdigit():
        key = ".".join(parts[2:])
        return next((f for f in ROWS[parts[0]] if f.key == key), None)
    group, key = (parts[0], ".".join(parts[1:])) if parts[0] in GROUPS and len(parts) > 1 else ("", path)
    return next((f for f in GROUPS.get(group, ()) if f.key == key), None)


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
    return "" if raw is None else str(raw)


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
    for group, specs in ROWS.items():
        rows = plan.get(group)
        rows = rows if isinstance(rows, list) else []
        for i, row in enumerate(rows[:MAX_FORM_ROWS]):
            for spec in specs:
                values[f"{group}.{i}.{spec.key}"] = _text(spec, row, system)
        counts[group] = len(rows[:MAX_FORM_ROWS])
    values.setdefault("standard", "rs485")
    if not values.get("default_device"):
        values["default_device"] = DEFAULT_DEVICE
    for i in range(counts["nodes"]):
        values[f"nodes.{i}.may_drive"] = values[f"nodes.{i}.may_drive"] or "false"
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


_ROW_NAME = re.compile(r"^(nodes|terminations|bias|probes)\.(\d{1,6})\.([\w.]+)$")
_DEVICE_VALUES_ACTION = re.compile(r"^device_values:((?:driver|nodes\.\d{1,6})\.device)$")


def _put(target: dict[str, Any], key: str, value: Any) -> None:
    """Set a dotted key ("device.unit_loads") in a nested dict."""
    head, _, rest = key.partition(".")
    if rest:
        _put(target.setdefault(head, {}), rest, value)
    else:
        target[head] = value


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

    counts: dict[str, int] = {}
    for group, specs in ROWS.items():
        raw_rows: dict[int, dict[str, str]] = {}
        for name, text in form.items():
            m = _ROW_NAME.match(name)
            if m and m.group(1) == group:
                raw_rows.setdefault(int(m.group(2)), {})[m.group(3)] = str(text)
        rows = []
        blank = 0  # blank rows come back after the filled ones, so their numbering matches the messages
        for index in sorted(raw_rows)[:MAX_FORM_ROWS]:
            raw = raw_rows[index]
            if raw.get("remove"):
                continue
            # Selects always carry a value, so they do not count when deciding whether a row is blank; the driver's
            # pins need no place.
            needs_nothing = group == "probes" and raw.get("kind") == "driver_pin"
            if not needs_nothing and all(not raw.get(s.key, "").strip() for s in specs if not s.choices):
                blank += 1
                continue
            rows.append(raw)
        items = []
        for i, raw in enumerate(rows):
            item: dict[str, Any] = {}
            for spec in specs:
                read(f"{group}.{i}.{spec.key}", spec, item, raw.get(spec.key, ""), raw.get("name", "").strip())
            _device_from_picker(item)
            items.append(item)
        doc[group] = items
        counts[group] = min(len(items) + blank, MAX_FORM_ROWS)

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


def _label_for(path: str, spec: FieldSpec, row_name: str = "") -> str:
    """The label of an input in messages, as the plan validator words it: "Node 4 ('d') ground offset"."""
    m = _ROW_NAME.match(path)
    if m:
        what = {"nodes": "Node", "terminations": "Terminator", "bias": "Bias network", "probes": "Probe"}[m.group(1)]
        named = f" ('{row_name}')" if row_name and what == "Node" else ""
        return f"{what} {int(m.group(2)) + 1}{named} {spec.label.lower()}"
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
