"""The bus plan: one versioned JSON document, validated by one pydantic model.

The same model validates plan files, the JSON API, the CLI and saved plans; the web form's field names are
the dotted paths of this model. Every physical field carries its SI unit in its name. Bad input raises
`BusInputError` listing every problem at once, each with its field path, value and allowed range.
"""

import math
from dataclasses import dataclass
from typing import Annotated, Any, Literal

import annotated_types as at
from pairline.engine.library import CABLES, TRANSCEIVERS, CableClass
from pairline.engine.units import si_format
from pydantic import BaseModel, ConfigDict, Field, ValidationError, ValidationInfo, field_validator
from pydantic.fields import FieldInfo
from pydantic_core import PydanticCustomError

PLAN_FORMAT: Literal["pairline-bus-plan"] = "pairline-bus-plan"
PLAN_FORMAT_VERSION: Literal[1] = 1
MAX_NODES = 512
MAX_TRUNK_M = 4000.0
MIN_TRUNK_M = 0.1  # a bench bus; shorter is no cable run
MAX_STUB_M = 100.0
MAX_NAME_CHARS = 60
MIN_BIAS_OHM = 10.0
MAX_BIAS_OHM = 10e6
PATTERN_CHARS = 512


def _f(
    title: str,
    unit: str,
    *,
    ge: float | None = None,
    gt: float | None = None,
    le: float | None = None,
    default: Any = ...,
    description: str = "",
) -> Any:
    """A physical field: title and unit feed error messages and form labels."""
    return Field(default, title=title, ge=ge, gt=gt, le=le, description=description, json_schema_extra={"unit": unit})


# The smallest non-zero magnitude a field of each unit may hold. Anything smaller (down to subnormal numbers
# such as 5e-324) is no physical quantity, only a typing slip or a probe: 1 mm of cable, 1 mV, 1 mΩ, 1 fF,
# a millionth of a dimensionless ratio.
NONZERO_MIN_BY_UNIT: dict[str, float] = {
    "m": 1e-3,
    "V": 1e-3,
    "Ω": 1e-3,
    "Ω/m": 1e-6,
    "F": 1e-15,
    "F/m": 1e-15,
    "": 1e-6,
}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, frozen=True)

    @field_validator("*")
    @classmethod
    def _not_vanishingly_small(cls, value: Any, info: ValidationInfo) -> Any:
        """Refuse a non-zero number below its unit's smallest physical magnitude (NONZERO_MIN_BY_UNIT)."""
        if not isinstance(value, float) or value == 0.0 or info.field_name is None:
            return value
        extra = cls.model_fields[info.field_name].json_schema_extra
        unit = extra.get("unit") if isinstance(extra, dict) else None
        floor = NONZERO_MIN_BY_UNIT.get(unit) if isinstance(unit, str) else None
        if floor is not None and abs(value) < floor:
            raise PydanticCustomError("vanishing_number", "too small to be physical", {"nonzero_min": floor})
        return value


Name = Annotated[str, Field(min_length=1, max_length=MAX_NAME_CHARS)]


class CableSpec(_Strict):
    """A built-in cable class, optionally with some values overridden; or all-custom with class_key null."""

    class_key: str | None = Field("pair-24awg-120", title="Cable class")
    z0_ohm: float | None = _f("Characteristic impedance", "Ω", ge=30.0, le=300.0, default=None)
    velocity_factor: float | None = _f("Velocity factor", "", ge=0.3, le=1.0, default=None)
    resistance_ohm_per_m: float | None = _f(
        "Conductor resistance",
        "Ω/m",
        ge=0.0,
        le=2.0,
        default=None,
        description="DC, per conductor; the pair's loop is twice this",
    )
    capacitance_f_per_m: float | None = _f("Capacitance per metre", "F/m", ge=5e-12, le=500e-12, default=None)
    skin_effect_onset_hz: float | None = _f("Skin-effect onset", "Hz", ge=1e3, le=1e9, default=None)
    dielectric_loss_tangent: float | None = _f("Dielectric loss tangent", "", ge=0.0, le=0.2, default=None)


class DriverSpec(_Strict):
    name: Name = Field("driver", title="Driver name")
    position_m: float = _f("Driver position", "m", ge=0.0, le=MAX_TRUNK_M, default=0.0)
    stub_length_m: float = _f("Driver stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    transceiver: str | None = Field("edge-100ns", title="Driver class")
    rise_time_s: float | None = _f("Driver rise time", "s", ge=0.5e-9, le=20e-6, default=None)
    open_circuit_v: float | None = _f("Driver open-circuit differential voltage", "V", ge=0.1, le=12.0, default=None)
    source_ohm: float | None = _f("Driver source resistance", "Ω", ge=0.0, le=1000.0, default=None)


class NodeSpec(_Strict):
    name: Name = Field(title="Node name")
    position_m: float = _f("Position", "m", ge=0.0, le=MAX_TRUNK_M)
    stub_length_m: float = _f("Stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    role: Literal["receiver", "transceiver"] = Field(
        "receiver", title="Role", description="a transceiver may also drive (RS-485)"
    )
    # down to a millionth of a unit load (12 GΩ), an ideal probe that draws nothing
    unit_loads: float = _f("Unit loads", "UL", ge=1e-6, le=32.0, default=1.0)
    input_capacitance_f: float = _f("Input capacitance", "F", ge=0.0, le=2e-9, default=20e-12)
    ground_offset_v: float = _f(
        "Ground offset",
        "V",
        ge=-10_000.0,
        le=10_000.0,
        default=0.0,
        description="this node's ground relative to the driver's ground",
    )


class TerminationSpec(_Strict):
    position_m: float = _f("Terminator position", "m", ge=0.0, le=MAX_TRUNK_M)
    kind: Literal["parallel", "rc"] = Field("parallel", title="Terminator kind")
    resistance_ohm: float = _f("Terminator resistance", "Ω", ge=1.0, le=1e6)
    capacitance_f: float | None = _f("Terminator capacitance", "F", ge=1e-12, le=100e-6, default=None)


class BiasSpec(_Strict):
    position_m: float = _f("Bias position", "m", ge=0.0, le=MAX_TRUNK_M, default=0.0)
    pull_up_ohm: float = _f("Pull-up resistor", "Ω", ge=MIN_BIAS_OHM, le=MAX_BIAS_OHM)
    pull_down_ohm: float = _f("Pull-down resistor", "Ω", ge=MIN_BIAS_OHM, le=MAX_BIAS_OHM)
    supply_v: float | None = _f("Bias supply", "V", ge=1.0, le=15.0, default=None)


class SamplingWindowSpec(_Strict):
    """Where in each bit a receiver's level must hold, in bits after the start edge its input shows."""

    centre_ui: float = _f("Sampling instant", "bit", ge=0.1, le=0.9, default=0.5, description="UART: mid-bit")
    half_width_ui: float = _f(
        "Sampling window half-width", "bit", ge=0.0, le=0.4, default=0.125, description="UART: 2/16 of a bit"
    )


class ProbeSpec(_Strict):
    """A point to show the waveform at: a node's receiver input, a trunk position, or the driver's pins."""

    kind: Literal["node", "junction", "driver_pin"] = Field("node", title="Probe")
    node: str | None = Field(None, max_length=MAX_NAME_CHARS, title="Probed node")
    position_m: float | None = _f("Probed trunk position", "m", ge=0.0, le=MAX_TRUNK_M, default=None)


class ToleranceSpec(_Strict):
    """Component tolerances for the worst-case analysis; each left empty takes the library class's own."""

    z0_tolerance: float | None = _f("Cable Z0 tolerance", "", ge=0.0, le=0.5, default=None, description="± fraction")
    velocity_factor_tolerance: float | None = _f(
        "Velocity factor tolerance", "", ge=0.0, le=0.3, default=None, description="± fraction"
    )
    terminator_tolerance: float | None = _f("Terminator tolerance", "", ge=0.0, le=0.5, default=None)
    bias_tolerance: float | None = _f("Bias resistor tolerance", "", ge=0.0, le=0.5, default=None)
    rise_time_min_s: float | None = _f("Fastest driver edge", "s", ge=0.1e-9, le=20e-6, default=None)
    rise_time_max_s: float | None = _f("Slowest driver edge", "s", ge=0.1e-9, le=20e-6, default=None)
    input_capacitance_tolerance: float | None = _f(
        "Receiver capacitance tolerance", "", ge=0.0, le=1.0, default=None, description="± fraction"
    )
    unit_loads_min_ratio: float | None = _f(
        "Lightest receiver load", "", gt=0.0, le=1.0, default=None, description="fraction of the unit-load rating"
    )
    monte_carlo_variants: int = Field(
        0, ge=0, le=10_000, title="Monte Carlo variants", description="0: corners only (the Monte Carlo is slow)"
    )
    seed: int = Field(1, ge=0, le=2**31 - 1, title="Random seed")


class BusPlan(_Strict):
    format: Literal["pairline-bus-plan"] = Field(PLAN_FORMAT, title="Format")
    format_version: Literal[1] = Field(PLAN_FORMAT_VERSION, title="Format version")
    title: str = Field("", max_length=120, title="Title")
    notes: str = Field("", max_length=4000, title="Notes")
    display_units: Literal["metric", "imperial"] = Field("metric", title="Display units")
    standard: Literal["rs485", "rs422"] = Field("rs485", title="Standard")
    bit_rate_bps: float = _f("Bit rate", "bit/s", ge=50.0, le=100e6)
    supply_v: float = _f("Supply voltage", "V", ge=1.5, le=15.0, default=5.0)
    trunk_length_m: float = _f("Trunk length", "m", ge=MIN_TRUNK_M, le=MAX_TRUNK_M)
    cable: CableSpec = Field(default_factory=CableSpec, title="Cable")
    driver: DriverSpec = Field(default_factory=DriverSpec, title="Driver")
    nodes: list[NodeSpec] = Field(min_length=1, max_length=MAX_NODES, title="Nodes")
    terminations: list[TerminationSpec] = Field(default_factory=list, max_length=16, title="Terminations")
    bias: BiasSpec | None = Field(None, title="Failsafe bias")
    test_pattern: str | None = Field(
        None,
        min_length=2,
        max_length=PATTERN_CHARS,
        pattern=r"^[01]+$",
        title="Bit pattern",
        description="0s and 1s; default a pseudo-random run",
    )
    sampling_window: SamplingWindowSpec = Field(default_factory=SamplingWindowSpec, title="Sampling window")
    probes: list[ProbeSpec] = Field(default_factory=list, max_length=16, title="Probes")
    probe_signal: Literal["pattern", "step"] = Field(
        "pattern", title="Probe signal", description="the bit pattern, or a single step 0 -> high"
    )
    tolerances: ToleranceSpec = Field(default_factory=ToleranceSpec, title="Tolerances")


@dataclass(frozen=True, slots=True)
class Problem:
    field: str  # dotted path, also the form input's name
    label: str
    value: Any
    allowed: dict[str, Any]
    message: str


class BusInputError(ValueError):
    """Input that cannot be planned. Carries every problem found, each naming field, value and range."""

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        super().__init__("; ".join(p.message for p in problems))


@dataclass(frozen=True, slots=True)
class ResolvedCable:
    """The cable with every value filled in, from its class and the plan's overrides."""

    label: str
    z0_ohm: float
    velocity_factor: float
    resistance_ohm_per_m: float
    capacitance_f_per_m: float
    skin_effect_onset_hz: float | None
    dielectric_loss_tangent: float
    source: str


@dataclass(frozen=True, slots=True)
class ResolvedDriver:
    label: str
    rise_time_s: float
    open_circuit_v: float
    source_ohm: float
    common_mode_v: float
    unit_loads: float
    source: str


def resolve_cable(spec: CableSpec) -> ResolvedCable:
    """Class values with the plan's overrides on top. Assumes a validated plan."""
    base: CableClass | None = CABLES.get(spec.class_key) if spec.class_key else None
    z0 = spec.z0_ohm if spec.z0_ohm is not None else base.z0_ohm if base else None
    vf = spec.velocity_factor if spec.velocity_factor is not None else base.velocity_factor if base else None
    r = (
        spec.resistance_ohm_per_m
        if spec.resistance_ohm_per_m is not None
        else (base.resistance_ohm_per_m if base else None)
    )
    if z0 is None or vf is None or r is None:
        raise ValueError("cable not validated: z0_ohm, velocity_factor and resistance_ohm_per_m required")
    c = spec.capacitance_f_per_m if spec.capacitance_f_per_m is not None else (1.0 / (z0 * vf * 299_792_458.0))
    onset = (
        spec.skin_effect_onset_hz
        if spec.skin_effect_onset_hz is not None
        else (base.skin_effect_onset_hz if base else None)
    )
    tan_d = (
        spec.dielectric_loss_tangent
        if spec.dielectric_loss_tangent is not None
        else (base.dielectric_loss_tangent if base else 0.0)
    )
    customised = base is None or any(getattr(spec, k) is not None for k in CableSpec.model_fields if k != "class_key")
    label = (base.label if base else "Custom cable") + (" (custom values)" if base and customised else "")
    source = base.source if base and not customised else "values entered by the user"
    return ResolvedCable(label, z0, vf, r, c, onset, tan_d, source)


def resolve_driver(spec: DriverSpec) -> ResolvedDriver:
    base = TRANSCEIVERS.get(spec.transceiver) if spec.transceiver else None
    rise = spec.rise_time_s if spec.rise_time_s is not None else base.rise_time_s if base else None
    v_oc = spec.open_circuit_v if spec.open_circuit_v is not None else base.open_circuit_v if base else None
    r_s = spec.source_ohm if spec.source_ohm is not None else base.source_ohm if base else None
    if rise is None or v_oc is None or r_s is None:
        raise ValueError("driver not validated: rise_time_s, open_circuit_v and source_ohm required")
    customised = base is None or any(v is not None for v in (spec.rise_time_s, spec.open_circuit_v, spec.source_ohm))
    label = (base.label if base else "Custom driver") + (" (custom values)" if base and customised else "")
    return ResolvedDriver(
        label=label,
        rise_time_s=rise,
        open_circuit_v=v_oc,
        source_ohm=r_s,
        common_mode_v=base.common_mode_v if base else 2.5,
        unit_loads=base.unit_loads if base else 1.0,
        source=base.source if base and not customised else "values entered by the user",
    )


def input_resistance_ohm(unit_loads: float) -> float:
    """Receiver input resistance from its unit-load rating: one unit load ~ 12 kOhm (TIA-485-A)."""
    return 12_000.0 / unit_loads


# --- validation ---------------------------------------------------------------------------------------


def load_plan(data: Any) -> BusPlan:
    """Validate a plan document (a dict from JSON). Raises BusInputError with every problem at once:
    field checks and cross-field checks both run, so the user sees the whole list in one go."""
    if not isinstance(data, dict):
        raise BusInputError(
            [Problem("", "Plan", _short(data), {"type": "JSON object"}, "A bus plan must be a JSON object.")]
        )
    problems: list[Problem] = []
    plan: BusPlan | None = None
    try:
        plan = BusPlan.model_validate(data)
    except ValidationError as exc:
        problems = [_problem_from_pydantic(e, data) for e in exc.errors()]
    seen = {p.field for p in problems}
    problems += [p for p in cross_field_problems(data) if p.field not in seen]
    if problems or plan is None:
        raise BusInputError(problems)
    return plan


def plan_to_dict(plan: BusPlan) -> dict[str, Any]:
    """The plan as its JSON document (defaults included, so a saved file states every value)."""
    return plan.model_dump(mode="json")


def _num(obj: Any, key: str, default: float | None = None) -> float | None:
    """A finite number from a raw dict, or the default when absent or not a number (field checks report it)."""
    raw = obj.get(key, default) if isinstance(obj, dict) else default
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        return None
    number = _finite_float(raw)
    return number


def _sub(obj: dict[str, Any], key: str) -> dict[str, Any]:
    raw = obj.get(key)
    return raw if isinstance(raw, dict) else {}


def _items(obj: Any, key: str) -> list[Any]:
    raw = obj.get(key) if isinstance(obj, dict) else None
    return raw if isinstance(raw, list) and len(raw) <= MAX_NODES else []


def cross_field_problems(data: dict[str, Any]) -> list[Problem]:
    """Checks that involve two fields, run on the raw document so they report alongside field errors."""
    problems: list[Problem] = []
    length = _num(data, "trunk_length_m")
    standard = data.get("standard", "rs485")

    def past_end(path: str, label: str, position_m: float | None) -> None:
        if length is not None and length >= MIN_TRUNK_M and position_m is not None and position_m > length:
            problems.append(
                Problem(
                    path,
                    label,
                    position_m,
                    {"min": 0.0, "max": length, "unit": "m"},
                    f"{label} is at {position_m:g} m, past the trunk end at {length:g} m "
                    f"(trunk_length_m); allowed 0 to {length:g} m.",
                )
            )

    driver = _sub(data, "driver")
    past_end("driver.position_m", "Driver position", _num(driver, "position_m", 0.0))
    driver_name = driver.get("name", "driver")
    names: dict[str, str] = {driver_name: "the driver"} if isinstance(driver_name, str) else {}
    for i, node in enumerate(_items(data, "nodes")):
        if not isinstance(node, dict):
            continue
        name = node.get("name")
        shown = f" ('{name}')" if isinstance(name, str) else ""
        past_end(f"nodes.{i}.position_m", f"Node {i + 1}{shown} position", _num(node, "position_m"))
        if isinstance(name, str) and name in names:
            problems.append(
                Problem(
                    f"nodes.{i}.name",
                    f"Node {i + 1} name",
                    name,
                    {"rule": "unique among the driver and all nodes"},
                    f"Node {i + 1} name '{name}' is already used by {names[name]}; every node needs its own name.",
                )
            )
        elif isinstance(name, str):
            names[name] = f"node {i + 1}"
        if standard == "rs422" and node.get("role") == "transceiver":
            problems.append(
                Problem(
                    f"nodes.{i}.role",
                    f"Node {i + 1}{shown} role",
                    "transceiver",
                    {"choices": ["receiver"], "because": "standard is rs422"},
                    f"Node {i + 1}{shown} is a transceiver, but an RS-422 bus has one "
                    f"driver and receivers only (standard); make it a receiver or choose "
                    f"RS-485.",
                )
            )
    for i, term in enumerate(_items(data, "terminations")):
        if not isinstance(term, dict):
            continue
        past_end(f"terminations.{i}.position_m", f"Terminator {i + 1} position", _num(term, "position_m"))
        if term.get("kind") == "rc" and term.get("capacitance_f") is None:
            problems.append(
                Problem(
                    f"terminations.{i}.capacitance_f",
                    f"Terminator {i + 1} capacitance",
                    None,
                    {"min": 1e-12, "max": 100e-6, "unit": "F"},
                    f"Terminator {i + 1} is an RC terminator and needs a capacitance; allowed 1 pF to 100 µF.",
                )
            )
    if isinstance(data.get("bias"), dict):
        past_end("bias.position_m", "Bias position", _num(data["bias"], "position_m", 0.0))
    for i, probe in enumerate(_items(data, "probes")):
        if not isinstance(probe, dict):
            continue
        kind = probe.get("kind", "node")
        node_names = [n.get("name") for n in _items(data, "nodes") if isinstance(n, dict)]
        if kind == "node" and probe.get("node") not in node_names:
            problems.append(
                Problem(
                    f"probes.{i}.node",
                    f"Probe {i + 1} node",
                    _short(probe.get("node")),
                    {"choices": [n for n in node_names if isinstance(n, str)]},
                    f"Probe {i + 1} names node {_short(probe.get('node'))!r}, which is not a node of this bus; "
                    f"choose one of the nodes (the driver's pins are probe kind 'driver_pin').",
                )
            )
        if kind == "junction":
            position = _num(probe, "position_m")
            if position is None:
                problems.append(
                    Problem(
                        f"probes.{i}.position_m",
                        f"Probe {i + 1} trunk position",
                        None,
                        {"min": 0.0, "max": length, "unit": "m"},
                        f"Probe {i + 1} reads the trunk and needs a position; allowed 0 to "
                        f"{length if length is not None else MAX_TRUNK_M:g} m.",
                    )
                )
            past_end(f"probes.{i}.position_m", f"Probe {i + 1} trunk position", position)
    tolerances = _sub(data, "tolerances")
    fastest, slowest = _num(tolerances, "rise_time_min_s"), _num(tolerances, "rise_time_max_s")
    if fastest is not None and slowest is not None and fastest > slowest:
        problems.append(
            Problem(
                "tolerances.rise_time_max_s",
                "Slowest driver edge",
                slowest,
                {"min": fastest, "unit": "s"},
                f"The slowest driver edge ({si_format(slowest, 's')}) is faster than the fastest "
                f"(tolerances.rise_time_min_s, {si_format(fastest, 's')}); it must be at least that.",
            )
        )
    cable = _sub(data, "cable")
    cable_key = cable.get("class_key", "pair-24awg-120")
    if isinstance(cable_key, str) and cable_key not in CABLES:
        problems.append(
            Problem(
                "cable.class_key",
                "Cable class",
                _short(cable_key),
                {"choices": sorted(CABLES)},
                f"Cable class '{_short(cable_key)}' is not in the library; choose one of "
                f"{', '.join(sorted(CABLES))}, or leave it empty and enter custom values.",
            )
        )
    if cable_key is None:
        for key in ("z0_ohm", "velocity_factor", "resistance_ohm_per_m"):
            if cable.get(key) is None:
                problems.append(_missing_custom("cable", CableSpec, key, "cable.class_key"))
    driver_key = driver.get("transceiver", "edge-100ns")
    if isinstance(driver_key, str) and driver_key not in TRANSCEIVERS:
        problems.append(
            Problem(
                "driver.transceiver",
                "Driver class",
                _short(driver_key),
                {"choices": sorted(TRANSCEIVERS)},
                f"Driver class '{_short(driver_key)}' is not in the library; choose one of "
                f"{', '.join(sorted(TRANSCEIVERS))}, or leave it empty and enter custom "
                f"values.",
            )
        )
    if driver_key is None:
        for key in ("rise_time_s", "open_circuit_v", "source_ohm"):
            if driver.get(key) is None:
                problems.append(_missing_custom("driver", DriverSpec, key, "driver.transceiver"))
    return problems


def _missing_custom(prefix: str, model: type[BaseModel], key: str, class_field: str) -> Problem:
    info = model.model_fields[key]
    allowed = _allowed(info)
    return Problem(
        f"{prefix}.{key}",
        info.title or key,
        None,
        allowed,
        f"{info.title} is needed when no class is chosen ({class_field} is empty); allowed {_range_text(allowed)}.",
    )


def _allowed(info: FieldInfo) -> dict[str, Any]:
    allowed: dict[str, Any] = {}
    for m in info.metadata:
        if isinstance(m, at.Ge):
            allowed["min"] = m.ge
        elif isinstance(m, at.Gt):
            allowed["min"] = m.gt
            allowed["min_exclusive"] = True
        elif isinstance(m, at.Le):
            allowed["max"] = m.le
        elif isinstance(m, at.Lt):
            allowed["max"] = m.lt
        elif isinstance(m, at.MaxLen):
            allowed["max_length"] = m.max_length
        elif isinstance(m, at.MinLen):
            allowed["min_length"] = m.min_length
    extra = info.json_schema_extra
    if isinstance(extra, dict) and "unit" in extra:
        allowed["unit"] = extra["unit"]
    return allowed


def _range_text(allowed: dict[str, Any]) -> str:
    unit = str(allowed.get("unit", ""))
    if "choices" in allowed:
        return "one of " + ", ".join(str(c) for c in allowed["choices"])

    def fmt(v: float) -> str:
        return _value_text(v, unit)

    lo, hi = allowed.get("min"), allowed.get("max")
    if lo is not None and hi is not None:
        if allowed.get("min_exclusive"):
            return f"more than {fmt(lo)}, up to {fmt(hi)}"
        return f"{fmt(lo)} to {fmt(hi)}"
    if "max_length" in allowed:
        return f"{allowed.get('min_length', 0)} to {allowed['max_length']} characters"
    return "a valid value"


def _finite_float(value: int | float) -> float | None:
    """The number as a finite float, or None when it is infinite, NaN or an integer beyond any float."""
    try:
        number = float(value)
    except OverflowError:
        return None
    return number if math.isfinite(number) else None


def _value_text(value: Any, unit: str) -> str:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return repr(value) if isinstance(value, str) else str(value)
    if isinstance(value, int) and _finite_float(value) is None:
        return f"a {len(str(abs(value)))}-digit number"
    if not math.isfinite(value):
        return str(value)
    if unit in {"s", "F", "Hz", "Ω", "bit/s", "F/m"} and value != 0:
        return si_format(float(value), unit)
    return f"{value:g} {unit}".strip()


def _value_beside(value: Any, bound: Any, unit: str) -> str:
    """The value's text, with as many digits as it takes to differ from the bound it is compared with."""
    text = _value_text(value, unit)
    if not (isinstance(value, float) and isinstance(bound, int | float) and math.isfinite(value) and value != bound):
        return text
    digits = 7
    while text == _value_text(bound, unit) and digits <= 17:
        text = f"{value:.{digits}g} {unit}".strip()
        digits += 1
    return text


def _model_at(loc: tuple[int | str, ...]) -> tuple[type[BaseModel] | None, FieldInfo | None]:
    """Follow an error location through the plan's models to the FieldInfo it names."""
    model: type[BaseModel] | None = BusPlan
    info: FieldInfo | None = None
    for part in loc:
        if isinstance(part, int) or model is None:
            continue
        info = model.model_fields.get(part)
        if info is None:
            return model, None
        model = _submodel(info)
    return model, info


def _submodel(info: FieldInfo) -> type[BaseModel] | None:
    ann = info.annotation
    candidates = [ann, *getattr(ann, "__args__", ())]
    for c in list(candidates):
        candidates.extend(getattr(c, "__args__", ()))
    for c in candidates:
        if isinstance(c, type) and issubclass(c, BaseModel):
            return c
    return None


def _label(loc: tuple[int | str, ...], data: Any, info: FieldInfo | None) -> str:
    base = info.title if info is not None and info.title else str(loc[-1]) if loc else "Plan"
    base = base or "(empty name)"
    if len(loc) >= 2 and loc[0] in ("nodes", "terminations") and isinstance(loc[1], int):
        what = "Node" if loc[0] == "nodes" else "Terminator"
        name = ""
        try:
            raw = data[loc[0]][loc[1]]
            if loc[0] == "nodes" and isinstance(raw, dict) and isinstance(raw.get("name"), str):
                name = f" ('{raw['name']}')"
        except (KeyError, IndexError, TypeError):
            pass
        if len(loc) == 2:
            return f"{what} {loc[1] + 1}{name}"
        word = base[0].lower() + base[1:] if not base.startswith(what) else base[len(what) + 1 :]
        return f"{what} {loc[1] + 1}{name} {word}"
    return base


def _problem_from_pydantic(err: Any, data: Any) -> Problem:
    loc = tuple(err["loc"])
    # pydantic appends the union member or literal tag to the location of some errors; drop them.
    loc = tuple(p for p in loc if not (isinstance(p, str) and p in {"float", "str", "none", "function-after"}))
    path = ".".join(str(p) for p in loc)
    _, info = _model_at(loc)
    label = _label(loc, data, info)
    allowed = _allowed(info) if info is not None else {}
    value = err.get("input")
    kind = err["type"]
    ctx = err.get("ctx") or {}
    unit = str(allowed.get("unit", ""))
    if kind == "literal_error" or kind == "enum":
        choices = [c.strip().strip("'") for c in str(ctx.get("expected", "")).replace(" or ", ",").split(",")]
        allowed = {"choices": [c for c in choices if c]}
        msg = f"{label} is {_value_text(value, '')}; allowed {_range_text(allowed)}."
    elif kind == "missing":
        value = None
        msg = f"{label} is missing" + (f"; allowed {_range_text(allowed)}." if allowed.get("max") else ".")
    elif kind == "extra_forbidden":
        allowed = {"rule": "not a field of the bus plan"}
        msg = f"'{loc[-1]}' is not a field of the bus plan (at {path}); remove it or check its spelling."
        value = _short(value)
    elif kind in {"float_parsing", "float_type", "int_type", "int_parsing"}:
        msg = f"{label} must be a number; got {_value_text(_short(value), '')}"
        msg += f"; allowed {_range_text(allowed)}." if "min" in allowed else "."
    elif kind == "finite_number":
        msg = f"{label} is {value}; it must be a finite number, allowed {_range_text(allowed)}."
    elif kind == "vanishing_number":
        floor = ctx["nonzero_min"]
        msg = (
            f"{label} is {_value_beside(value, floor, unit)}, too small to be physical; allowed 0 or at least "
            f"{_value_text(floor, unit)} in size, within {_range_text(allowed)}."
        )
        allowed = allowed | {"nonzero_min": floor}
    elif kind in {"greater_than_equal", "greater_than", "less_than_equal", "less_than"}:
        bound = next((v for k, v in ctx.items() if k in {"ge", "gt", "le", "lt"}), None)
        msg = f"{label} is {_value_beside(value, bound, unit)}; allowed {_range_text(allowed)}."
    elif kind in {"too_long", "too_short", "string_too_long", "string_too_short"}:
        count = len(value) if isinstance(value, list | str) else value
        noun = "items" if isinstance(value, list) else "characters"
        lo = allowed.get("min_length", 0)
        hi = allowed.get("max_length", ctx.get("max_length", "?"))
        allowed = {"min_length": lo, "max_length": hi}
        msg = f"{label} has {count} {noun}; allowed {lo} to {hi}."
        value = count if isinstance(value, list) else value
    elif kind == "string_type":
        allowed = allowed or _library_choices(loc)
        msg = f"{label} must be text; got {_value_text(_short(value), '')}"
        msg += f"; allowed {_range_text(allowed)}." if allowed else "."
    elif kind == "string_pattern_mismatch":
        msg = f"{label} may hold only 0 and 1; got {_value_text(_short(value), '')}."
        allowed = {"pattern": "0s and 1s"}
    else:
        msg = f"{label}: {err['msg']} (got {_value_text(_short(value), '')})."
    return Problem(path, label, _short(value), allowed, msg)


def _library_choices(loc: tuple[int | str, ...]) -> dict[str, Any]:
    """The library keys a class field may name, for messages about it."""
    if loc == ("cable", "class_key"):
        return {"choices": sorted(CABLES)}
    if loc == ("driver", "transceiver"):
        return {"choices": sorted(TRANSCEIVERS)}
    return {}


def _short(value: Any) -> Any:
    """Keep echoed values small: a huge pasted list is summarised, not repeated back."""
    if isinstance(value, int) and not isinstance(value, bool) and _finite_float(value) is None:
        return _value_text(value, "")
    if isinstance(value, dict):
        return {"type": "object", "keys": len(value)}
    if isinstance(value, list):
        return {"type": "list", "items": len(value)}
    if isinstance(value, str) and len(value) > 200:
        return value[:200] + "…"
    return value


__all__ = [
    "BiasSpec",
    "BusInputError",
    "BusPlan",
    "CableSpec",
    "DriverSpec",
    "NodeSpec",
    "Problem",
    "ProbeSpec",
    "ResolvedCable",
    "ResolvedDriver",
    "SamplingWindowSpec",
    "TerminationSpec",
    "ToleranceSpec",
    "input_resistance_ohm",
    "load_plan",
    "plan_to_dict",
    "resolve_cable",
    "resolve_driver",
]
