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

import numpy as np

from engine.bus import Bus
from engine.findings import Finding, Verdict
from engine.plan import input_resistance_ohm
from engine.rules.voltage import DcElement, fixed_load_elements, receiver_elements, solve_dc_v
from engine.units import parallel_ohm

RULE_ID = "bias.idle_level"
IDLE_THRESHOLD_V = 0.200  # receiver sensitivity, TIA/EIA-485-A
IDLE_TARGET_V = 0.250  # Pairline's target: threshold plus 50 mV for noise; below it the verdict is tight
# IEC 60063 E24 series
E24: tuple[float, ...] = (
    *(1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0),
    *(3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
)
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


def e24_at_or_below(resistance_ohm: float) -> float:
    """Largest E24 resistor value not above resistance_ohm (IEC 60063)."""
    if not math.isfinite(resistance_ohm) or resistance_ohm <= 0.0:
        return resistance_ohm
    decade = 10.0 ** math.floor(math.log10(resistance_ohm))
    mantissa = max(m for m in E24 if m * decade <= resistance_ohm * (1 + 1e-9))
    return round(mantissa * decade, 6)


def idle_load_ohm(bus: Bus) -> float:
    """R_eq of the idle bus: parallel terminators || every receiver input (incl. the RS-485 driver's own)."""
    loads = [t.resistance_ohm for t in bus.plan.terminations if t.kind == "parallel"]
    loads += [input_resistance_ohm(n.unit_loads) for n in bus.plan.nodes]
    if bus.plan.standard == "rs485":
        loads.append(input_resistance_ohm(bus.driver.unit_loads))
    return parallel_ohm(*loads)


def bias_supply_v(bus: Bus) -> float:
    b = bus.plan.bias
    return b.supply_v if b is not None and b.supply_v is not None else bus.plan.supply_v


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
    """Each bias resistor to fit (pull-up = pull-down), in ohm; see recommended_bias(bus)."""
    return recommended_bias(bus)[0]


def recommended_bias_position_m(bus: Bus) -> float:
    """Where to fit the recommended bias network, in metres along the trunk; see recommended_bias(bus)."""
    return recommended_bias(bus)[1]


def recommended_bias(bus: Bus) -> tuple[float, float]:
    """(R_B in ohm, position in m): the largest E24 pull-up = pull-down keeping every listener >= 250 mV idle.

    Seen from the bias point the idle bus is R_in with each listener at t_k of the bias point's voltage, so
    V_k = V_S t_k R_in / (2 R_B + R_in) and R_B,max = (R_in / 2)(V_S t_min / V_target - 1); for a short bus
    t_min = 1 and this is the lumped (R_eq / 2)(V_S / V_min - 1). V_target = 200 mV threshold + 50 mV margin.
    When the far end sags so much that no resistor reaches the target from the plan's bias point, the value
    for the middle of the trunk is given (fix text says to move the bias there).
    """
    supply_v = bias_supply_v(bus)
    for position_m in (bias_position_m(bus), 0.5 * bus.plan.trunk_length_m):
        r_in, t_min = bias_view(bus, position_m)
        if supply_v * t_min > IDLE_TARGET_V:
            return e24_at_or_below(max_bias_ohm(r_in, supply_v * t_min, IDLE_TARGET_V)), position_m
    return e24_at_or_below(max_bias_ohm(idle_load_ohm(bus), supply_v, IDLE_TARGET_V)), bias_position_m(bus)


def idle_levels_v(bus: Bus) -> tuple[tuple[str, ...], np.ndarray]:
    """Idle V_AB at every listening node (receivers, and the driver's own receiver on RS-485), via the ladder."""
    receivers = receiver_elements(bus)
    d = bus.plan.driver
    if bus.plan.standard == "rs485":
        receivers.append(DcElement(d.name, d.position_m, d.stub_length_m, input_resistance_ohm(bus.driver.unit_loads)))
    loads = fixed_load_elements(bus)
    elements = [*receivers, *loads]
    sources_v = np.array([[e.source_v] for e in elements])
    v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)
    return tuple(r.name for r in receivers), v[: len(receivers), 0]


def check_failsafe_bias(bus: Bus) -> list[Finding]:
    """Idle-bus level with the plan's bias (or none) vs the 200 mV receiver threshold; one whole-bus finding."""
    r_eq = idle_load_ohm(bus)
    supply_v = bias_supply_v(bus)
    r_rec, at_m = recommended_bias(bus)
    r_max = max_bias_ohm(r_eq, supply_v)
    criterion = (
        "idle V_AB = V_S R_eq / (2 R_B + R_eq) >= 200 mV at every receiver (solved along the cable); "
        f"below {IDLE_TARGET_V * 1e3:.0f} mV is tight"
    )
    advice = (
        f"fit a pull-up of {r_rec:g} Ohm from the {supply_v:g} V supply to A and a pull-down of {r_rec:g} Ohm "
        f"from B to ground at {at_m:g} m along the trunk, which keeps every receiver at >= "
        f"{IDLE_TARGET_V * 1e3:.0f} mV allowing for the cable (lumped: R_eq {r_eq:.1f} Ohm gives "
        f"R_B,max = {r_max:.0f} Ohm for 200 mV)"
    )
    rs422_note = (
        " On RS-422 the single driver normally stays enabled, so this matters only if the driver is disabled, "
        "powered down or unplugged."
        if bus.plan.standard == "rs422"
        else ""
    )
    if bus.plan.bias is None:
        # RS-422's one driver is not tri-stated in normal use, so an unbiased line is the usual design.
        verdict = Verdict.HOLDS if bus.plan.standard == "rs422" else Verdict.BREAKS
        return [
            Finding(
                RULE_ID,
                "Idle-bus level (no bias network)",
                verdict,
                0.0,
                IDLE_THRESHOLD_V,
                "V",
                None,
                criterion,
                SOURCE,
                fix=""
                if verdict is Verdict.HOLDS
                else f"Add failsafe bias: {advice}; or use receivers with failsafe thresholds on every node.",
                detail="With every driver off the pair idles at 0 V, inside the undefined band. "
                + FAILSAFE_NOTE
                + rs422_note,
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
        f"Lumped formula: {v_lumped:.3f} V with R_eq {r_eq:.1f} Ohm and {b.pull_up_ohm:g} / {b.pull_down_ohm:g} Ohm "
        f"from {supply_v:g} V ({current_a * 1e3:.2f} mA); lowest along the cable {v_worst:.3f} V at '{names[k]}'. "
        + FAILSAFE_NOTE
        + rs422_note
    )
    fix = ""
    if verdict is not Verdict.HOLDS:
        fix = f"Strengthen the bias: {advice}."
    return [
        Finding(
            RULE_ID,
            "Idle-bus level with the bias network",
            verdict,
            v_worst,
            IDLE_THRESHOLD_V,
            "V",
            None,
            criterion,
            SOURCE,
            fix=fix,
            detail=detail,
        )
    ]
