"""The tolerances behind every rule's tight band, each with its source.

A rule compares a quantity with a published limit. Its verdict:
    BREAKS  the nominal value is beyond the limit;
    TIGHT   the nominal value is inside, but the worst corner of the tolerances below is beyond it;
    HOLDS   even the worst corner is inside.
So TIGHT means "a part at the edge of its tolerance, a supply at the low end of its range or a cable run warm
and longer than drawn would break it", which is the margin a practitioner worries about; a bus built by the
book from parts of the stated tolerance reads HOLDS.

Tolerances (each rule states which it applies, and in which direction):
- Resistors (terminators, bias resistors): +/- 5 %, the E24 series the advice buys from (IEC 60063 assigns
  E24 to 5 % parts).
- Capacitors (RC terminators): +/- 20 %, the E6 series the advice buys from (IEC 60063 assigns E6 to 20 %).
- Supplies (bias supply, the driver's output swing, which follows its supply): +/- 5 %, the usual range of a
  5 V logic supply (common practice).
- Cable characteristic impedance: per cable class, the tolerance its class states: Category 5e 100 Ohm
  +/- 15 % (TIA/EIA-568); a 150 Ohm shielded pair 150 Ohm +/- 10 % (PROFIBUS type A cable, 135..165 Ohm,
  PROFIBUS Specification part 2, 4.1.2.3); every other pair 10 % (from memory, the usual figure for 120 Ohm
  RS-485 cable).
- Cable resistance: copper at 50 Celsius, 30 K above the 20 Celsius its tables give, is 11.8 % higher
  (temperature coefficient 0.00393 per K, IEC 60028, International Annealed Copper Standard; 50 Celsius for a
  run through a warm plant room: common practice).
- Lengths as built: cable runs (trunk and stubs) come out up to 10 % longer than drawn (routing round
  obstacles, service loops; common practice, the same spare the bill of materials orders).
- Receiver threshold: TIA/EIA-485-A and TIA/EIA-422-B let a receiver switch anywhere inside +/- 200 mV; every
  level rule holds its value against that worst threshold, so the spread of real thresholds adds no band.
"""

import dataclasses
from typing import Literal

from pairline.engine.bus import Bus, LayoutMemo
from pairline.engine.dc import network_supply_v
from pairline.engine.devices import scaled_outputs
from pairline.engine.findings import Verdict

RESISTOR_TOLERANCE = 0.05  # IEC 60063: E24 series, 5 % parts
CAPACITOR_TOLERANCE = 0.20  # IEC 60063: E6 series, 20 % parts
SUPPLY_TOLERANCE = 0.05  # common practice: 5 V +/- 5 % logic supplies
LENGTH_ALLOWANCE = 0.10  # common practice: runs come out up to 10 % longer than drawn
COPPER_TEMPERATURE_COEFFICIENT_PER_K = 0.00393  # IEC 60028 (annealed copper at 20 Celsius)
WARM_CABLE_RISE_K = 30.0  # 50 Celsius against the 20 Celsius of the tables: common practice
DEFAULT_Z0_TOLERANCE = 0.10  # from memory: 120 Ohm RS-485 pair, +/- 10 %
Z0_TOLERANCE_BY_CLASS = {
    "cat5e-100": 0.15,  # TIA/EIA-568: 100 Ohm +/- 15 %
    "pair-24awg-150": 0.10,  # PROFIBUS type A: 135..165 Ohm
}
SOURCE = (
    "Tolerances: resistors 5 % (IEC 60063 E24), capacitors 20 % (IEC 60063 E6), supplies 5 % (common practice), "
    "copper 0.393 %/K at 50 °C (IEC 60028), runs 10 % longer than drawn (common practice), cable Z0 per class "
    "(TIA/EIA-568 Cat-5e 15 %, otherwise 10 %)"
)

Direction = Literal[-1, 0, 1]


def warm_resistance_factor() -> float:
    """Conductor resistance at the warm corner against the tables' 20 Celsius: 1 + alpha * dT = 1.118."""
    return 1.0 + COPPER_TEMPERATURE_COEFFICIENT_PER_K * WARM_CABLE_RISE_K


def long_run_factor() -> float:
    """A run as built against the length drawn: 1.10."""
    return 1.0 + LENGTH_ALLOWANCE


def cable_loop_factor() -> float:
    """Worst-case loop resistance of a run against the plan's figure: warm copper over a longer run, 1.23."""
    return warm_resistance_factor() * long_run_factor()


def z0_tolerance(bus: Bus) -> float:
    """The cable's characteristic-impedance tolerance, by its class (see the module docstring)."""
    return Z0_TOLERANCE_BY_CLASS.get(bus.plan.cable.class_key or "", DEFAULT_Z0_TOLERANCE)


def corner_bus(
    bus: Bus,
    *,
    terminators: Direction = 0,
    bias_resistors: Direction = 0,
    bias_supply: Direction = 0,
    driver_output: Direction = 0,
    cable_resistance: Direction = 0,
) -> Bus:
    """The bus with parts moved to one corner of their tolerances: +1 up, -1 down, 0 nominal.

    terminators and bias_resistors scale by RESISTOR_TOLERANCE, bias_supply and driver_output by
    SUPPLY_TOLERANCE (driver_output: every device's driver); cable_resistance=+1 multiplies the conductor
    resistance by cable_loop_factor() (warm and longer than drawn), which is what a longer, warmer run does to
    every DC level.
    """
    plan = bus.plan
    update: dict[str, object] = {}
    if terminators:
        factor = 1.0 + terminators * RESISTOR_TOLERANCE
        update["terminations"] = [
            t.model_copy(update={"resistance_ohm": t.resistance_ohm * factor}) for t in plan.terminations
        ]
    if plan.bias and (bias_resistors or bias_supply):
        factor = 1.0 + bias_resistors * RESISTOR_TOLERANCE
        update["bias"] = [
            b.model_copy(
                update={
                    "pull_up_ohm": b.pull_up_ohm * factor,
                    "pull_down_ohm": b.pull_down_ohm * factor,
                    "supply_v": network_supply_v(bus, b) * (1.0 + bias_supply * SUPPLY_TOLERANCE),
                }
            )
            for b in plan.bias
        ]
    cable = bus.cable
    if cable_resistance:
        factor = cable_loop_factor() if cable_resistance > 0 else 1.0 / cable_loop_factor()
        cable = dataclasses.replace(cable, resistance_ohm_per_m=cable.resistance_ohm_per_m * factor)
    driver, devices, memo = bus.driver, bus.devices, bus.memo  # the same layout shares its derived values
    if driver_output:
        factor = 1 + driver_output * SUPPLY_TOLERANCE
        driver = dataclasses.replace(driver, open_circuit_v=driver.open_circuit_v * factor)
        # the devices at a supply corner are a layout of their own, made and memoised once per layout
        devices, memo = bus.memo.get(("driver_output", factor), lambda: (scaled_outputs(devices, factor), LayoutMemo()))
    return Bus(
        plan=plan.model_copy(update=update) if update else plan,
        cable=cable,
        driver=driver,
        devices=devices,
        layout=bus.layout,
        memo=memo,
    )


def band_verdict(nominal_inside: bool, corner_inside: bool) -> Verdict:
    """BREAKS when the nominal value is beyond the limit, TIGHT when only the worst corner is, else HOLDS."""
    if not nominal_inside:
        return Verdict.BREAKS
    return Verdict.HOLDS if corner_inside else Verdict.TIGHT
