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
54 Ohm, the load meant by two 120 Ohm terminators and 32 UL (which by arithmetic is 51.7 Ohm); TIA-422-B
specifies 100 Ohm, with up to 10 receivers of 4 kOhm beside it (80 Ohm by arithmetic). Two views exist:
    DC view:   RC terminators are open (their capacitor blocks DC); what an idle bias network sees.
    edge view: RC terminators count with their resistor (the capacitor is a short during an edge and,
               while data flow, for as long as RC lasts).
The verdict uses the edge view, the heavier of the two; the DC view is stated in the detail.
The 54 Ohm / 100 Ohm test loads are what the standards mean for their fully loaded bus (TI SLLA628, RS-485
compliance note: 54 Ohm stands for two 120 Ohm terminators and 32 UL), so the load HOLDS down to that full bus
by arithmetic (51.7 Ohm / 80 Ohm), is TIGHT down to 95 % of it (resistor tolerance) and BREAKS below.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import input_resistance_ohm
from pairline.engine.units import length_text, parallel_ohm, si_format

RS485_UNIT_LOAD_BUDGET = 32.0  # TIA-485-A
RS422_MAX_RECEIVERS = 10  # TIA/EIA-422-B
RS422_MIN_INPUT_OHM = 4_000.0  # TIA/EIA-422-B
RS485_DESIGN_LOAD_OHM = 54.0  # TIA-485-A driver test load
RS422_DESIGN_LOAD_OHM = 100.0  # TIA/EIA-422-B driver test load
UNIT_LOAD_OHM = input_resistance_ohm(1.0)  # 12 kOhm, TIA-485-A
# A budget is TIGHT when less than this fraction of it is left.
TIGHT_SPARE_FRACTION = 0.10
# The driver load HOLDS down to the standard's own full bus (51.7 Ohm for RS-485, 80 Ohm for RS-422), is TIGHT
# down to this fraction of it (room for resistor tolerance) and BREAKS below.
LOAD_FLOOR_FRACTION = 0.95
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


def further_nodes_for_bus(bus: Bus) -> dict[str, int]:
    """Further nodes per unit-load class; on RS-422 the receiver count limits every class alike."""
    if bus.plan.standard == "rs422":
        spare = max(0, RS422_MAX_RECEIVERS - len(bus.plan.nodes))
        return dict.fromkeys(UNIT_LOAD_CLASSES, spare)
    return further_nodes(spare_unit_loads(bus))


def _budget_verdict(used: float, budget: float) -> Verdict:
    if used > budget + 1e-9:
        return Verdict.BREAKS
    if budget - used < TIGHT_SPARE_FRACTION * budget - 1e-9:
        return Verdict.TIGHT
    return Verdict.HOLDS


def _fit_text(counts: dict[str, int]) -> str:
    return ", ".join(f"{n} of {label}" for label, n in counts.items())


def check_unit_loads(bus: Bus) -> list[Finding]:
    """Rule "load.unit_loads": RS-485 32 UL incl. bias and the driver's receiver; RS-422 <= 10 receivers."""
    plan = bus.plan
    if plan.standard == "rs422":
        return _check_rs422_receivers(bus)
    parts = unit_load_parts(bus)
    total = sum(parts.values())
    spare = RS485_UNIT_LOAD_BUDGET - total
    verdict = _budget_verdict(total, RS485_UNIT_LOAD_BUDGET)
    fits = further_nodes(spare)
    detail = (
        f"nodes {parts['nodes']:g} UL + driver's own receiver {parts['driver']:g} UL + bias network "
        f"{parts['bias']:.2f} UL = {total:.2f} UL; spare {spare:.2f} UL. Still fits: {_fit_text(fits)}. "
        f"TIGHT when less than {TIGHT_SPARE_FRACTION:.0%} of the 32 UL budget is left."
    )
    fix = ""
    if verdict is not Verdict.HOLDS:
        fix = _unit_load_fix(bus, parts, total)
    return [
        Finding(
            rule_id="load.unit_loads",
            title="Unit-load budget",
            verdict=verdict,
            value=total,
            limit=RS485_UNIT_LOAD_BUDGET,
            unit="UL",
            node=None,
            criterion="Sum of unit loads on the pair (nodes, the driver's own receiver, the bias network) <= 32 UL",
            source=_UL_SOURCE,
            fix=fix,
            detail=detail,
        )
    ]


def _unit_load_fix(bus: Bus, parts: dict[str, float], total: float) -> str:
    from pairline.engine.rules.bias import bias_choice  # bias builds on this module; one sizing function for both texts

    over = total - RS485_UNIT_LOAD_BUDGET
    n_nodes = len(bus.plan.nodes)
    steps = []
    if over > 0:
        head = f"To fit 32 UL, remove {over:.2f} UL"
    else:
        head = (
            f"The bus fits the 32 UL budget with {-over:.2f} UL spare, under the {TIGHT_SPARE_FRACTION:.0%} "
            "Pairline keeps for the next nodes; to make room"
        )
    # What receiver rating would bring the nodes inside the budget with 10 % to spare?
    room = (1.0 - TIGHT_SPARE_FRACTION) * RS485_UNIT_LOAD_BUDGET - parts["driver"] - parts["bias"]
    if room > 0 and n_nodes:
        per_node = room / n_nodes
        rated = next((ul for ul in UNIT_LOAD_CLASSES.values() if ul <= per_node), None)
        if rated is not None:
            steps.append(f"use receivers of {rated:g} UL or less on all {n_nodes} nodes")
    bias = bus.plan.bias
    if bias is not None and parts["bias"] > 1.0:
        now = f"{min(bias.pull_up_ohm, bias.pull_down_ohm):g} Ω, {parts['bias']:.1f} UL"
        choice = bias_choice(bus)
        if choice.fits and choice.resistance_ohm > min(bias.pull_up_ohm, bias.pull_down_ohm):
            where = "" if choice.position_m == bias.position_m else f", moved to {length_text(choice.position_m)}"
            steps.append(
                f"raise each bias resistor to {choice.resistance_ohm:g} Ω (now {now}){where}, as bias.idle_level "
                "advises"
            )
        else:
            steps.append(f"raise the bias resistors (now {now}) and use receivers with failsafe thresholds")
    steps.append("or split the bus with a repeater, which starts a fresh 32 UL budget")
    return head + ": " + "; ".join(steps) + "."


def _check_rs422_receivers(bus: Bus) -> list[Finding]:
    n = len(bus.plan.nodes)
    verdict = _budget_verdict(float(n), float(RS422_MAX_RECEIVERS))
    findings = [
        Finding(
            rule_id="load.unit_loads",
            title="Receivers on one RS-422 driver",
            verdict=verdict,
            value=float(n),
            limit=float(RS422_MAX_RECEIVERS),
            unit="receivers",
            node=None,
            criterion="One RS-422 driver feeds at most 10 receivers",
            source=_422_SOURCE,
            fix=""
            if verdict is Verdict.HOLDS
            else (
                f"Move {n - RS422_MAX_RECEIVERS} receiver(s) to a second driver or a repeater, or use RS-485 "
                "(32 UL) instead."
                if n > RS422_MAX_RECEIVERS
                else "Plan the next receivers on a second driver or a repeater: this one is at its limit."
            ),
            detail=f"{n} receivers; {max(0, RS422_MAX_RECEIVERS - n)} more fit. TIGHT at 10 receivers.",
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


def receiver_loads_ohm(bus: Bus) -> list[float]:
    """Input resistance of every receiver on the pair: nodes and, on RS-485, the driver's own receiver."""
    loads = [input_resistance_ohm(n.unit_loads) for n in bus.plan.nodes]
    if bus.plan.standard == "rs485":
        loads.append(input_resistance_ohm(bus.driver.unit_loads))
    return loads


def bias_supply_v(bus: Bus) -> float:
    """The bias network's supply: its own supply_v, else the plan's supply voltage."""
    b = bus.plan.bias
    return b.supply_v if b is not None and b.supply_v is not None else bus.plan.supply_v


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
    """The standard's own fully loaded bus: RS-485 120||120||32 UL; RS-422 100 || 10 x 4 kOhm."""
    if standard == "rs422":
        return parallel_ohm(RS422_DESIGN_LOAD_OHM, *[RS422_MIN_INPUT_OHM] * RS422_MAX_RECEIVERS)
    return parallel_ohm(120.0, 120.0, input_resistance_ohm(RS485_UNIT_LOAD_BUDGET))


def driver_load_holds_ohm(standard: str) -> float:
    """Lowest driver load that HOLDS: the standard's fully loaded bus (51.7 Ohm RS-485, 80 Ohm RS-422), which the
    54 / 100 Ohm test loads stand for (TI SLLA628). The tiny allowance keeps the exact full bus from rounding out."""
    return full_bus_load_ohm(standard) * (1.0 - 1e-9)


def check_driver_load(bus: Bus) -> list[Finding]:
    """Rule "load.driver": terminators || receivers || bias vs the 54 Ohm (RS-485) / 100 Ohm (RS-422) design load."""
    standard = bus.plan.standard
    design = design_load_ohm(standard)
    holds_ohm = driver_load_holds_ohm(standard)
    floor = LOAD_FLOOR_FRACTION * full_bus_load_ohm(standard)
    edge_ohm = driver_load_ohm(bus, edge=True)
    dc_ohm = driver_load_ohm(bus, edge=False)
    if edge_ohm >= holds_ohm:
        verdict = Verdict.HOLDS
    elif edge_ohm >= floor:
        verdict = Verdict.TIGHT
    else:
        verdict = Verdict.BREAKS
    r_s = bus.driver.source_ohm
    v_od = bus.driver.open_circuit_v * (edge_ohm / (edge_ohm + r_s)) if math.isfinite(edge_ohm) else None
    name = "RS-422" if standard == "rs422" else "RS-485"
    detail = (
        f"Edge view (RC terminators as their resistor): {_ohm_text(edge_ohm)}; DC view (RC terminators open): "
        f"{_ohm_text(dc_ohm)}. HOLDS at or above the standard's fully loaded bus, {holds_ohm:.1f} Ω, which its "
        f"{design:g} Ω test load stands for; TIGHT down to {floor:.1f} Ω ({LOAD_FLOOR_FRACTION:.0%} of it)."
    )
    if v_od is not None:
        detail += f" The driver model ({bus.driver.open_circuit_v:g} V behind {r_s:g} Ω) gives {v_od:.2f} V into it."
    return [
        Finding(
            rule_id="load.driver",
            title="Load on the driver (terminators, receivers and bias across the pair)",
            verdict=verdict,
            value=edge_ohm,
            limit=holds_ohm,
            unit="Ω",
            node=None,
            criterion=(
                f"Terminators || receivers || bias (edge view) >= the {name} fully loaded bus of {holds_ohm:.1f} Ω "
                f"(the {design:g} Ω test load stands for it); TIGHT to {floor:.1f} Ω"
            ),
            source=(
                "TIA/EIA-422-B (driver into 100 Ω, 10 receivers of 4 kΩ)"
                if standard == "rs422"
                else "TIA-485-A (driver into 54 Ω: two 120 Ω terminators and 32 UL); TI SLLA628 RS-485 compliance "
                "note (54 Ω stands for that full bus); TI SLLA272"
            ),
            fix="" if verdict is Verdict.HOLDS else _driver_load_fix(bus, holds_ohm),
            detail=detail,
            limit_kind="min",
        )
    ]


def _ohm_text(value_ohm: float) -> str:
    return "open (no load)" if not math.isfinite(value_ohm) else si_format(value_ohm, "Ω")


def _driver_load_fix(bus: Bus, design_ohm: float) -> str:
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
    if math.isfinite(bias_eq) and bias_eq < 10 * design_ohm:
        steps.append(f"raise the bias resistors (together {bias_eq:.0f} Ω across the pair)")
    if plan.standard == "rs485" and sum(n.unit_loads for n in plan.nodes) > 8:
        steps.append("use 1/4 or 1/8 UL receivers")
    if not steps:
        steps.append("use a cable of higher impedance with matching terminators, or fewer receivers")
    return f"Raise the load to at least {design_ohm:.1f} Ω: " + "; ".join(steps) + "."
