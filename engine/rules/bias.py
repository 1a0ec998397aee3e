"""Failsafe bias: the idle bus's differential level with the plan's bias network, or without one.

With every driver off, a terminated pair sits at V_AB ~ 0 V, inside the receivers' undefined band
(-200 mV .. +200 mV), so they may read noise as data. A pull-up R_B from the bias supply V_S to A and a
pull-down R_B from B to ground hold the idle bus at

    V_AB = V_S * R_eq / (2 R_B + R_eq),    R_eq = terminations || receiver inputs (RC terminators open at DC),

so the largest resistor that still gives V_min is R_B,max = (R_eq / 2) (V_S / V_min - 1).
The check itself solves the DC ladder of engine.rules.voltage with the bias network as the only source, so
the drop along the cable between the bias point and a far terminator counts; the closed form is reported
beside it. On RS-485 the primary driver's own receiver listens while idle (driver.unit_loads); on RS-422 the
single driver stays enabled, so the line idles only when the driver is disabled or unplugged.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import input_resistance_ohm
from pairline.engine.rules.loads import (
    RS485_UNIT_LOAD_BUDGET,
    bias_supply_v,
    bias_unit_loads,
    driver_load_holds_ohm,
    receiver_loads_ohm,
    unit_load_parts,
)
from pairline.engine.rules.preferred import preferred_at_or_below
from pairline.engine.rules.voltage import DcElement, fixed_load_elements, receiver_elements, solve_dc_v
from pairline.engine.units import length_text, parallel_ohm, si_format

RULE_ID = "bias.idle_level"
IDLE_THRESHOLD_V = 0.200  # receiver sensitivity, TIA/EIA-485-A
IDLE_TARGET_V = 0.250  # Pairline's target: threshold plus 50 mV for noise; below it the verdict is tight
_PROBE_OHM = 1e-3  # a near-ideal 1 V probe source for the ladder view
SOURCE = (
    "Idle-bus biasing: TI SLLA272 (The RS-485 Design Guide) and B&B Electronics RS-422/485 application note; "
    "receiver threshold +/-200 mV: TIA/EIA-485-A; failsafe receivers: J. Axelson, Serial Port Complete, ch. 7"
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


def _listeners(bus: Bus) -> list[DcElement]:
    receivers = receiver_elements(bus)
    d = bus.plan.driver
    if bus.plan.standard == "rs485":
        receivers.append(DcElement(d.name, d.position_m, d.stub_length_m, input_resistance_ohm(bus.driver.unit_loads)))
    return receivers


def bias_view(bus: Bus, position_m: float) -> tuple[float, float]:
    """(R_in, t_min): the idle bus's DC resistance seen from a bias point, and the lowest ratio
    V_receiver / V_bias-point over the listeners. Both come from one ladder solve with a 1 V source there."""
    listeners = _listeners(bus)
    passive = [e for e in fixed_load_elements(bus) if e.source_v == 0.0]
    probe = DcElement("probe", position_m, 0.0, _PROBE_OHM, 1.0)
    elements = [*listeners, *passive, probe]
    sources_v = np.array([[e.source_v] for e in elements])
    v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)[:, 0]
    v_point = float(v[-1])
    current_a = (1.0 - v_point) / _PROBE_OHM
    r_in = v_point / current_a if current_a > 0.0 else math.inf
    return r_in, float(np.min(v[: len(listeners)]) / v_point)


def recommended_bias_ohm(bus: Bus) -> float:
    """Each bias resistor to fit (pull-up = pull-down), in ohm; see bias_choice(bus)."""
    return bias_choice(bus).resistance_ohm


def recommended_bias(bus: Bus) -> tuple[float, float]:
    """(each bias resistor in ohm, position in m along the trunk); see bias_choice(bus)."""
    choice = bias_choice(bus)
    return choice.resistance_ohm, choice.position_m


@dataclass(frozen=True, slots=True)
class BiasChoice:
    resistance_ohm: float  # each of pull-up and pull-down (E24)
    position_m: float
    idle_min_v: float  # lowest idle V_AB over the listeners with this choice (cable included)
    min_ohm: float  # smallest resistor the 32 UL budget and the driver's 54 Ohm load allow (0: no limit)
    max_ohm: float  # largest resistor that still holds 200 mV at every listener from position_m
    fits: bool  # a resistor exists that both holds 200 mV and respects min_ohm


def bias_min_ohm(bus: Bus) -> float:
    """Smallest equal pull-up / pull-down the rest of the bus leaves room for (RS-485; 0 on RS-422).

    Unit loads: the bias is rated like a load (engine.rules.loads.bias_unit_loads, which scales as 1 / R),
    and nodes + driver's receiver + bias must stay within 32 UL (TIA-485-A). Driver load:
    terminators || receivers || 2 R_B must stay at or above the level where rule load.driver holds (the 51.7 Ohm
    full bus the 54 Ohm test load stands for; TIA-485-A, TI SLLA628).
    """
    if bus.plan.standard != "rs485":
        return 0.0
    parts = unit_load_parts(bus)
    used_ul = parts["nodes"] + parts["driver"]
    headroom_ul = RS485_UNIT_LOAD_BUDGET - used_ul
    r_ul = bias_unit_loads(1.0, 1.0) / headroom_ul if headroom_ul > 0 else math.inf
    rest_ohm = parallel_ohm(*[t.resistance_ohm for t in bus.plan.terminations], *receiver_loads_ohm(bus))
    design_ohm = driver_load_holds_ohm("rs485")
    r_load = 0.5 / (1.0 / design_ohm - 1.0 / rest_ohm) if rest_ohm > design_ohm else 0.0
    return max(r_ul, r_load)


def bias_choice(bus: Bus) -> BiasChoice:
    """The bias network to fit: the largest E24 pull-up = pull-down keeping every listener >= 250 mV idle,
    within the unit-load and driver-load room (bias_min_ohm).

    Seen from the bias point the idle bus is R_in with each listener at t_k of the bias point's voltage, so
    V_k = V_S t_k R_in / (2 R_B + R_in) and R_B,max = (R_in / 2)(V_S t_min / V_target - 1); for a short bus
    t_min = 1 and this is the lumped (R_eq / 2)(V_S / V_min - 1). V_target is 250 mV (200 mV threshold +
    50 mV margin), relaxed to 200 mV when the room allows no more; at each target the plan's bias point is
    tried first, then the middle of the trunk. When no resistor fits, the one holding 200 mV is given with
    fits=False: with parallel terminators this bus needs RC terminators or failsafe receivers instead.
    """
    supply_v = bias_supply_v(bus)
    r_min = bias_min_ohm(bus)
    fallback: BiasChoice | None = None
    views = [(p, *bias_view(bus, p)) for p in (bias_position_m(bus), 0.5 * bus.plan.trunk_length_m)]
    for target_v in (IDLE_TARGET_V, IDLE_THRESHOLD_V):
        for position_m, r_in, t_min in views:
            if supply_v * t_min <= target_v:
                continue
            r_max = max_bias_ohm(r_in, supply_v * t_min, IDLE_THRESHOLD_V)
            r_hi = preferred_at_or_below(max_bias_ohm(r_in, supply_v * t_min, target_v))
            idle_v = idle_voltage_v(supply_v * t_min, r_hi, r_hi, r_in)
            if r_hi >= r_min:
                return BiasChoice(r_hi, position_m, idle_v, r_min, r_max, True)
            if fallback is None and target_v == IDLE_THRESHOLD_V:
                fallback = BiasChoice(r_hi, position_m, idle_v, r_min, r_max, False)
    if fallback is not None:
        return fallback
    r = preferred_at_or_below(max_bias_ohm(idle_load_ohm(bus), supply_v, IDLE_TARGET_V))
    return BiasChoice(r, bias_position_m(bus), 0.0, r_min, 0.0, False)


def idle_levels_v(bus: Bus) -> tuple[tuple[str, ...], np.ndarray]:
    """Idle V_AB at every listening node (receivers, and the driver's own receiver on RS-485), via the ladder."""
    receivers = _listeners(bus)
    elements = [*receivers, *fixed_load_elements(bus)]
    sources_v = np.array([[e.source_v] for e in elements])
    v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)
    return tuple(r.name for r in receivers), v[: len(receivers), 0]


def bias_advice_text(bus: Bus) -> str:
    """The fix sentence for the bias: what to fit and where, or why no resistor pair fits and what instead."""
    choice = bias_choice(bus)
    supply_v = bias_supply_v(bus)
    lumped_ohm = max_bias_ohm(idle_load_ohm(bus), supply_v)
    r = choice.resistance_ohm
    plan_bias = bus.plan.bias
    if (
        choice.fits
        and plan_bias is not None
        and plan_bias.position_m == choice.position_m
        and max(plan_bias.pull_up_ohm, plan_bias.pull_down_ohm) <= r
    ):
        return (
            f"the plan's bias is already the strongest the room allows (each resistor >= {choice.min_ohm:.0f} Ω "
            "for the 32 UL budget and the driver-load limit (the 51.7 Ω full bus)); for more idle margin use "
            "receivers with failsafe "
            f"thresholds on every node, or RC terminators at the cable ends so the bias sees only the receivers."
        )
    if choice.fits:
        room = (
            " and stays within the 32 UL budget and the driver-load limit (the 51.7 Ω full bus)"
            if choice.min_ohm > 0
            else ""
        )
        move = ""
        if plan_bias is not None and plan_bias.position_m != choice.position_m:
            move = (
                f"move the bias network from {length_text(plan_bias.position_m)} to "
                f"{length_text(choice.position_m)} along the trunk, from where it can hold every receiver, "
                "and "
            )
        return (
            f"{move}fit a pull-up of {si_format(r, 'Ω')} from the {supply_v:g} V supply to A and a pull-down of "
            f"{si_format(r, 'Ω')} from B "
            f"to ground at {length_text(choice.position_m)} along the trunk; that idles every receiver at >= "
            f"{choice.idle_min_v * 1e3:.0f} mV allowing for the cable{room} (lumped formula: R_B,max = "
            f"{lumped_ohm:.0f} Ω for 200 mV). Or use receivers with failsafe thresholds on every node."
        )
    parallel = [t for t in bus.plan.terminations if t.kind == "parallel"]
    rc_text = ""
    if parallel:
        rc_plan = bus.plan.model_copy(
            update={
                "terminations": [
                    t.model_copy(update={"kind": "rc", "capacitance_f": t.capacitance_f or 1e-9})
                    for t in bus.plan.terminations
                ]
            }
        )
        rc_choice = bias_choice(Bus(plan=rc_plan, cable=bus.cable, driver=bus.driver))
        if rc_choice.fits:
            rc_text = f" (then {si_format(rc_choice.resistance_ohm, 'Ω')} each from {supply_v:g} V will do)"
    room = (
        "the nodes already take the whole 32 UL budget"
        if math.isinf(choice.min_ohm)
        else f"the 32 UL budget and the driver-load limit (the 51.7 Ω full bus) need at least {choice.min_ohm:.0f} Ω"
    )
    return (
        f"no pull-up / pull-down pair fits this bus{' with parallel terminators' if parallel else ''}: 200 mV at "
        f"every receiver needs at most {choice.max_ohm:.0f} Ω each, while {room}. Use receivers with failsafe "
        "thresholds on every node"
        + (f", or RC terminators at the cable ends so the bias sees only the receivers{rc_text}" if parallel else "")
        + ", or split the bus with a repeater."
    )


def check_failsafe_bias(bus: Bus) -> list[Finding]:
    """Idle-bus level with the plan's bias (or none) vs the 200 mV receiver threshold; one whole-bus finding."""
    r_eq = idle_load_ohm(bus)
    supply_v = bias_supply_v(bus)
    criterion = (
        "idle V_AB = V_S R_eq / (2 R_B + R_eq) >= 200 mV at every receiver (solved along the cable); "
        f"below {IDLE_TARGET_V * 1e3:.0f} mV is tight"
    )
    advice = bias_advice_text(bus)
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
                fix="" if verdict is Verdict.HOLDS else f"Add failsafe bias: {advice}",
                detail="With every driver off the pair idles at 0 V, inside the undefined band. "
                + FAILSAFE_NOTE
                + rs422_note,
                limit_kind="none" if rs422 else "min",
            )
        ]
    b = bus.plan.bias
    names, levels_v = idle_levels_v(bus)
    k = int(np.argmin(levels_v))
    v_worst = float(levels_v[k])
    v_lumped = idle_voltage_v(supply_v, b.pull_up_ohm, b.pull_down_ohm, r_eq)
    verdict = (
        Verdict.BREAKS if v_worst < IDLE_THRESHOLD_V else Verdict.TIGHT if v_worst < IDLE_TARGET_V else Verdict.HOLDS
    )
    current_a = supply_v / (b.pull_up_ohm + b.pull_down_ohm + r_eq) if math.isfinite(r_eq) else 0.0
    detail = (
        f"Lumped formula: {v_lumped:.3f} V with R_eq {si_format(r_eq, 'Ω')} and "
        f"{b.pull_up_ohm:g} / {b.pull_down_ohm:g} Ω from {supply_v:g} V ({current_a * 1e3:.2f} mA); lowest along "
        f"the cable {v_worst:.3f} V at '{names[k]}'. " + FAILSAFE_NOTE + rs422_note
    )
    fix = ""
    if verdict is not Verdict.HOLDS:
        fix = f"Change the bias: {advice}"
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
            fix=fix,
            detail=detail,
            limit_kind="min",
        )
    ]
