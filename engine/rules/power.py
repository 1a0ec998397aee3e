"""Power in the terminators and bias resistors, and the rating to buy.

Normal case: P = V^2 / R with the driver's full open-circuit differential voltage across a parallel
terminator (an upper bound: the source resistance and the cable only lower it). Bias resistors: while the
driver holds the line against the bias, each resistor has the whole bias supply across it, P = V_S^2 / R.
An RC terminator passes no steady current; each edge dissipates C dV^2 / 2 in its resistor with dV = 2 V_OC,
so a line toggling at the bit rate puts at most 2 C V_OC^2 f_bit into it (never more than V_OC^2 / R).

Fault case: a wire forced to the end of the common-mode range while the other is held at 0 V, i.e.
12 V across a terminator (or the plan's supply if higher); a pull-up with its wire at -7 V has V_S + 7 V
across it, a pull-down with its wire at +12 V has 12 V.

Rating: the smallest of the usual series (1/8, 1/4, 1/2, 1, 2 W; then 5, 10, 25 W power resistors) that is
at least twice the normal-case power (2x derating), taken at the corner that raises it (resistor 5 % low, supply
5 % high; engine.rules.margins). Parts of one family on a bus (the terminators; the two bias resistors) get one
rating, the largest of the family, so the same part is bought for every position. The verdict breaks when even
2 W cannot carry the nominal normal case with that derating; it is tight when the corner would need more than
2 W, or when a sustained fault would put more than 2 W into the part.
"""

import dataclasses
import math
from dataclasses import dataclass

from pairline.engine.bus import Bus
from pairline.engine.dc import bias_supply_v
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.margins import RESISTOR_TOLERANCE, SUPPLY_TOLERANCE

RULE_ID = "power.resistor"
RATINGS_W = (0.125, 0.25, 0.5, 1.0, 2.0, 5.0, 10.0, 25.0)
USUAL_MAX_W = 2.0  # largest of the usual small-resistor ratings
DERATING = 2.0  # buy at least twice the dissipated power (common practice)
FAULT_LINE_HIGH_V = 12.0  # top of the RS-485 common-mode range, TIA/EIA-485-A
FAULT_LINE_LOW_V = -7.0  # bottom of it
SOURCE = (
    "P = V^2 / R (Joule); fault voltages from the -7..+12 V common-mode range of TIA/EIA-485-A; "
    "2x derating and the 1/8 .. 2 W ratings: common practice; tolerances: engine.rules.margins"
)
CORNER_POWER_FACTOR = (1.0 + SUPPLY_TOLERANCE) ** 2 / (1.0 - RESISTOR_TOLERANCE)  # V^2 / R at its highest


@dataclass(frozen=True, slots=True)
class ResistorPower:
    label: str  # e.g. "terminator at 300 m", "bias pull-up"
    position_m: float
    resistance_ohm: float
    normal_w: float
    fault_w: float
    fault_v: float
    rating_w: float  # to buy: the family's largest 2x-derated corner power


def rating_to_buy_w(power_w: float) -> float:
    """Smallest standard rating >= 2 x power_w (1/8, 1/4, 1/2, 1, 2 W, then 5, 10, 25 W); above, 2P rounded up."""
    needed_w = DERATING * max(power_w, 0.0)
    for rating in RATINGS_W:
        if rating >= needed_w * (1 - 1e-12):
            return rating
    return float(math.ceil(needed_w))


def resistor_powers(bus: Bus) -> list[ResistorPower]:
    """Normal and fault power of every terminator and bias resistor in the plan, each family rated alike."""
    v_oc = bus.driver.open_circuit_v
    fault_term_v = max(FAULT_LINE_HIGH_V, bus.plan.supply_v)
    parts = []
    for t in bus.plan.terminations:
        r = t.resistance_ohm
        label = f"{'RC ' if t.kind == 'rc' else ''}terminator at {t.position_m:g} m"
        if t.kind == "rc" and t.capacitance_f is not None:
            normal_w = min(v_oc**2 / r, 2.0 * t.capacitance_f * v_oc**2 * bus.plan.bit_rate_bps)
            fault_w = min(fault_term_v**2 / r, 2.0 * t.capacitance_f * fault_term_v**2 * bus.plan.bit_rate_bps)
        else:
            normal_w, fault_w = v_oc**2 / r, fault_term_v**2 / r
        parts.append(ResistorPower(label, t.position_m, r, normal_w, fault_w, fault_term_v, 0.0))
    b = bus.plan.bias
    if b is not None:
        supply_v = bias_supply_v(bus)
        up_fault_v = supply_v - FAULT_LINE_LOW_V
        for label, r, fault_v in (
            ("bias pull-up", b.pull_up_ohm, up_fault_v),
            ("bias pull-down", b.pull_down_ohm, FAULT_LINE_HIGH_V),
        ):
            normal_w = supply_v**2 / r
            parts.append(ResistorPower(label, b.position_m, r, normal_w, fault_v**2 / r, fault_v, 0.0))
    ratings: dict[bool, float] = {}
    for p in parts:
        family = p.label.startswith("bias")
        ratings[family] = max(ratings.get(family, 0.0), rating_to_buy_w(p.normal_w * CORNER_POWER_FACTOR))
    return [dataclasses.replace(p, rating_w=ratings[p.label.startswith("bias")]) for p in parts]


def check_resistor_power(bus: Bus) -> list[Finding]:
    """One finding per terminator and bias resistor: normal power, the rating to buy, and the fault case."""
    findings = []
    for p in resistor_powers(bus):
        verdict = (
            Verdict.BREAKS
            if p.normal_w * DERATING > USUAL_MAX_W
            else Verdict.TIGHT
            if p.fault_w > USUAL_MAX_W or p.normal_w * CORNER_POWER_FACTOR * DERATING > USUAL_MAX_W
            else Verdict.HOLDS
        )
        fault_rating = rating_to_buy_w(p.fault_w / DERATING)  # a fault is rare: no derating on it
        if verdict is Verdict.BREAKS:
            fix = (
                f"The {p.label} ({p.resistance_ohm:g} Ω) dissipates {rating_text(p.normal_w)} in normal use, "
                f"more than a {USUAL_MAX_W:g} W part carries with 2x derating: check its value against the cable "
                f"impedance (terminator) or the recommended bias resistors, or buy a "
                f"{rating_text(p.rating_w)} power resistor."
            )
        elif verdict is Verdict.TIGHT and p.fault_w <= USUAL_MAX_W:
            fix = (
                f"Buy {rating_text(p.rating_w)} for the {p.label}: with the resistor 5 % low on a supply 5 % high it "
                f"dissipates {rating_text(p.normal_w * CORNER_POWER_FACTOR)}, more than a {USUAL_MAX_W:g} W part "
                "carries with 2x derating; or check its value against the cable impedance (terminator) or the "
                "advised bias resistors."
            )
        elif verdict is Verdict.TIGHT:
            fix = (
                f"Buy {rating_text(p.rating_w)} for the {p.label}; a sustained fault with {p.fault_v:g} V across "
                f"it puts {rating_text(p.fault_w)} into it, so either buy {rating_text(fault_rating)} or protect "
                f"the bus against miswiring to supplies (fuse or PTC in the line, transient suppressors to ground)."
            )
        else:
            fix = ""
        findings.append(
            Finding(
                RULE_ID,
                f"Power in the {p.label}",
                verdict,
                p.normal_w,
                USUAL_MAX_W / DERATING,
                "W",
                None,
                f"P = V^2 / R at the driver's {bus.driver.open_circuit_v:g} V open-circuit (bias: its supply) "
                f"<= 1 W, so a 2 W part runs at half rating; buy >= 2 P from 1/8, 1/4, 1/2, 1, 2 W; tight when "
                f"the fault case ({p.fault_v:g} V across it) exceeds 2 W, or the corner (resistor 5 % low, supply "
                "5 % high) needs more than 2 W",
                SOURCE,
                fix=fix,
                detail=(
                    f"{p.resistance_ohm:g} Ω: {rating_text(p.normal_w)} normal -> buy {rating_text(p.rating_w)}; "
                    f"fault {p.fault_v:g} V -> {rating_text(p.fault_w)}, which a {rating_text(fault_rating)} part "
                    "survives."
                ),
                figures=(("rating_w", p.rating_w), ("position_m", p.position_m)),
            )
        )
    return findings


def rating_text(power_w: float) -> str:
    """A power for people: the usual ratings as fractions (1/8, 1/4, 1/2 W), else mW below 1 W, else W."""
    if power_w in _FRACTIONS:
        return _FRACTIONS[power_w]
    return f"{power_w * 1e3:.1f} mW" if power_w < 1.0 else f"{power_w:.3g} W"


_FRACTIONS = {0.125: "1/8 W", 0.25: "1/4 W", 0.5: "1/2 W"}
