"""The parts of a bus plan, and the fields of one bus (one trunk and what hangs on it) that format versions 2 and 3
share. Every physical field carries its SI unit in its name.

Version 2 gave every node its own device (a library transceiver class, or its own values), any number of
failsafe bias networks along the trunk, and the ground and shield wiring. Version 3 (engine.plan.topology) adds
segments joined by repeaters and a four-wire return pair as further optional fields and lists; a reader of a
version ignores nothing silently, since unknown fields are rejected by name.
"""

from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    SerializerFunctionWrapHandler,
    ValidationInfo,
    field_validator,
    model_serializer,
)
from pydantic_core import PydanticCustomError

PLAN_FORMAT: Literal["pairline-bus-plan"] = "pairline-bus-plan"
PLAN_FORMAT_VERSION: Literal[3] = 3
FORMAT_VERSIONS = (1, 2, 3)
MAX_NODES = 512
MAX_TRUNK_M = 4000.0
MIN_TRUNK_M = 0.1  # a bench bus; shorter is no cable run
MAX_STUB_M = 100.0
MAX_NAME_CHARS = 60
MIN_BIAS_OHM = 10.0
MAX_BIAS_OHM = 10e6
MAX_BIAS_NETWORKS = 8
PATTERN_CHARS = 512
DEFAULT_DEVICE = "edge-100ns"


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


def ground_offset_field() -> Any:
    """A node's local ground against the driver's, in both format versions."""
    return _f(
        "Ground offset",
        "V",
        ge=-10_000.0,
        le=10_000.0,
        default=0.0,
        description="this node's local ground relative to the driver's ground",
    )


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


Failsafe = Literal["none", "open_short", "idle_bus"]
IsolationGrade = Literal["basic", "reinforced"]
# The values a device may give on top of its class, in the order the editor shows them.
DEVICE_VALUES = (
    "unit_loads",
    "failsafe",
    "threshold_low_v",
    "threshold_high_v",
    "open_circuit_v",
    "source_ohm",
    "output_54_ohm_v",
    "rise_time_s",
    "input_capacitance_f",
    "common_mode_min_v",
    "common_mode_max_v",
    "isolated",
    "isolation_rating_vrms",
    "isolation_grade",
)


class DeviceSpec(_Strict):
    """A node's transceiver: a library class with some values overridden, or its own values with class_key null
    (on top of the standard's minimum device, engine.devices.STANDARD_MINIMUM). A device object without a
    class_key takes the plan's default class. Written back as the class key alone when nothing is overridden."""

    class_key: str | None = Field(None, title="Device class")
    # down to a millionth of a unit load (12 GΩ), an ideal probe that draws nothing
    unit_loads: float | None = _f("Unit loads", "UL", ge=1e-6, le=32.0, default=None)
    failsafe: Failsafe | None = Field(
        None, title="Receiver failsafe", description="none, open_short (open or shorted inputs) or idle_bus"
    )
    threshold_low_v: float | None = _f(
        "Receiver low threshold", "V", ge=-1.0, le=1.0, default=None, description="V_AB at or below which it reads 0"
    )
    threshold_high_v: float | None = _f(
        "Receiver high threshold", "V", ge=-1.0, le=1.0, default=None, description="V_AB at or above which it reads 1"
    )
    open_circuit_v: float | None = _f("Driver open-circuit differential voltage", "V", ge=0.1, le=12.0, default=None)
    source_ohm: float | None = _f("Driver source resistance", "Ω", ge=0.0, le=1000.0, default=None)
    output_54_ohm_v: float | None = _f(
        "Driver minimum output into 54 Ω",
        "V",
        ge=0.1,
        le=12.0,
        default=None,
        description="the published |V_OD| into 54 Ω, instead of open-circuit voltage and source resistance",
    )
    rise_time_s: float | None = _f("Edge time (10–90 %)", "s", ge=0.5e-9, le=20e-6, default=None)
    input_capacitance_f: float | None = _f("Input capacitance", "F", ge=0.0, le=2e-9, default=None)
    common_mode_min_v: float | None = _f("Common-mode range, low end", "V", ge=-100.0, le=0.0, default=None)
    common_mode_max_v: float | None = _f("Common-mode range, high end", "V", ge=0.0, le=100.0, default=None)
    isolated: bool | None = Field(None, title="Galvanically isolated")
    isolation_rating_vrms: float | None = _f(
        "Isolation rating", "Vrms", ge=100.0, le=20_000.0, default=None, description="1-minute withstand, UL 1577"
    )
    isolation_grade: IsolationGrade | None = Field(None, title="Isolation grade")

    @property
    def overridden(self) -> bool:
        return any(getattr(self, key) is not None for key in DEVICE_VALUES)

    @model_serializer(mode="wrap")
    def _compact(self, handler: SerializerFunctionWrapHandler) -> Any:
        if self.class_key is not None and not self.overridden:
            return self.class_key
        full = handler(self)
        return {k: v for k, v in full.items() if v is not None or k == "class_key"}


def _class_key_shorthand(value: Any) -> Any:
    """ "device": "failsafe-eighth-slew" is short for {"class_key": "failsafe-eighth-slew"}."""
    return {"class_key": value} if isinstance(value, str) else value


DeviceRef = Annotated[DeviceSpec | None, BeforeValidator(_class_key_shorthand)]


class DriverSpec(_Strict):
    """The primary driver: its ground is the plan's reference (0 V), and it always may drive."""

    name: Name = Field("driver", title="Driver name")
    position_m: float = _f("Driver position", "m", ge=0.0, le=MAX_TRUNK_M, default=0.0)
    stub_length_m: float = _f("Driver stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    device: DeviceRef = Field(None, title="Driver device", description="none: the plan's default class")


class NodeSpec(_Strict):
    name: Name = Field(title="Node name")
    position_m: float = _f(
        "Position",
        "m",
        ge=0.0,
        le=MAX_TRUNK_M,
        description="on the trunk; on a branch, measured along it from its junction",
    )
    stub_length_m: float = _f("Stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    branch: Name | None = Field(
        None, title="Branch", description="plan format 3: the branch the node hangs on; none: the trunk"
    )
    device: DeviceRef = Field(None, title="Device", description="none: the plan's default class")
    may_drive: bool = Field(False, title="May drive", description="an RS-485 half-duplex node that also talks")
    ground_offset_v: float = ground_offset_field()
    drives_pair: Literal["return", "transmit"] | None = Field(
        None,
        title="Pair it drives",
        description="four-wire plans only: a slave drives the return pair (empty: the return pair)",
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


class GroundingSpec(_Strict):
    """How the signal ground and the shield are wired (engine.rules.common_mode uses it)."""

    signal_ground: Literal["none", "conductor"] = Field(
        "none", title="Signal-ground conductor", description="a conductor beside the pair joining the nodes' grounds"
    )
    ground_conductor_ohm_per_m: float | None = _f(
        "Ground conductor resistance",
        "Ω/m",
        ge=0.0,
        le=2.0,
        default=None,
        description="per metre; none: like one conductor of the pair",
    )
    ground_series_ohm: float = _f("Series resistor in each ground connection", "Ω", ge=0.0, le=100_000.0, default=100.0)
    shield: Literal["none", "one_end", "both_ends"] = Field("none", title="Shield earthed at")


class PlanHead(_Strict):
    """The fields every format version shares; each version's model adds its own after them and states its
    format_version."""

    format: Literal["pairline-bus-plan"] = Field(PLAN_FORMAT, title="Format")
    format_version: int = Field(title="Format version")
    title: str = Field("", max_length=120, title="Title")
    notes: str = Field("", max_length=4000, title="Notes")
    display_units: Literal["metric", "imperial"] = Field("metric", title="Display units")
    standard: Literal["rs485", "rs422"] = Field("rs485", title="Standard")
    bit_rate_bps: float = _f("Bit rate", "bit/s", ge=50.0, le=100e6)
    supply_v: float = _f("Supply voltage", "V", ge=1.5, le=15.0, default=5.0)
    trunk_length_m: float = _f("Trunk length", "m", ge=MIN_TRUNK_M, le=MAX_TRUNK_M)
    cable: CableSpec = Field(default_factory=CableSpec, title="Cable")
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


class OneBus(PlanHead):
    """One bus: a trunk, its driver, nodes, terminators, bias and ground wiring (all of a version-2 plan)."""

    default_device: str = Field(DEFAULT_DEVICE, title="Default device class")
    driver: DriverSpec = Field(default_factory=DriverSpec, title="Driver")
    nodes: list[NodeSpec] = Field(min_length=1, max_length=MAX_NODES, title="Nodes")
    terminations: list[TerminationSpec] = Field(default_factory=list, max_length=16, title="Terminations")
    bias: list[BiasSpec] = Field(default_factory=list, max_length=MAX_BIAS_NETWORKS, title="Failsafe bias networks")
    grounding: GroundingSpec = Field(default_factory=GroundingSpec, title="Ground and shield wiring")

    def talkers(self) -> list[str]:
        """Names of every node that may drive: the primary driver, then (RS-485) the nodes that may drive."""
        return [self.driver.name] + [n.name for n in self.nodes if n.may_drive and self.standard == "rs485"]
