"""Failsafe bias: the idle bus's differential level with the plan's bias network, or without one.

With every driver off, a terminated pair sits at V_AB ~ 0 V, inside the receivers' undefined band
(-200 mV .. +200 mV), so they may read noise as data. A pull-up R_B from the bias supply V_S to A and a
pull-down R_B from B to ground hold the idle bus at

    V_AB = V_S * R_eq / (2 R_B + R_eq),    R_eq = terminations || receiver inputs (RC terminators open at DC),

so the largest resistor that still gives V_min is R_B,max = (R_eq / 2) (V_S / V_min - 1).
The check itself solves the DC ladder of engine.dc with the bias network as the only source, so the drop along
the cable between the bias point and a far terminator counts; the closed form is reported beside it. On RS-485
the primary driver's own receiver listens while idle (driver.unit_loads); on RS-422 the single driver stays
enabled, so the line idles only when the driver is disabled or unplugged.

Verdict (engine.rules.margins): BREAKS below the 200 mV threshold; TIGHT when the worst corner falls below it:
bias supply 5 % low, bias resistors 5 % high, terminators 5 % low, and the run 10 % longer and 50 Celsius warm.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.dc import bias_supply_v, bias_view, idle_levels_v, receiver_loads_ohm
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.loads import (
    RS485_UNIT_LOAD_BUDGET,
    bias_unit_loads,
    driver_load_holds_ohm,
    either,
    unit_load_parts,
)
from pairline.engine.rules.margins import RESISTOR_TOLERANCE, SUPPLY_TOLERANCE, band_verdict, corner_bus
from pairline.engine.rules.preferred import E24, E96, preferred_at_or_below
from pairline.engine.units import length_text, parallel_ohm, si_format

RULE_ID = "bias.idle_level"
IDLE_THRESHOLD_V = 0.200  # receiver sensitivity, TIA/EIA-485-A
SOURCE = (
    "Idle-bus biasing: TI SLLA272 (The RS-485 Design Guide) and B&B Electronics RS-422/485 application note; "
    "receiver threshold +/-200 mV: TIA/EIA-485-A; failsafe receivers: J. Axelson, Serial Port Complete, ch. 7; "
    "tight band from the tolerances of engine.rules.margins"
)
FAILSAFE_NOTE = (
    "Receivers with built-in failsafe thresholds (shifted so that V_AB >= about -50 mV reads as idle) read an "
    "undriven terminated bus correctly without bias; any receiver with plain +/-200 mV thresholds on the same "
    "bus still needs the bias network."
)


def idle_voltage_v(supply_v: float, pull_up_ohm: float, pull_down_ohm: float, r_eq_ohm: float) -> float:
    """Idle-bus V_AB held by a bias network: V_S * R_eq / (R_up + R_down + R_eq); R_eq inf -> V_S."""
    if math.isinf(r_eq_ohm):
        return supply_v
    return supply_v * r_eq_ohm / (pull_up_ohm + pull_down_ohm + r_eq_ohm)


def max_bias_ohm(r_eq_ohm: float, supply_v: float, v_min_v: float = IDLE_THRESHOLD_V) -> float:
    """Largest equal pull-up / pull-down that keeps the idle bus at v_min_v: R_B = (R_eq / 2)(V_S / V_min - 1)."""
    return 0.5 * r_eq_ohm * (supply_v / v_min_v - 1.0)


def idle_load_ohm(bus: Bus) -> float:
    """R_eq of the idle bus: parallel terminators || every receiver input (incl. the RS-485 driver's own)."""
    terminators = [t.resistance_ohm for t in bus.plan.terminations if t.kind == "parallel"]
    return parallel_ohm(*terminators, *receiver_loads_ohm(bus))


def bias_position_m(bus: Bus) -> float:
    """Where the bias sits: the plan's bias network, else beside the primary driver."""
    return bus.plan.bias.position_m if bus.plan.bias is not None else bus.plan.driver.position_m


def idle_corner_bus(bus: Bus) -> Bus:
    """The bus at the corner that lowers the idle level (see the module docstring)."""
    return corner_bus(bus, terminators=-1, bias_resistors=1, bias_supply=-1, cable_resistance=1)


@dataclass(frozen=True, slots=True)
class BiasSizing:
    """How weak a bias from one point may be: the largest equal pull-up / pull-down that idles every listener at
    200 mV at the worst corner of the tolerances, and the largest that does so with nominal parts."""

    position_m: float
    supply_v: float
    corner_max_ohm: float  # 0 when no resistor reaches 200 mV at the corner
    nominal_max_ohm: float  # 0 when no resistor reaches 200 mV at all

    def values_ohm(self, min_ohm: float) -> list[float]:
        """Values to try, best first: the weakest E24 (5 %) part that holds at the corner; then, when the room
        (min_ohm) leaves none, the weakest E24 and the weakest E96 (1 %) part that hold with nominal parts."""
        out = [preferred_at_or_below(self.corner_max_ohm)] if self.corner_max_ohm > 0.0 else []
        if not out or out[0] < min_ohm:
            for series in (E24, E96):
                r = preferred_at_or_below(self.nominal_max_ohm, series) if self.nominal_max_ohm > 0.0 else 0.0
                if r >= min_ohm and r not in out:
                    out.append(r)
        return out


def _max_bias_from_view_ohm(r_in: float, t_min: float, supply_v: float, resistor_factor: float) -> float:
    """Largest R_B with supply_v t_min R_in / (2 resistor_factor R_B + R_in) >= 200 mV; 0 if none reaches it."""
    lowest_v = supply_v * t_min
    if lowest_v <= IDLE_THRESHOLD_V:
        return 0.0
    return r_in / (2.0 * resistor_factor) * (lowest_v / IDLE_THRESHOLD_V - 1.0)


def size_bias(bus: Bus, position_m: float, supply_v: float | None = None) -> BiasSizing:
    """How weak a bias at position_m may be, for the bus's own terminators and receivers (any bias network of the
    plan left out).

    From the view of the idle bus (R_in, t_min; engine.dc.bias_view) a bias of V_S behind 2 R_B idles the weakest
    listener at V_S t_min R_in / (2 R_B + R_in), so R_B <= R_in / 2 (V_S t_min / 200 mV - 1). At the corner the
    view is taken with terminators 5 % low on a warm, longer run, the supply 5 % low and the resistors 5 % high.
    """
    supply = bias_supply_v(bus) if supply_v is None else supply_v
    r_in, t_min = bias_view(bus, position_m)
    nominal = _max_bias_from_view_ohm(r_in, t_min, supply, 1.0)
    r_in_c, t_min_c = bias_view(corner_bus(bus, terminators=-1, cable_resistance=1), position_m)
    corner = _max_bias_from_view_ohm(r_in_c, t_min_c, (1.0 - SUPPLY_TOLERANCE) * supply, 1.0 + RESISTOR_TOLERANCE)
    return BiasSizing(position_m, supply, corner, nominal)


def bias_min_ohm(bus: Bus) -> float:
    """Smallest equal pull-up / pull-down the rest of the bus leaves room for (RS-485; 0 on RS-422).

    Unit loads: the bias is rated like a load (engine.rules.loads.bias_unit_loads, which scales as 1 / R),
    and nodes + driver's receiver + bias must stay within 32 UL (TIA-485-A). Driver load:
    terminators || receivers || 2 R_B must stay at or above the fully loaded bus (51.7 Ohm; TIA-485-A, TI SLLA628).
    """
    if bus.plan.standard != "rs485":
        return 0.0
    parts = unit_load_parts(bus)
    headroom_ul = RS485_UNIT_LOAD_BUDGET - parts["nodes"] - parts["driver"]
    r_ul = bias_unit_loads(1.0, 1.0) / headroom_ul if headroom_ul > 0 else math.inf
    rest_ohm = parallel_ohm(*[t.resistance_ohm for t in bus.plan.terminations], *receiver_loads_ohm(bus))
    design_ohm = driver_load_holds_ohm("rs485")
    r_load = 0.5 / (1.0 / design_ohm - 1.0 / rest_ohm) if rest_ohm > design_ohm else math.inf
    return max(r_ul, r_load)


def bias_text(pull_up_ohm: float, pull_down_ohm: float, supply_v: float, position_m: float) -> str:
    """A bias network in one phrase: 'a 560 Ω pull-up from the 5 V supply to A and a 560 Ω pull-down from B to
    ground at 0 m'."""
    return (
        f"a {si_format(pull_up_ohm, 'Ω')} pull-up from the {supply_v:g} V supply to A and a "
        f"{si_format(pull_down_ohm, 'Ω')} pull-down from B to ground at {length_text(position_m)}"
    )


def _standalone_fix(bus: Bus) -> str:
    """What to fit for the plan's own terminators: the weakest E24 pair that holds at the worst corner from the
    plan's bias point or the middle of the trunk, within the unit-load and driver-load room."""
    plan = bus.plan
    bare = Bus(plan=plan.model_copy(update={"bias": None}), cable=bus.cable, driver=bus.driver)
    r_min = bias_min_ohm(bare)
    supply_v = bias_supply_v(bus)
    sizings = [size_bias(bare, p, supply_v) for p in dict.fromkeys((bias_position_m(bus), 0.5 * plan.trunk_length_m))]
    fitting = [(s, r) for s in sizings for r in s.values_ohm(r_min)[:1] if r >= r_min]
    if fitting:
        s, r = fitting[0]
        return f"fit {bias_text(r, r, supply_v, s.position_m)}, or use receivers with failsafe thresholds on every node"
    best = max(sizings, key=lambda s: s.nominal_max_ohm)
    room = (
        "the nodes already take the whole 32 UL budget"
        if math.isinf(r_min)
        else f"the 32 UL budget and the driver-load limit need at least {r_min:.0f} Ω"
    )
    steps = ["use receivers with failsafe thresholds on every node"]
    if any(t.kind == "parallel" for t in plan.terminations):
        steps.append("fit RC terminators at the cable ends so the bias sees only the receivers")
    steps.append("split the bus with a repeater")
    return (
        f"no pull-up / pull-down pair fits this bus: 200 mV at every receiver needs at most "
        f"{best.nominal_max_ohm:.0f} Ω each, while {room}. {_capital(either(steps))}"
    )


def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


def check_failsafe_bias(bus: Bus, *, with_fix: bool = True) -> list[Finding]:
    """Idle-bus level with the plan's bias (or none) vs the 200 mV receiver threshold; one whole-bus finding.
    with_fix=False leaves the fix sentence out (its sizing is the costly part), for callers that only weigh
    verdicts."""
    r_eq = idle_load_ohm(bus)
    supply_v = bias_supply_v(bus)
    criterion = (
        "idle V_AB = V_S R_eq / (2 R_B + R_eq) >= 200 mV at every receiver (solved along the cable); tight when "
        "the worst corner (supply 5 % low, bias resistors 5 % high, terminators 5 % low, the run 10 % longer "
        "and 50 °C warm) falls below 200 mV"
    )
    rs422_note = (
        " On RS-422 the single driver normally stays enabled, so this matters only if the driver is disabled, "
        "powered down or unplugged."
        if bus.plan.standard == "rs422"
        else ""
    )
    if bus.plan.bias is None:
        # RS-422's one driver is not tri-stated in normal use, so an unbiased line is the usual design.
        rs422 = bus.plan.standard == "rs422"
        verdict = Verdict.HOLDS if rs422 else Verdict.BREAKS
        return [
            Finding(
                RULE_ID,
                "No bias network, none needed: the single RS-422 driver stays enabled"
                if rs422
                else "Idle-bus level with no bias network",
                verdict,
                None if rs422 else 0.0,
                None if rs422 else IDLE_THRESHOLD_V,
                "" if rs422 else "V",
                None,
                criterion,
                SOURCE,
                fix="" if verdict is Verdict.HOLDS or not with_fix else f"Add failsafe bias: {_standalone_fix(bus)}.",
                detail="With every driver off the pair idles at 0 V, inside the undefined band. "
                + FAILSAFE_NOTE
                + rs422_note,
                limit_kind="none" if rs422 else "min",
            )
        ]
    b = bus.plan.bias
    names, levels_v = idle_levels_v(bus)
    _, corner_v = idle_levels_v(idle_corner_bus(bus))
    k = int(np.argmin(levels_v))
    v_worst = float(levels_v[k])
    v_corner = float(np.min(corner_v))
    v_lumped = idle_voltage_v(supply_v, b.pull_up_ohm, b.pull_down_ohm, r_eq)
    verdict = band_verdict(v_worst >= IDLE_THRESHOLD_V, v_corner >= IDLE_THRESHOLD_V)
    current_a = supply_v / (b.pull_up_ohm + b.pull_down_ohm + r_eq) if math.isfinite(r_eq) else 0.0
    detail = (
        f"Lumped formula: {v_lumped:.3f} V with R_eq {si_format(r_eq, 'Ω')} and "
        f"{b.pull_up_ohm:g} / {b.pull_down_ohm:g} Ω from {supply_v:g} V ({current_a * 1e3:.2f} mA); lowest along "
        f"the cable {v_worst:.3f} V at '{names[k]}', {v_corner:.3f} V at the worst corner. "
        + FAILSAFE_NOTE
        + rs422_note
    )
    return [
        Finding(
            RULE_ID,
            "Idle-bus level with the plan's bias network (lowest receiver)",
            verdict,
            v_worst,
            IDLE_THRESHOLD_V,
            "V",
            None,
            criterion,
            SOURCE,
            fix="" if verdict is Verdict.HOLDS or not with_fix else f"Change the bias: {_standalone_fix(bus)}.",
            detail=detail,
            limit_kind="min",
            figures=(("corner_v", v_corner),),
        )
    ]
