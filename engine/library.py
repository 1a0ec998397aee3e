"""Built-in cable and transceiver classes.

Names are Pairline's own. Each entry carries where its figures come from; "typical" figures are
representative of the class, not of any one product.
"""

from dataclasses import dataclass

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


@dataclass(frozen=True, slots=True)
class TransceiverClass:
    key: str
    label: str
    rise_time_s: float  # driver differential output, 10-90 %
    open_circuit_v: float  # differential open-circuit output (Thevenin source)
    source_ohm: float  # differential Thevenin source resistance
    common_mode_v: float  # driver output common-mode voltage V_OC
    unit_loads: float  # receiver input loading of this part
    max_bit_rate_bps: float  # rate the class is built for (transition <= 30 % of a bit)
    source: str
    rise_time_min_s: float = 0.0  # fastest edge of the class (0: FAST_EDGE_RANGE x rise_time_s)
    rise_time_max_s: float = 0.0  # slowest edge of the class (0: FAST_EDGE_RANGE x rise_time_s)
    edge_range_source: str = ""

    def rise_time_range_s(self) -> tuple[float, float]:
        """(fastest, slowest) 10-90 % edge of the class: its own figures, else FAST_EDGE_RANGE of its typical."""
        lo = self.rise_time_min_s or FAST_EDGE_RANGE[0] * self.rise_time_s
        hi = self.rise_time_max_s or FAST_EDGE_RANGE[1] * self.rise_time_s
        return lo, hi


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

_DRIVER_FIGURES = (
    "rise time class: TI SLLA272 transceiver tables; 4 V / 40 Ω Thevenin output gives 2.3 V into 54 Ω "
    "(TIA-485-A asks >= 1.5 V): typical"
)

TRANSCEIVERS: dict[str, TransceiverClass] = {
    t.key: t
    for t in (
        TransceiverClass(
            "edge-3ns",
            "Very fast edge, 3 ns (20–50 Mbit/s class)",
            3e-9,
            4.0,
            40.0,
            2.5,
            1.0,
            50e6,
            _DRIVER_FIGURES,
            rise_time_min_s=2e-9,
            rise_time_max_s=5e-9,
            edge_range_source="edges of 2 to 5 ns for the very fast class: from memory",
        ),
        TransceiverClass(
            "edge-10ns",
            "Fast edge, 10 ns (10 Mbit/s class)",
            10e-9,
            4.0,
            40.0,
            2.5,
            1.0,
            10e6,
            _DRIVER_FIGURES,
            rise_time_min_s=3e-9,
            rise_time_max_s=16e-9,
            edge_range_source=FAST_EDGE_SOURCE + " (the fastest edge, 3 ns, the same as the tables')",
        ),
        TransceiverClass(
            "edge-25ns",
            "Edge 25 ns (5 Mbit/s class)",
            25e-9,
            4.0,
            40.0,
            2.5,
            0.5,
            5e6,
            _DRIVER_FIGURES,
            edge_range_source=FAST_EDGE_SOURCE,
        ),
        TransceiverClass(
            "edge-100ns",
            "Edge 100 ns (1 Mbit/s class)",
            100e-9,
            4.0,
            40.0,
            2.5,
            0.25,
            1e6,
            _DRIVER_FIGURES,
            edge_range_source=FAST_EDGE_SOURCE,
        ),
        TransceiverClass(
            "slew-1200ns",
            "Slew-limited, 1.2 µs (250 kbit/s class)",
            1.2e-6,
            4.0,
            40.0,
            2.5,
            0.125,
            250e3,
            _DRIVER_FIGURES + "; t_r = 0.3 bit at 250 kbit/s: common practice",
            rise_time_min_s=250e-9,
            rise_time_max_s=2000e-9,
            edge_range_source=SLEW_EDGE_SOURCE,
        ),
        TransceiverClass(
            "slew-2500ns",
            "Slew-limited, 2.5 µs (115.2 kbit/s class)",
            2.5e-6,
            4.0,
            40.0,
            2.5,
            0.125,
            115.2e3,
            _DRIVER_FIGURES + "; t_r = 0.3 bit at 115.2 kbit/s: common practice",
            rise_time_min_s=500e-9,
            rise_time_max_s=4000e-9,
            edge_range_source="slew-limited drivers of this class switch in roughly 0.5 to 4 µs: from memory",
        ),
    )
}
