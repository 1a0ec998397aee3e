"""The plan editor's fields: one FieldSpec per input (its label, the quantity kind its text is read as, its
choices), in groups (the plan's top fields, the cable, the driver, ...) and in tables of rows (nodes, terminators,
bias networks, probes, repeaters, segments and each segment's own rows, the four-wire return pair's rows)."""

import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

from pairline.engine.library import CABLES, TRANSCEIVERS
from pairline.server.quantities import Bare, UnitSystem, bare_unit

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
    FieldSpec("segment_name", "This trunk's segment name", hint="what repeaters call it"),
    FieldSpec(
        "response_budget_s",
        "Response budget (round trip)",
        "time",
        hint="the reply time-out less the slowest reply; blank: one bit",
    ),
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
    FieldSpec("branch", "Branch", hint="blank: on the trunk; a branch's name: on it, its position along the branch"),
    FieldSpec("position_m", "Position", "length"),
    FieldSpec("stub_length_m", "Stub", "length", placeholder="0"),
    replace(DEVICE_PICKER, key="device.class_key"),
    FieldSpec("may_drive", "May drive", choices=_YES_NO, boolean=True),
    FieldSpec("ground_offset_v", "Ground offset", "voltage", placeholder="0"),
)
DRIVES_PAIR = FieldSpec(
    "drives_pair",
    "Pair it drives",
    choices=(("", "the return pair"), ("return", "return pair"), ("transmit", "transmit pair (crossed)")),
    hint="four-wire plans only",
)
NODE = (*NODE_COLUMNS, *_device_fields("device.")[1:], DRIVES_PAIR)
TERMINATION = (
    FieldSpec("position_m", "Position", "length"),
    FieldSpec("kind", "Kind", choices=(("parallel", "parallel R"), ("rc", "series R–C (AC)"))),
    FieldSpec("resistance_ohm", "Resistance", "resistance"),
    FieldSpec("capacitance_f", "Capacitance", "capacitance", bare=Bare("nF", 1e-9, True), hint="RC only"),
)
BRANCH = (
    FieldSpec("name", "Branch name"),
    FieldSpec("junction_position_m", "Leaves the trunk at", "length"),
    FieldSpec("length_m", "Length", "length", hint="junction to its far end"),
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
# every node row with its device open, in the plan and its further segments, plus the rest
MAX_FORM_FIELDS = MAX_FORM_ROWS * (len(NODE) + 1) * 2 + 2000
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
CUSTOM_CABLE = "custom"  # a further segment's cable picker: a cable of its own values (class_key null)
SEGMENT = (
    FieldSpec("name", "Segment name"),
    FieldSpec("trunk_length_m", "Trunk length", "length"),
    FieldSpec(
        "cable.class_key",
        "Cable",
        choices=(
            ("", "the plan's cable"),
            *_choices(CABLES, "")[:-1],
            (CUSTOM_CABLE, "Custom cable (enter all values)"),
        ),
    ),
    *(replace(s, key="cable." + s.key) for s in CABLE[1:]),
    *(replace(s, key="grounding." + s.key) for s in GROUNDING),
)
REPEATER_COLUMNS = (
    FieldSpec("name", "Name"),
    FieldSpec("upstream_segment", "From segment"),
    FieldSpec("upstream_position_m", "at", "length"),
    FieldSpec("upstream_stub_m", "its stub", "length", placeholder="0"),
    FieldSpec("downstream_segment", "To segment"),
    FieldSpec("downstream_position_m", "at", "length", placeholder="0"),
    FieldSpec("downstream_stub_m", "its stub", "length", placeholder="0"),
    replace(DEVICE_PICKER, key="device.class_key"),
    FieldSpec("delay_s", "Delay", "time", placeholder="400 ns"),
    FieldSpec("ground_offset_v", "Ground offset", "voltage", placeholder="0"),
    FieldSpec("downstream_ground_offset_v", "Far side's ground", "voltage", placeholder="its own"),
)
REPEATER = (*REPEATER_COLUMNS, *_device_fields("device.")[1:])
FOUR_WIRE = (FieldSpec("master", "Master", hint="the plan's driver; blank: a two-wire plan"),)
SEGMENT_ROWS = ("nodes", "branches", "terminations", "bias")  # the rows each further segment holds, like the plan's
GROUPS: dict[str, tuple[FieldSpec, ...]] = {
    "": TOP,
    "cable": CABLE,
    "driver": DRIVER,
    "grounding": GROUNDING,
    "sampling_window": SAMPLING,
    "tolerances": TOLERANCES,
    "four_wire": FOUR_WIRE,
}
ROWS: dict[str, tuple[FieldSpec, ...]] = {
    "nodes": NODE,
    "branches": BRANCH,
    "terminations": TERMINATION,
    "bias": BIAS,
    "probes": PROBE,
    "segments": SEGMENT,
    "repeaters": REPEATER,
    "four_wire.return_terminations": TERMINATION,
    "four_wire.return_bias": BIAS,
}
# A row's input name: its table (a further segment's own tables carry the segment's index), its index, its key.
ROW_NAME = re.compile(
    r"^((?:segments\.\d{1,3}\.)?(?:nodes|branches|terminations|bias)|probes|segments|repeaters"
    r"|four_wire\.return_terminations|four_wire\.return_bias)\.(\d{1,6})\.([\w.]+)$"
)


def row_specs(group: str) -> tuple[FieldSpec, ...] | None:
    """The fields of a table of rows: "nodes", "repeaters", "segments.2.bias" (a further segment's bias rows)."""
    if group in ROWS:
        return ROWS[group]
    head, _, rest = group.rpartition(".")
    return ROWS[rest] if re.fullmatch(r"segments\.\d{1,3}", head) and rest in SEGMENT_ROWS else None


def spec_for(path: str) -> FieldSpec | None:
    """The field spec of a dotted path such as `nodes.3.stub_length_m`, `segments.0.nodes.1.name` or
    `driver.device.rise_time_s`."""
    m = ROW_NAME.match(path)
    if m:
        return next((f for f in row_specs(m.group(1)) or () if f.key == m.group(3)), None)
    parts = path.split(".")
    group, key = (parts[0], ".".join(parts[1:])) if parts[0] in GROUPS and len(parts) > 1 else ("", path)
    return next((f for f in GROUPS.get(group, ()) if f.key == key), None)
