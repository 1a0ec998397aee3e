"""Built-in cable and transceiver classes.

Names are Pairline's own. Each entry carries where its figures come from; "typical" figures are
representative of the class, not of any one product.
"""

import math
from dataclasses import dataclass
from typing import Any, Literal

from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S


@dataclass(frozen=True, slots=True)
class CableClass:
    key: str
    label: str
    z0_ohm: float
    velocity_factor: float
    resistance_ohm_per_m: float  # per conductor, DC; the loop of a pair is twice this
    capacitance_f_per_m: float  # conductor-to-conductor (mutual) capacitance
    skin_effect_onset_hz: float  # above it series R grows as sqrt(f / onset)
    dielectric_loss_tangent: float
    source: str
    z0_tolerance: float = 0.10  # +/- fraction of z0_ohm
    velocity_factor_tolerance: float = 0.05  # +/- fraction of velocity_factor
    tolerance_source: str = "Z0 +/- 10 % and velocity factor +/- 5 % for a generic RS-485 pair: from memory"


Failsafe = Literal["none", "open_short", "idle_bus"]
IsolationGrade = Literal["basic", "reinforced"]


@dataclass(frozen=True, slots=True)
class TransceiverClass:
    """A device class: what one node's transceiver brings to the bus, as a receiver and (if it may drive) a driver.

    `sources` names where each value comes from, value by value.
    """

    key: str
    label: str
    rise_time_s: float  # driver differential output, 10-90 %
    open_circuit_v: float  # differential open-circuit output (Thevenin source)
    source_ohm: float  # differential Thevenin source resistance
    common_mode_v: float  # driver output common-mode voltage V_OC
    unit_loads: float  # receiver input loading of this part
    max_bit_rate_bps: float  # rate the class is built for (transition <= 30 % of a bit)
    sources: tuple[tuple[str, str], ...]  # (value name, its source)
    failsafe: Failsafe = "none"  # what the receiver reads with no driver on the bus (engine.devices)
    threshold_low_v: float = -0.200  # V_AB at or below which the output is surely low
    threshold_high_v: float = 0.200  # V_AB at or above which the output is surely high
    input_capacitance_f: float = 20e-12
    common_mode_min_v: float = -7.0
    common_mode_max_v: float = 12.0
    isolated: bool = False
    isolation_rating_vrms: float | None = None  # 1-minute withstand (UL 1577 V_ISO)
    isolation_grade: IsolationGrade | None = None
    rise_time_min_s: float = 0.0  # fastest edge of the class (0: FAST_EDGE_RANGE x rise_time_s)
    rise_time_max_s: float = 0.0  # slowest edge of the class (0: FAST_EDGE_RANGE x rise_time_s)

    @property
    def edge_range_source(self) -> str:
        """Where the class's fastest and slowest edges come from."""
        return dict(self.sources).get("edge range", FAST_EDGE_SOURCE)

    def rise_time_range_s(self) -> tuple[float, float]:
        """(fastest, slowest) 10-90 % edge of the class: its own figures, else FAST_EDGE_RANGE of its typical."""
        lo = self.rise_time_min_s or FAST_EDGE_RANGE[0] * self.rise_time_s
        hi = self.rise_time_max_s or FAST_EDGE_RANGE[1] * self.rise_time_s
        return lo, hi

    @property
    def choice_label(self) -> str:
        """The label with the class's unit loads, as a picker lists it: "Edge 100 ns (1 Mbit/s class), 1/4 UL"."""
        return f"{self.label}, {unit_load_fraction(self.unit_loads)} UL"

    @property
    def source(self) -> str:
        """Every value's source in one sentence."""
        return "; ".join(f"{name}: {where}" for name, where in self.sources)


def unit_load_fraction(unit_loads: float) -> str:
    """1 -> "1", 0.5 -> "1/2", 0.125 -> "1/8"; other ratings as decimals."""
    fractions = {1.0: "1", 0.5: "1/2", 0.25: "1/4", 0.125: "1/8"}
    return fractions.get(unit_loads, f"{unit_loads:g}")


# Tolerances for the worst-case analysis (engine.tolerance). Each class below may state its own.
RESISTOR_TOLERANCE = 0.05
RESISTOR_TOLERANCE_SOURCE = "E24 resistors, +/- 5 % (IEC 60063 preferred-number series: E24 5 %, E48 2 %, E96 1 %)"
FAST_EDGE_RANGE = (3.0 / 25.0, 40.0 / 25.0)  # fastest and slowest edge over the typical one
FAST_EDGE_SOURCE = (
    "min/typ/max 10-90 % edges of 3 / 25 / 40 ns (54 ohm || 100 pF) in the switching tables of RS-485 driver "
    "data sheets, applied to the class as 0.12x to 1.6x its typical edge"
)
SLEW_EDGE_SOURCE = "slew-limited drivers of this class switch in roughly 250 to 2000 ns: from memory"
INPUT_CAPACITANCE_RANGE = (0.4, 1.5)  # of each node's stated input capacitance
INPUT_CAPACITANCE_SOURCE = (
    "receiver input capacitance 8 pF at 6 MHz to 20 pF at 1 MHz in RS-485 receiver tables; taken as 0.4x to "
    "1.5x the node's stated value: common practice"
)
UNIT_LOAD_RANGE = (0.5, 1.0)  # of each node's unit-load rating: a rating is a maximum
UNIT_LOAD_SOURCE = (
    "a unit-load rating is the most a receiver may draw (TIA/EIA-485-A, 1 mA at 12 V per unit load); parts "
    "draw about half to all of it: from memory"
)


def _c_per_m(z0_ohm: float, velocity_factor: float) -> float:
    """Capacitance per metre of a TEM line: C' = 1 / (Z0 * VF * c0)."""
    return 1.0 / (z0_ohm * velocity_factor * SPEED_OF_LIGHT_M_PER_S)


# Skin onset for a round copper conductor of radius r: R_ac/R_dc ~ r / (2 delta) with delta = 66 mm / sqrt(f),
# so R_ac = R_dc * sqrt(f / f_on) with f_on = (2 * 66 mm / r)^2. 24 AWG (r = 0.255 mm) -> 268 kHz;
# 22 AWG (r = 0.322 mm) -> 168 kHz.
CABLES: dict[str, CableClass] = {
    c.key: c
    for c in (
        CableClass(
            key="pair-24awg-120",
            label="Twisted pair, 24 AWG, 120 Ω (general RS-485 cable)",
            z0_ohm=120.0,
            velocity_factor=0.78,
            resistance_ohm_per_m=0.0842,
            capacitance_f_per_m=_c_per_m(120.0, 0.78),
            skin_effect_onset_hz=268e3,
            dielectric_loss_tangent=0.002,
            source="Z0 120 Ω: TI SLLA272; 84.2 Ω/km per conductor: ASTM B258 24 AWG; VF 0.78: TI SLLA272 tables",
        ),
        CableClass(
            key="pair-22awg-120",
            label="Twisted pair, 22 AWG, 120 Ω (long runs)",
            z0_ohm=120.0,
            velocity_factor=0.66,
            resistance_ohm_per_m=0.0530,
            capacitance_f_per_m=_c_per_m(120.0, 0.66),
            skin_effect_onset_hz=168e3,
            dielectric_loss_tangent=0.002,
            source="Z0 120 Ω: TI SLLA272; 52.96 Ω/km per conductor: ASTM B258 22 AWG; VF 0.66: typical",
        ),
        CableClass(
            key="cat5e-100",
            label="Category 5e pair, 24 AWG, 100 Ω",
            z0_ohm=100.0,
            velocity_factor=0.69,
            resistance_ohm_per_m=0.0938,
            capacitance_f_per_m=_c_per_m(100.0, 0.69),
            # Fitted to the EE Times Cat-5e model IL = 1.967 sqrt(f) + 0.023 f + 0.05/sqrt(f) dB/100 m:
            # the sqrt(f) term gives R(1 MHz) = 0.453 Ω/m loop, the f term a loss tangent of 1.75e-3.
            skin_effect_onset_hz=171.5e3,
            dielectric_loss_tangent=1.75e-3,
            source="TIA/EIA-568 Cat-5e (Z0 100 Ω); loss fitted to D. Glisic, EE Times 2008; 9.38 Ω/100 m, VF 0.69",
            z0_tolerance=0.15,
            tolerance_source="Z0 100 Ω ± 15 % (TIA/EIA-568 Cat-5e); velocity factor ± 5 %: from memory",
        ),
        CableClass(
            key="tia422-reference",
            label="24 AWG pair, 52.5 pF/m, 100 Ω (TIA-422 Annex reference cable)",
            z0_ohm=100.0,
            velocity_factor=1.0 / (100.0 * 52.5e-12 * SPEED_OF_LIGHT_M_PER_S),
            resistance_ohm_per_m=0.0842,
            capacitance_f_per_m=52.5e-12,
            skin_effect_onset_hz=268e3,
            dielectric_loss_tangent=0.002,
            source="TIA/EIA-422-B Annex A (24 AWG, 52.5 pF/m, 100 Ω); ASTM B258 24 AWG",
        ),
        CableClass(
            key="pair-24awg-150",
            label="Shielded twisted pair, 24 AWG, 150 Ω",
            z0_ohm=150.0,
            velocity_factor=0.66,
            resistance_ohm_per_m=0.0842,
            capacitance_f_per_m=_c_per_m(150.0, 0.66),
            skin_effect_onset_hz=268e3,
            dielectric_loss_tangent=0.002,
            source="RS-485 accepts 120 ± 30 Ω (Intersil high-speed RS-485 tutorial); ASTM B258 24 AWG",
            tolerance_source=(
                "Z0 150 Ω ± 10 % (135 to 165 Ω, PROFIBUS Specification, Normative Parts 2:1997, 4.1.2.3, type A "
                "cable); velocity factor ± 5 %: from memory"
            ),
        ),
    )
}

# Where each value of a transceiver class comes from. "typical" figures stand for the class, not for one product.
_S_UNIT_LOAD = "TIA-485-A unit load; 1/2, 1/4 and 1/8 UL parts: TI SLLA166"
_S_EDGE = "TI SLLA272 transceiver tables (rise time per rate class)"
_S_SLEW = "t_r = 0.3 of a bit at the class's rate (TI SLLA628: transition <= 30 % of a bit); common practice"
_S_OUTPUT = (
    "4 V behind 40 Ω gives 2.3 V into 54 Ω, above the 1.5 V TIA-485-A asks: typical of 5 V parts (common practice)"
)
_S_OUTPUT_CM = "about half a 5 V supply (Intersil tutorial 'High-Speed RS-485 Transceiver and Applications')"
_S_PLAIN = "+/-200 mV receiver thresholds, no failsafe: TIA/EIA-485-A"
_S_IDLE_FAILSAFE = (
    "thresholds shifted wholly below 0 V so an undriven, shorted or open bus reads high: Exar AN-207; published "
    "upper thresholds are -10 mV to -50 mV with the lower at -200 mV (TI SLLS550E, ZHCS823H); the class takes "
    "-10 mV, the least margin"
)
_S_OPEN_SHORT = (
    "output held high while the inputs float or are shorted together, within the +/-200 mV TIA/EIA-485-A "
    "thresholds; a terminator across the inputs defeats it: Exar AN-207, ST AN1690"
)
_S_INPUT_C = "20 pF per node with its connector and board (from memory: 10-30 pF)"
_S_CM = "-7 V to +12 V: TIA/EIA-485-A"
_S_EXTENDED_CM = "-25 V to +25 V, an extended common-mode part (from memory)"
_S_BASIC = "2.5 kVrms 1-minute withstand (UL 1577), a common basic rating: ADI FAQ 'What is isolation rating?'"
_S_REINFORCED = (
    "5 kVrms 1-minute withstand with reinforced insulation to IEC 60747-17 (V_IOTM 7071 Vpk = 5 kVrms x sqrt 2, "
    "TI SLLSF22H); reinforced: one system equal to double insulation (TI blog 'Our isolators are certified')"
)
_IDLE_WINDOW: dict[str, Any] = {"failsafe": "idle_bus", "threshold_low_v": -0.200, "threshold_high_v": -0.010}
_OPEN_WINDOW: dict[str, Any] = {"failsafe": "open_short"}


# Fastest and slowest edge of a class, with where they come from (engine.tolerance); the rest take FAST_EDGE_RANGE.
_EDGES_3NS = (2e-9, 5e-9, "edges of 2 to 5 ns for the very fast class: from memory")
_EDGES_10NS = (3e-9, 16e-9, FAST_EDGE_SOURCE + " (the fastest edge, 3 ns, the same as the tables')")
_EDGES_1200NS = (250e-9, 2000e-9, SLEW_EDGE_SOURCE)
_EDGES_2500NS = (500e-9, 4000e-9, "slew-limited drivers of this class switch in roughly 0.5 to 4 µs: from memory")


def _class(
    key: str,
    label: str,
    rise_time_s: float,
    unit_loads: float,
    rate_bps: float,
    edge_source: str,
    edges: tuple[float, float, str] = (0.0, 0.0, FAST_EDGE_SOURCE),
    **more: Any,
) -> TransceiverClass:
    """A class on the common 5 V figures (4 V behind 40 Ω, 2.5 V common mode, 20 pF, -7..+12 V), with its
    sources named value by value; `edges` its fastest and slowest edge (0: FAST_EDGE_RANGE) and their source;
    `more` sets the receiver's failsafe, isolation or common-mode range."""
    failsafe = more.get("failsafe", "none")
    sources = {
        "unit loads": _S_UNIT_LOAD,
        "edge": edge_source,
        "edge range": edges[2],
        "driver output": _S_OUTPUT,
        "output common mode": _S_OUTPUT_CM,
        "failsafe and thresholds": {"none": _S_PLAIN, "open_short": _S_OPEN_SHORT, "idle_bus": _S_IDLE_FAILSAFE}[
            failsafe
        ],
        "input capacitance": _S_INPUT_C,
        "common-mode range": _S_EXTENDED_CM if more.get("common_mode_max_v", 12.0) > 12.0 else _S_CM,
    }
    if more.get("isolated"):
        sources["isolation"] = _S_REINFORCED if more.get("isolation_grade") == "reinforced" else _S_BASIC
    return TransceiverClass(
        key=key,
        label=label,
        rise_time_s=rise_time_s,
        open_circuit_v=4.0,
        source_ohm=40.0,
        common_mode_v=2.5,
        unit_loads=unit_loads,
        max_bit_rate_bps=rate_bps,
        sources=tuple(sources.items()),
        rise_time_min_s=edges[0],
        rise_time_max_s=edges[1],
        **more,
    )


# What a device given by its own values starts from: the least TIA-485-A allows. No edge time: a node of its own
# values that may drive must state one. The driver is its published minimum into 54 Ω behind no resistance, which
# is the lowest level any source meeting that figure gives on a load of 54 Ω or more.
STANDARD_MINIMUM = TransceiverClass(
    key="",
    label="Own values",
    rise_time_s=math.nan,
    open_circuit_v=1.5,
    source_ohm=0.0,
    common_mode_v=2.5,
    unit_loads=1.0,
    max_bit_rate_bps=math.nan,
    sources=(
        ("unit loads", "1 UL, the most a standard receiver may load: TIA-485-A"),
        ("driver output", "1.5 V into 54 Ω, the least TIA-485-A allows, modelled behind 0 Ω (conservative)"),
        ("output common mode", _S_OUTPUT_CM),
        ("failsafe and thresholds", _S_PLAIN),
        ("input capacitance", _S_INPUT_C),
        ("common-mode range", _S_CM),
    ),
)

TRANSCEIVERS: dict[str, TransceiverClass] = {
    t.key: t
    for t in (
        _class("edge-3ns", "Very fast edge, 3 ns (20–50 Mbit/s class)", 3e-9, 1.0, 50e6, _S_EDGE, _EDGES_3NS),
        _class("edge-10ns", "Fast edge, 10 ns (10 Mbit/s class)", 10e-9, 1.0, 10e6, _S_EDGE, _EDGES_10NS),
        _class("edge-25ns", "Edge 25 ns (5 Mbit/s class)", 25e-9, 0.5, 5e6, _S_EDGE),
        _class("edge-100ns", "Edge 100 ns (1 Mbit/s class)", 100e-9, 0.25, 1e6, _S_EDGE),
        _class("slew-1200ns", "Slew-limited, 1.2 µs (250 kbit/s class)", 1.2e-6, 0.125, 250e3, _S_SLEW, _EDGES_1200NS),
        _class(
            "slew-2500ns", "Slew-limited, 2.5 µs (115.2 kbit/s class)", 2.5e-6, 0.125, 115.2e3, _S_SLEW, _EDGES_2500NS
        ),
        _class(
            "failsafe-full-fast",
            "Idle-bus failsafe, fast edge 10 ns",
            10e-9,
            1.0,
            10e6,
            _S_EDGE,
            _EDGES_10NS,
            **_IDLE_WINDOW,
        ),
        _class(
            "failsafe-quarter-100ns",
            "Idle-bus failsafe, edge 100 ns",
            100e-9,
            0.25,
            1e6,
            _S_EDGE,
            **_IDLE_WINDOW,
        ),
        _class(
            "failsafe-eighth-slew",
            "Idle-bus failsafe, slew-limited 1.2 µs",
            1.2e-6,
            0.125,
            250e3,
            _S_SLEW,
            _EDGES_1200NS,
            **_IDLE_WINDOW,
        ),
        _class(
            "open-failsafe-full",
            "Open/short failsafe only, edge 100 ns",
            100e-9,
            1.0,
            1e6,
            _S_EDGE,
            **_OPEN_WINDOW,
        ),
        _class(
            "isolated-eighth-slew",
            "Isolated 2.5 kVrms (basic), idle-bus failsafe, slew-limited 1.2 µs",
            1.2e-6,
            0.125,
            250e3,
            _S_SLEW,
            _EDGES_1200NS,
            isolated=True,
            isolation_rating_vrms=2500.0,
            isolation_grade="basic",
            **_IDLE_WINDOW,
        ),
        _class(
            "isolated-reinforced-fast",
            "Isolated 5 kVrms (reinforced), idle-bus failsafe, edge 25 ns",
            25e-9,
            0.25,
            5e6,
            _S_EDGE,
            isolated=True,
            isolation_rating_vrms=5000.0,
            isolation_grade="reinforced",
            **_IDLE_WINDOW,
        ),
        _class(
            "extended-cm-eighth",
            "Extended common mode ±25 V, idle-bus failsafe, slew-limited 1.2 µs",
            1.2e-6,
            0.125,
            250e3,
            _S_SLEW,
            _EDGES_1200NS,
            common_mode_min_v=-25.0,
            common_mode_max_v=25.0,
            **_IDLE_WINDOW,
        ),
    )
}
