"""Every node's device with its values filled in, and what a unit load is across the pair.

A device is a library transceiver class (engine.library) with the plan's overrides on top, or its own values on
top of the standard's minimum device (engine.library.STANDARD_MINIMUM). A node that names none takes the plan's
default class.

Unit load. TIA-485-A defines the unit load per bus terminal: with the other terminal at 0 V, one line may draw at
most 1 mA at +12 V and 0.8 mA at -7 V against the receiver's ground, i.e. a receiver input is a network from each
line to an internal reference, 12 kOhm per line as a chord (12 V / 1 mA; TI SLLA166). Seen from the pair:
    across the pair (differential, the two lines' networks in series)  24 kOhm per UL
    from both lines together to the receiver's ground (common mode)     6 kOhm per UL
    one line to ground                                                  12 kOhm per UL
How the engine counts it:
- The load budget and every DC rule (unit loads, driver load, idle and driven levels, terminator correction)
  count 1 UL as 12 kOhm across the pair. That is the reading under which TIA-485-A's 54 Ohm driver test load is
  32 UL beside two 120 Ohm terminators (TI SLLA628: 120 || 120 || 375 Ohm = 51.7 Ohm): twice the real
  differential load, so the budget stays as conservative as the standard's own arithmetic, and idle and driven
  levels come out low rather than high.
- The simulated waveforms load the pair with the physical 24 kOhm per UL (engine.solve).
- The common-mode 6 kOhm per UL sets where an isolated driver's floating ground settles (engine.rules.common_mode).
The report states all three ("1 UL = ... across the pair").

Failsafe. A receiver's window is (threshold_low_v, threshold_high_v): below the low threshold it surely reads 0,
above the high one surely 1, in between it may read either. With no driver on the bus the pair presents one of
three states (TI E2E FAQ on fail-safe biasing; Exar AN-207): open (the receiver's inputs float: a cut or
unplugged cable, or an undriven line with nothing else across it), short (A tied to B) and idle (every driver
off, a terminator across the pair holding it at 0 V unless a bias network lifts it). What each failsafe type
covers (reads as 1):
    none        open no,  short no,  idle: only where the idle level is at or above its high threshold
    open_short  open yes, short yes, idle: only where the idle level is at or above its high threshold
    idle_bus    open yes, short yes, idle yes (its high threshold is below 0 V, so 0 V reads as 1)
"""

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass

from pairline.engine.library import STANDARD_MINIMUM, TRANSCEIVERS, TransceiverClass
from pairline.engine.plan import DEVICE_VALUES, UNIT_LOAD_OHM, BusPlan, DeviceSpec
from pairline.engine.units import si_format

WAVEFORM_UNIT_LOAD_OHM = 2.0 * UNIT_LOAD_OHM  # across the pair: the two lines' 12 kOhm in series
COMMON_MODE_UNIT_LOAD_OHM = 0.5 * UNIT_LOAD_OHM  # both lines together to the receiver's ground
FAILSAFE_STATES = ("open", "short", "idle")
UNIT_LOAD_TEXT = (
    f"1 UL = {WAVEFORM_UNIT_LOAD_OHM / 1e3:g} kΩ across the pair in the simulated waveforms (12 kΩ from each line "
    f"to the receiver's ground; {COMMON_MODE_UNIT_LOAD_OHM / 1e3:g} kΩ to a common-mode source); the load budget "
    f"and the DC rules count 1 UL as {UNIT_LOAD_OHM / 1e3:g} kΩ across the pair, as TIA-485-A's 54 Ω test load "
    "does (32 UL beside two 120 Ω terminators), which is twice the real load and so conservative"
)
UNIT_LOAD_SOURCE = "TIA-485-A unit load (per line, 1 mA at +12 V); TI SLLA166; TI SLLA628 (the 54 Ω test load)"
_FAILSAFE_WORDS = {
    "none": "no failsafe",
    "open_short": "open/short failsafe only",
    "idle_bus": "idle-bus failsafe",
}


@dataclass(frozen=True, slots=True)
class ResolvedDevice:
    """One node's transceiver with every value filled in."""

    key: str  # library class key; "" for a device of its own values
    label: str
    unit_loads: float
    failsafe: str  # "none", "open_short" or "idle_bus"
    threshold_low_v: float
    threshold_high_v: float
    open_circuit_v: float  # driver: Thevenin voltage across the pair
    source_ohm: float  # driver: Thevenin resistance
    rise_time_s: float  # driver edge, 10-90 %; nan for a device of its own values that states none
    input_capacitance_f: float
    common_mode_min_v: float
    common_mode_max_v: float
    output_common_mode_v: float  # the driver's output common-mode voltage V_OC
    isolated: bool
    isolation_rating_vrms: float | None
    isolation_grade: str | None  # "basic" or "reinforced" when isolated
    source: str

    @property
    def budget_input_ohm(self) -> float:
        """The receiver across the pair as the load budget and the DC rules count it: 12 kOhm / UL."""
        return UNIT_LOAD_OHM / self.unit_loads

    @property
    def differential_input_ohm(self) -> float:
        """The receiver across the pair as the waveforms load it: 24 kOhm / UL."""
        return WAVEFORM_UNIT_LOAD_OHM / self.unit_loads

    @property
    def common_mode_input_ohm(self) -> float:
        """Both lines together to the receiver's ground: 6 kOhm / UL."""
        return COMMON_MODE_UNIT_LOAD_OHM / self.unit_loads

    @property
    def failsafe_text(self) -> str:
        """ "idle-bus failsafe, window -200 .. -10 mV"."""
        return (
            f"{_FAILSAFE_WORDS[self.failsafe]}, window {self.threshold_low_v * 1e3:+.0f} .. "
            f"{self.threshold_high_v * 1e3:+.0f} mV"
        )


def covers(device: ResolvedDevice, state: str) -> bool:
    """Whether a receiver reads 1 in a bus state with no driver and no bias: open, short or idle (module
    docstring). A high threshold below 0 V covers all three; an open/short failsafe covers the first two."""
    if device.threshold_high_v < 0.0:
        return True
    return device.failsafe == "open_short" and state in ("open", "short")


def resolve_device(spec: DeviceSpec | None, default_key: str) -> ResolvedDevice:
    """The class's values (or the standard minimum's, for class_key null) with the spec's overrides on top. A
    driver given by its minimum into 54 Ohm is that voltage behind 0 Ohm (engine.library.STANDARD_MINIMUM)."""
    key = default_key if spec is None else spec.class_key
    base: TransceiverClass = TRANSCEIVERS[key] if key else STANDARD_MINIMUM
    given = {
        name: getattr(spec, name) for name in DEVICE_VALUES if spec is not None and getattr(spec, name) is not None
    }
    if "output_54_ohm_v" in given:
        given["open_circuit_v"], given["source_ohm"] = given["output_54_ohm_v"], 0.0
    isolated = bool(given.get("isolated", base.isolated))
    label = base.label if key else "Own values"
    if key and given:
        label += " (values changed)"
    source = base.source
    if given:
        typed = ", ".join(f"{name} {given[name]}" for name in sorted(given) if name != "output_54_ohm_v")
        source = f"{source}; entered by the user: {typed}"
    return ResolvedDevice(
        key=key or "",
        label=label,
        unit_loads=float(given.get("unit_loads", base.unit_loads)),
        failsafe=str(given.get("failsafe", base.failsafe)),
        threshold_low_v=float(given.get("threshold_low_v", base.threshold_low_v)),
        threshold_high_v=float(given.get("threshold_high_v", base.threshold_high_v)),
        open_circuit_v=float(given.get("open_circuit_v", base.open_circuit_v)),
        source_ohm=float(given.get("source_ohm", base.source_ohm)),
        rise_time_s=float(given.get("rise_time_s", base.rise_time_s)),
        input_capacitance_f=float(given.get("input_capacitance_f", base.input_capacitance_f)),
        common_mode_min_v=float(given.get("common_mode_min_v", base.common_mode_min_v)),
        common_mode_max_v=float(given.get("common_mode_max_v", base.common_mode_max_v)),
        output_common_mode_v=base.common_mode_v,
        isolated=isolated,
        isolation_rating_vrms=given.get("isolation_rating_vrms", base.isolation_rating_vrms) if isolated else None,
        isolation_grade=str(given.get("isolation_grade", base.isolation_grade or "basic")) if isolated else None,
        source=source,
    )


def resolve_devices(plan: BusPlan) -> dict[str, ResolvedDevice]:
    """Every node's device by name, the primary driver's first. Identical specs share one resolution."""
    cache: dict[DeviceSpec | None, ResolvedDevice] = {}

    def one(spec: DeviceSpec | None) -> ResolvedDevice:
        if spec not in cache:
            cache[spec] = resolve_device(spec, plan.default_device)
        return cache[spec]

    out = {plan.driver.name: one(plan.driver.device)}
    out.update((n.name, one(n.device)) for n in plan.nodes)
    return out


@dataclass(frozen=True, slots=True)
class ResolvedDriver:
    """How the bus is driven: one talker's output (and, for the primary driver, its own receiver's loading)."""

    label: str
    rise_time_s: float
    open_circuit_v: float
    source_ohm: float
    common_mode_v: float
    unit_loads: float
    source: str


def driver_of(device: ResolvedDevice) -> ResolvedDriver:
    return ResolvedDriver(
        label=device.label,
        rise_time_s=device.rise_time_s,
        open_circuit_v=device.open_circuit_v,
        source_ohm=device.source_ohm,
        common_mode_v=device.output_common_mode_v,
        unit_loads=device.unit_loads,
        source=device.source,
    )


def scaled_outputs(devices: Mapping[str, ResolvedDevice], factor: float) -> dict[str, ResolvedDevice]:
    """Every device with its driver's open-circuit voltage times factor (a supply at a tolerance corner)."""
    return {name: dataclasses.replace(d, open_circuit_v=d.open_circuit_v * factor) for name, d in devices.items()}


def device_text(device: ResolvedDevice) -> str:
    """A device in one phrase for the report and the bill of materials."""
    parts = [device.label, f"{device.unit_loads:g} UL", device.failsafe_text]
    if math.isfinite(device.rise_time_s):
        parts.append(f"edge {si_format(device.rise_time_s, 's')}")
    if device.isolated and device.isolation_rating_vrms:
        parts.append(f"isolated {device.isolation_rating_vrms:g} Vrms ({device.isolation_grade})")
    return "; ".join(parts)
