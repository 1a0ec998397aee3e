"""Bus loading: the unit-load budget and the total resistive load the driver sees.

Unit loads (TIA-485-A; TI SLLA166 and SLLA272). A unit load (UL) draws at most 1 mA when its line is held at
+12 V and at most 0.8 mA (out of the input) at -7 V, which Pairline models as 12 kOhm per UL (as
engine.plan.input_resistance_ohm does). An RS-485 driver must drive 32 UL. Everything hung on the pair
counts: each node's receiver, the driver's own receiver (a transceiver listens while it does not drive) and
the failsafe bias network (SLLA272: bias may consume unit loads, up to 20 UL in its example). The budget
holds per line; the bias puts R_u on line A and R_d on line B, each a load to a rail like a receiver input,
so it counts with its worse line: UL_bias = 12 kOhm / min(R_u, R_d). A 600 Ohm network is the 20 UL of the
SLLA272 example. (Rating the pull-up by its current at -7 V from a 5 V supply would be stricter by 25 %.)
RS-422 (TIA/EIA-422-B) counts receivers instead: one driver, at most 10 receivers of >= 4 kOhm.

Driver load. The driver sees every terminator, every receiver input and the bias network in parallel across
the pair: R_load = R_T1 || R_T2 || ... || (12 kOhm / UL)_i || (R_u + R_d). TIA-485-A specifies the driver into
54 Ohm, the load meant by two 120 Ohm terminators and 32 UL (TI SLLA628), which by arithmetic is 51.7 Ohm.
TIA/EIA-422-B specifies the driver into 100 Ohm and allows up to 10 receivers of at least 4 kOhm; it states no
total-load figure Pairline could confirm, so the RS-422 limit is the arithmetic of its stated figures, 100 Ohm
|| 10 x 4 kOhm = 80 Ohm. Two views exist:
    DC view:   RC terminators are open (their capacitor blocks DC); what an idle bias network sees.
    edge view: RC terminators count with their resistor (the capacitor is a short during an edge and,
               while data flow, for as long as RC lasts).
The verdict uses the edge view, the heavier of the two; the DC view is stated in the detail.

Tight bands (engine.rules.margins): the unit-load budget is TIGHT when the bias resistors at the low end of
their 5 % tolerance would take it over 32 UL (receiver ratings are maxima already); the driver load is TIGHT
when terminators and bias resistors 5 % low would take it below the full bus.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.dc import receiver_loads_ohm
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import input_resistance_ohm
from pairline.engine.rules.margins import RESISTOR_TOLERANCE, band_verdict, corner_bus
from pairline.engine.units import parallel_ohm, si_format

RS485_UNIT_LOAD_BUDGET = 32.0  # TIA-485-A
RS422_MAX_RECEIVERS = 10  # TIA/EIA-422-B
RS422_MIN_INPUT_OHM = 4_000.0  # TIA/EIA-422-B
RS485_DESIGN_LOAD_OHM = 54.0  # TIA-485-A driver test load
RS422_DESIGN_LOAD_OHM = 100.0  # TIA/EIA-422-B driver test load
UNIT_LOAD_OHM = input_resistance_ohm(1.0)  # 12 kOhm, TIA-485-A
UNIT_LOAD_CLASSES: dict[str, float] = {"1 UL": 1.0, "1/2 UL": 0.5, "1/4 UL": 0.25, "1/8 UL": 0.125}

_UL_SOURCE = "TIA-485-A unit load and 32 UL driver capability; TI SLLA166 and SLLA272 (bias networks load the bus)"
_422_SOURCE = "TIA/EIA-422-B: one driver, up to 10 receivers of at least 4 kΩ"


def bias_unit_loads(pull_up_ohm: float, pull_down_ohm: float) -> float:
    """The failsafe bias network in unit loads, by its worse line: 12 kOhm / min(R_u, R_d).

    Source: TIA-485-A unit load (~12 kOhm); TI SLLA272 (bias networks consume unit loads).
    """
    return UNIT_LOAD_OHM / min(pull_up_ohm, pull_down_ohm)


def max_nodes(node_unit_loads: float, budget_unit_loads: float = RS485_UNIT_LOAD_BUDGET) -> int:
    """How many nodes of one rating fit a unit-load budget: floor(budget / UL per node).

    Source: TI SLLA166 (32 / UL per node: 1/2 UL -> 64, 1/4 UL -> 128, 1/8 UL -> 256 nodes).
    """
    if budget_unit_loads <= 0.0:
        return 0
    # The small allowance keeps 12 / 0.125 = 96 from becoming 95 through rounding.
    return int(math.floor(budget_unit_loads / node_unit_loads + 1e-9))


def further_nodes(spare_unit_loads: float) -> dict[str, int]:
    """Further nodes of each unit-load class (1, 1/2, 1/4, 1/8 UL) that fit the spare budget."""
    return {label: max_nodes(ul, spare_unit_loads) for label, ul in UNIT_LOAD_CLASSES.items()}


def unit_load_parts(bus: Bus) -> dict[str, float]:
    """The RS-485 unit-load budget by contributor: nodes, the driver's own receiver, the bias network."""
    plan = bus.plan
    bias_ul = 0.0
    if plan.bias is not None:
        bias_ul = bias_unit_loads(plan.bias.pull_up_ohm, plan.bias.pull_down_ohm)
    return {
        "nodes": float(sum(n.unit_loads for n in plan.nodes)),
        "driver": bus.driver.unit_loads if plan.standard == "rs485" else 0.0,
        "bias": bias_ul,
    }


def unit_load_total(bus: Bus) -> float:
    """Total unit loads on the pair (RS-485 sense): nodes + driver's receiver + bias network."""
    return float(sum(unit_load_parts(bus).values()))


def spare_unit_loads(bus: Bus) -> float:
    """Unit loads left: RS-485 32 UL minus the total; RS-422 the receivers still allowed (each counts 1)."""
    if bus.plan.standard == "rs422":
        return float(RS422_MAX_RECEIVERS - len(bus.plan.nodes))
    return RS485_UNIT_LOAD_BUDGET - unit_load_total(bus)


def unit_loads_text(value: float) -> str:
    """A unit-load figure for a sentence: two decimals, and never a negative zero."""
    return f"{value + 0.0:.2f}" if abs(value) >= 0.005 else "0.00"


def check_unit_loads(bus: Bus) -> list[Finding]:
    """Rule "load.unit_loads": RS-485 32 UL incl. bias and the driver's receiver; RS-422 <= 10 receivers."""
    plan = bus.plan
    if plan.standard == "rs422":
        return _check_rs422_receivers(bus)
    parts = unit_load_parts(bus)
    total = sum(parts.values())
    corner_total = unit_load_total(corner_bus(bus, bias_resistors=-1))
    budget = RS485_UNIT_LOAD_BUDGET
    verdict = band_verdict(total <= budget + 1e-9, corner_total <= budget + 1e-9)
    detail = (
        f"nodes {parts['nodes']:g} UL + driver's own receiver {parts['driver']:g} UL + bias network "
        f"{unit_loads_text(parts['bias'])} UL = {unit_loads_text(total)} UL of {budget:g}"
    )
    if parts["bias"] > 0.0:
        detail += f"; with the bias resistors 5 % low, {unit_loads_text(corner_total)} UL"
    detail += ". TIGHT when the bias resistors at the low end of their tolerance would take it over 32 UL."
    return [
        Finding(
            rule_id="load.unit_loads",
            title="Unit-load budget",
            verdict=verdict,
            value=total,
            limit=budget,
            unit="UL",
            node=None,
            criterion="Sum of unit loads on the pair (nodes, the driver's own receiver, the bias network) <= 32 UL; "
            "tight when bias resistors 5 % low would exceed it",
            source=_UL_SOURCE,
            fix="" if verdict is Verdict.HOLDS else _unit_load_fix(bus, parts, total, corner_total),
            detail=detail,
        )
    ]


def either(steps: list[str]) -> str:
    """Alternatives for a sentence: "a", "a or b", "a; b; or c"."""
    if len(steps) <= 1:
        return "".join(steps)
    if len(steps) == 2:
        return f"{steps[0]}, or {steps[1]}"
    return "; ".join(steps[:-1]) + f"; or {steps[-1]}"


def _unit_load_fix(bus: Bus, parts: dict[str, float], total: float, corner_total: float) -> str:
    budget = RS485_UNIT_LOAD_BUDGET
    n_nodes = len(bus.plan.nodes)
    over = total - budget
    if over > 0:
        head = f"To fit 32 UL, take {unit_loads_text(over)} UL off the pair"
        room = budget - parts["driver"] - parts["bias"]
    else:
        head = (
            f"With the bias resistors 5 % low the pair carries {unit_loads_text(corner_total)} UL, over 32 UL; "
            "make room"
        )
        room = budget - parts["driver"] - parts["bias"] * (1.0 / (1.0 - RESISTOR_TOLERANCE))
    steps = []
    if room > 0 and n_nodes:
        rated = next((ul for ul in UNIT_LOAD_CLASSES.values() if ul * n_nodes <= room), None)
        if rated is not None and rated < max(n.unit_loads for n in bus.plan.nodes):
            steps.append(f"use receivers of {rated:g} UL or less on all {n_nodes} nodes")
    bias = bus.plan.bias
    if bias is not None and parts["bias"] > 1.0:
        steps.append(
            f"raise the bias resistors (now {min(bias.pull_up_ohm, bias.pull_down_ohm):g} Ω, "
            f"{parts['bias']:.1f} UL), with receivers of failsafe thresholds where the idle level then falls short"
        )
    steps.append("split the bus with a repeater, which starts a fresh 32 UL budget")
    return f"{head}: {either(steps)}."


def _check_rs422_receivers(bus: Bus) -> list[Finding]:
    n = len(bus.plan.nodes)
    verdict = Verdict.BREAKS if n > RS422_MAX_RECEIVERS else Verdict.HOLDS
    findings = [
        Finding(
            rule_id="load.unit_loads",
            title="Receivers on one RS-422 driver",
            verdict=verdict,
            value=float(n),
            limit=float(RS422_MAX_RECEIVERS),
            unit="receivers",
            node=None,
            criterion="One RS-422 driver feeds at most 10 receivers (a count: no tolerance, no tight band)",
            source=_422_SOURCE,
            fix=""
            if verdict is Verdict.HOLDS
            else (
                f"Move {n - RS422_MAX_RECEIVERS} receiver(s) to a second driver or a repeater, or use RS-485 "
                "(32 UL) instead."
            ),
            detail=f"{n} receivers of the 10 one RS-422 driver feeds.",
        )
    ]
    for node in bus.plan.nodes:
        r_in = input_resistance_ohm(node.unit_loads)
        if r_in < RS422_MIN_INPUT_OHM:
            findings.append(
                Finding(
                    rule_id="load.unit_loads",
                    title="RS-422 receiver input resistance",
                    verdict=Verdict.BREAKS,
                    value=r_in,
                    limit=RS422_MIN_INPUT_OHM,
                    unit="Ω",
                    node=node.name,
                    criterion="Each RS-422 receiver input >= 4 kΩ (3 UL at 12 kΩ per UL)",
                    source=_422_SOURCE,
                    fix=f"Use a receiver at node '{node.name}' of 3 UL or less (input >= 4 kΩ).",
                    detail=f"{node.unit_loads:g} UL -> {r_in:.0f} Ω.",
                    limit_kind="min",
                )
            )
    return findings


def bias_equivalent_ohm(bus: Bus) -> float:
    """The bias network across the pair for a differential signal: R_u + R_d (the supply is an AC ground)."""
    bias = bus.plan.bias
    return math.inf if bias is None else bias.pull_up_ohm + bias.pull_down_ohm


def driver_load_ohm(bus: Bus, *, edge: bool = True) -> float:
    """Total load across the pair: terminators || receivers || bias equivalent.

    edge=True counts RC terminators with their resistor (the capacitor shorts during an edge); edge=False is
    the DC view, where they are open. Source: TI SLLA272 (bus load), TIA-485-A (54 Ohm design load).
    """
    terms = [t.resistance_ohm for t in bus.plan.terminations if edge or t.kind == "parallel"]
    return parallel_ohm(*terms, *receiver_loads_ohm(bus), bias_equivalent_ohm(bus))


def design_load_ohm(standard: str) -> float:
    """The driver's specified test load: 54 Ohm RS-485 (TIA-485-A), 100 Ohm RS-422 (TIA/EIA-422-B)."""
    return RS422_DESIGN_LOAD_OHM if standard == "rs422" else RS485_DESIGN_LOAD_OHM


def full_bus_load_ohm(standard: str) -> float:
    """The fully loaded bus by arithmetic: RS-485 120 || 120 || 32 UL (the load TIA-485-A's 54 Ohm stands for,
    TI SLLA628); RS-422 the 100 Ohm test load || 10 x 4 kOhm receivers (TIA/EIA-422-B's stated figures)."""
    if standard == "rs422":
        return parallel_ohm(RS422_DESIGN_LOAD_OHM, *[RS422_MIN_INPUT_OHM] * RS422_MAX_RECEIVERS)
    return parallel_ohm(120.0, 120.0, input_resistance_ohm(RS485_UNIT_LOAD_BUDGET))


def driver_load_holds_ohm(standard: str) -> float:
    """Lowest driver load inside the limit: the fully loaded bus (51.7 Ohm RS-485, 80 Ohm RS-422). The tiny
    allowance keeps the exact full bus from rounding out."""
    return full_bus_load_ohm(standard) * (1.0 - 1e-9)


def check_driver_load(bus: Bus) -> list[Finding]:
    """Rule "load.driver": terminators || receivers || bias vs the fully loaded bus of the standard."""
    standard = bus.plan.standard
    design = design_load_ohm(standard)
    limit_ohm = driver_load_holds_ohm(standard)
    edge_ohm = driver_load_ohm(bus, edge=True)
    dc_ohm = driver_load_ohm(bus, edge=False)
    corner_ohm = driver_load_ohm(corner_bus(bus, terminators=-1, bias_resistors=-1), edge=True)
    verdict = band_verdict(edge_ohm >= limit_ohm, corner_ohm >= limit_ohm)
    r_s = bus.driver.source_ohm
    v_od = bus.driver.open_circuit_v * (edge_ohm / (edge_ohm + r_s)) if math.isfinite(edge_ohm) else None
    name = "RS-422" if standard == "rs422" else "RS-485"
    detail = (
        f"Edge view (RC terminators as their resistor): {_ohm_text(edge_ohm)}; DC view (RC terminators open): "
        f"{_ohm_text(dc_ohm)}; with terminators and bias resistors 5 % low: {_ohm_text(corner_ohm)}. The limit is "
        f"the {name} fully loaded bus, {limit_ohm:.1f} Ω, which its {design:g} Ω test load stands for."
    )
    if v_od is not None:
        detail += f" The driver model ({bus.driver.open_circuit_v:g} V behind {r_s:g} Ω) gives {v_od:.2f} V into it."
    return [
        Finding(
            rule_id="load.driver",
            title="Load on the driver (terminators, receivers and bias across the pair)",
            verdict=verdict,
            value=edge_ohm,
            limit=limit_ohm,
            unit="Ω",
            node=None,
            criterion=(
                f"Terminators || receivers || bias (edge view) >= the {name} fully loaded bus of {limit_ohm:.1f} Ω "
                f"(the {design:g} Ω test load stands for it); tight when resistors 5 % low fall below it"
            ),
            source=(
                "TIA/EIA-422-B: driver into 100 Ω, up to 10 receivers of at least 4 kΩ; 80 Ω is their parallel "
                "(arithmetic, common practice)"
                if standard == "rs422"
                else "TIA-485-A (driver into 54 Ω: two 120 Ω terminators and 32 UL); TI SLLA628 RS-485 compliance "
                "note (54 Ω stands for that full bus); TI SLLA272"
            ),
            fix="" if verdict is Verdict.HOLDS else _driver_load_fix(bus, limit_ohm),
            detail=detail,
            limit_kind="min",
        )
    ]


def _ohm_text(value_ohm: float) -> str:
    return "open (no load)" if not math.isfinite(value_ohm) else si_format(value_ohm, "Ω")


def _driver_load_fix(bus: Bus, limit_ohm: float) -> str:
    plan = bus.plan
    wanted = 1 if plan.standard == "rs422" else 2
    steps = []
    if len(plan.terminations) > wanted:
        steps.append(
            f"terminate only the cable end(s) ({wanted} terminator{'s' if wanted > 1 else ''}); "
            f"the plan has {len(plan.terminations)}"
        )
    z0 = bus.cable.z0_ohm
    low = [t for t in plan.terminations if t.resistance_ohm < 0.9 * z0]
    if low:
        steps.append(f"raise terminators below {0.9 * z0:.0f} Ω to about {z0:.0f} Ω (the cable's impedance)")
    bias_eq = bias_equivalent_ohm(bus)
    if math.isfinite(bias_eq) and bias_eq < 10 * limit_ohm:
        steps.append(f"raise the bias resistors (together {bias_eq:.0f} Ω across the pair)")
    if plan.standard == "rs485" and sum(n.unit_loads for n in plan.nodes) > 8:
        steps.append("use 1/4 or 1/8 UL receivers")
    if not steps:
        steps.append("use a cable of higher impedance with matching terminators, or fewer receivers")
    return f"Keep the load at or above {limit_ohm:.1f} Ω with resistors 5 % low: {either(steps)}."
