"""Check a bus plan: every rule's findings, the overall verdict and a summary with a bill of materials.

The summary is Pairline's advice for the bus as laid out: terminators where they belong with corrected
values, the bias network sized for those terminators (engine.rules.bias), the stub limit per node, the spare
unit loads and the highest bit rate the rules allow. Resistor ratings come from engine.rules.power (twice
the normal-case power, rounded up to a usual rating).
"""

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from pairline.engine import ENGINE_VERSION
from pairline.engine.bus import Bus, build_bus
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import BusInputError, BusPlan, TerminationSpec, cross_field_problems, load_plan, plan_to_dict
from pairline.engine.rules.bias import IDLE_TARGET_V, bias_advice_text, bias_choice, check_failsafe_bias, idle_levels_v
from pairline.engine.rules.cable_ends import nearest_end_m, terminator_value_ohm
from pairline.engine.rules.common_mode import check_common_mode
from pairline.engine.rules.length_rate import check_length_vs_rate, max_bit_rate_bps
from pairline.engine.rules.loads import (
    bias_supply_v,
    check_driver_load,
    check_unit_loads,
    further_nodes_for_bus,
    spare_unit_loads,
)
from pairline.engine.rules.power import check_resistor_power, rating_text, rating_to_buy_w, resistor_powers
from pairline.engine.rules.preferred import preferred_at_or_above
from pairline.engine.rules.signal import check_signal_integrity
from pairline.engine.rules.stubs import check_stubs, max_bit_rate_for_stubs_bps, max_stub_by_node_m
from pairline.engine.rules.termination import (
    GAMMA_HOLDS,
    check_ac_termination,
    check_termination,
    end_match,
    ends_to_terminate_m,
    rc_capacitance_window_f,
)
from pairline.engine.rules.unterminated import check_unterminated
from pairline.engine.rules.voltage import check_receiver_voltage
from pairline.engine.units import length_text, si_format

RuleCheck = Callable[[Bus], list[Finding]]

RULES: tuple[RuleCheck, ...] = (
    check_unit_loads,
    check_driver_load,
    check_stubs,
    check_termination,
    check_unterminated,
    check_ac_termination,
    check_receiver_voltage,
    check_failsafe_bias,
    check_common_mode,
    check_length_vs_rate,
    check_resistor_power,
    check_signal_integrity,
)
CAPACITOR_RATING = "≥ 25 V"  # twice the 12 V the pair can see in a common-mode fault (TIA-485-A range)


@dataclass(frozen=True, slots=True)
class TerminatorAdvice:
    position_m: float
    kind: str  # "parallel" or "rc"
    resistance_ohm: float
    capacitance_f: float | None
    power_rating_w: float


@dataclass(frozen=True, slots=True)
class BiasAdvice:
    position_m: float
    pull_up_ohm: float
    pull_down_ohm: float
    supply_v: float
    idle_v: float  # lowest idle V_AB over the receivers with the advised terminators, cable included
    power_rating_w: float  # for each resistor


@dataclass(frozen=True, slots=True)
class BomItem:
    item: str
    value: str
    quantity: int
    rating: str
    note: str


@dataclass(frozen=True, slots=True)
class PlanSummary:
    terminators: tuple[TerminatorAdvice, ...]
    bias: BiasAdvice | None
    bias_note: str  # why there is no bias advice when a bias network was wanted but none fits; else ""
    max_stub_m: dict[str, float]
    spare_unit_loads: float
    further_nodes: dict[str, int]
    max_bit_rate_bps: float | None  # None: no rate fits, the trunk is too long for the length rules
    bom: tuple[BomItem, ...]


@dataclass(frozen=True, slots=True)
class PlanReport:
    plan: BusPlan
    bus: Bus
    findings: tuple[Finding, ...]
    summary: PlanSummary
    verdict: Verdict
    engine_version: str


def check_plan(plan: BusPlan | dict[str, Any]) -> PlanReport:
    """Run every rule on a plan. A dict is validated first; input that cannot be modelled raises BusInputError."""
    if not isinstance(plan, BusPlan):
        plan = load_plan(plan)
    problems = cross_field_problems(plan_to_dict(plan))
    if problems:
        raise BusInputError(problems)
    bus = build_bus(plan)
    findings = tuple(f for rule in RULES for f in rule(bus))
    return PlanReport(
        plan=plan,
        bus=bus,
        findings=findings,
        summary=summarise(bus),
        verdict=worst([f.verdict for f in findings]),
        engine_version=ENGINE_VERSION,
    )


# --- summary ----------------------------------------------------------------------------------------------


def advised_terminations(bus: Bus) -> tuple[TerminationSpec, ...]:
    """Terminators Pairline advises: one per cable end that needs it.

    The ends are engine.rules.termination.ends_to_terminate_m, the same ends the placement rule asks for.
    Where the plan already has exactly
    one terminator at an end and it holds (|Gamma| <= 0.05; an RC one also with a capacitor that suits both the
    round trip and the bit), the advice keeps it, so the summary only differs from the plan where a finding asks
    for a change. Otherwise the value is Z0 corrected for the loads lumped at that end (nearest E24), as RC when
    the plan has an RC terminator there and a capacitor suits both the round trip and the bit.
    """
    plan = bus.plan
    advised = []
    for end in ends_to_terminate_m(bus):
        at_end = [t for t in plan.terminations if nearest_end_m(bus, t.position_m) == end]
        if len(at_end) == 1 and _terminator_holds(bus, at_end[0]):
            advised.append(at_end[0])
            continue
        r = terminator_value_ohm(bus, end)
        rc = next((t for t in at_end if t.kind == "rc"), None)
        c_lo, c_hi = rc_capacitance_window_f(bus, r)
        if rc is not None and c_lo <= c_hi:
            c = rc.capacitance_f if rc.capacitance_f is not None and c_lo <= rc.capacitance_f <= c_hi else None
            c = c if c is not None else preferred_at_or_above(c_lo)
            advised.append(TerminationSpec(position_m=end, kind="rc", resistance_ohm=r, capacitance_f=c))
        else:
            advised.append(TerminationSpec(position_m=end, kind="parallel", resistance_ohm=r))
    return tuple(advised)


def _terminator_holds(bus: Bus, term: TerminationSpec) -> bool:
    """The plan's terminator matches its end (|Gamma| <= 0.05) and, if RC, its capacitor suits the window."""
    _, _, gamma = end_match(bus, term.position_m, term.resistance_ohm, [])
    if abs(gamma) > GAMMA_HOLDS:
        return False
    if term.kind == "rc":
        c_lo, c_hi = rc_capacitance_window_f(bus, term.resistance_ohm)
        return term.capacitance_f is not None and c_lo <= term.capacitance_f <= c_hi
    return True


def summarise(bus: Bus) -> PlanSummary:
    """The advised bus: terminators, bias, limits and the bill of materials."""
    plan = bus.plan
    terms = advised_terminations(bus)
    advised_bus = Bus(plan=plan.model_copy(update={"terminations": list(terms)}), cable=bus.cable, driver=bus.driver)
    powers = [p for p in resistor_powers(advised_bus) if "terminator" in p.label]
    terminators = tuple(
        TerminatorAdvice(t.position_m, t.kind, t.resistance_ohm, t.capacitance_f, p.rating_w)
        for t, p in zip(terms, powers, strict=True)
    )
    bias = _bias_advice(advised_bus)
    bias_note = ""
    if bias is None and (plan.standard == "rs485" or plan.bias is not None):
        bias_note = "none advised: " + bias_advice_text(advised_bus)
    return PlanSummary(
        terminators=terminators,
        bias=bias,
        bias_note=bias_note,
        max_stub_m=max_stub_by_node_m(bus),
        spare_unit_loads=spare_unit_loads(bus),
        further_nodes=further_nodes_for_bus(bus),
        max_bit_rate_bps=_max_rate_bps(bus),
        bom=_bom(bus, terminators, bias),
    )


def _max_rate_bps(bus: Bus) -> float | None:
    """Highest bit rate the length and stub rules allow; None when no rate makes the length fit."""
    length_bps = max_bit_rate_bps(bus)
    return None if length_bps is None else min(length_bps, max_bit_rate_for_stubs_bps(bus))


def _bias_advice(advised_bus: Bus) -> BiasAdvice | None:
    """Bias for the advised terminators; RS-422 only when the plan has a bias network; None when no pair fits.

    The plan's own network is kept when, with the advised terminators, it idles every receiver at >= 250 mV,
    keeps the unit-load budget out of its tight band and the driver load at or above its design value; else
    engine.rules.bias.bias_choice sizes one. idle_v is the lowest idle level over the receivers, cable included.
    """
    plan = advised_bus.plan
    if plan.standard == "rs422" and plan.bias is None:
        return None
    supply_v = bias_supply_v(advised_bus)
    if plan.bias is not None and _plan_bias_holds(advised_bus):
        b = plan.bias
        idle_v = float(min(idle_levels_v(advised_bus)[1]))
        rating_w = rating_to_buy_w(supply_v**2 / min(b.pull_up_ohm, b.pull_down_ohm))
        return BiasAdvice(b.position_m, b.pull_up_ohm, b.pull_down_ohm, supply_v, idle_v, rating_w)
    choice = bias_choice(advised_bus)
    if not choice.fits:
        # A pair that held 200 mV would break the unit-load budget or the driver load: advise none.
        return None
    r_b = choice.resistance_ohm
    return BiasAdvice(choice.position_m, r_b, r_b, supply_v, choice.idle_min_v, rating_to_buy_w(supply_v**2 / r_b))


def _plan_bias_holds(bus: Bus) -> bool:
    levels_v = idle_levels_v(bus)[1]
    unit_loads = [f for f in check_unit_loads(bus) if f.node is None]
    driver_load = check_driver_load(bus)
    return (
        levels_v.size > 0
        and float(min(levels_v)) >= IDLE_TARGET_V
        and all(f.verdict is Verdict.HOLDS for f in unit_loads + driver_load)
    )


def _terminator_note(bus: Bus, t: TerminatorAdvice) -> str:
    """What the advice changes at this terminator's end, against the plan's own parts there."""
    at_end = [p for p in bus.plan.terminations if nearest_end_m(bus, p.position_m) == t.position_m]
    if not at_end:
        return "added, the plan has none there: see termination.placement"
    if len(at_end) == 1 and at_end[0].resistance_ohm == t.resistance_ohm:
        if t.kind == "rc" and at_end[0].capacitance_f != t.capacitance_f:
            plan_c = si_format(at_end[0].capacitance_f or 0.0, "F")
            return f"capacitor changed from the plan's {plan_c}: see termination.rc"
        return "as in the plan"
    plan_text = " + ".join(si_format(p.resistance_ohm, "Ω") for p in at_end)
    return f"changed from the plan's {plan_text}: see termination.value"


def _bom(bus: Bus, terminators: tuple[TerminatorAdvice, ...], bias: BiasAdvice | None) -> tuple[BomItem, ...]:
    plan = bus.plan
    items: list[BomItem] = []
    groups: dict[tuple[float, float, str], list[float]] = {}
    for t in terminators:
        groups.setdefault((t.resistance_ohm, t.power_rating_w, _terminator_note(bus, t)), []).append(t.position_m)
    for (r, rating, change), where in groups.items():
        items.append(
            BomItem(
                "Terminator resistor (across A and B)",
                si_format(r, "Ω"),
                len(where),
                rating_text(rating),
                "at " + " and ".join(length_text(p) for p in where) + f"; {change}",
            )
        )
    caps: dict[float, list[float]] = {}
    for t in terminators:
        if t.kind == "rc" and t.capacitance_f is not None:
            caps.setdefault(t.capacitance_f, []).append(t.position_m)
    for c, where in caps.items():
        items.append(
            BomItem(
                "Terminator capacitor (in series with its resistor)",
                si_format(c, "F"),
                len(where),
                CAPACITOR_RATING,
                "at " + " and ".join(length_text(p) for p in where) + "; twice the 12 V common-mode fault level",
            )
        )
    if bias is not None:
        plan_bias = plan.bias
        for item, r, plan_r in (
            (
                f"Bias pull-up resistor ({bias.supply_v:g} V to A)",
                bias.pull_up_ohm,
                plan_bias and plan_bias.pull_up_ohm,
            ),
            ("Bias pull-down resistor (B to ground)", bias.pull_down_ohm, plan_bias and plan_bias.pull_down_ohm),
        ):
            if plan_bias is None:
                change = "; added, the plan has no bias network: see bias.idle_level"
            else:
                changes = []
                if plan_r != r:
                    changes.append(f"changed from the plan's {si_format(plan_r or 0.0, 'Ω')}")
                if plan_bias.position_m != bias.position_m:
                    changes.append(f"moved from the plan's {length_text(plan_bias.position_m)}")
                change = f"; {' and '.join(changes)}: see bias.idle_level" if changes else "; as in the plan"
            items.append(
                BomItem(
                    item,
                    si_format(r, "Ω"),
                    1,
                    rating_text(bias.power_rating_w),
                    f"at {length_text(bias.position_m)}; every receiver idles at >= "
                    f"{si_format(bias.idle_v, 'V')}" + (" with the terminators above" if terminators else "") + change,
                )
            )
    return tuple(items)


# --- JSON -------------------------------------------------------------------------------------------------


def _json_float(value: float | None) -> float | None:
    """Finite floats pass; inf and nan (an open circuit, no limit) become null."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def finding_to_dict(finding: Finding) -> dict[str, Any]:
    return {
        "rule_id": finding.rule_id,
        "title": finding.title,
        "verdict": finding.verdict.value,
        "value": _json_float(finding.value),
        "limit": _json_float(finding.limit),
        "unit": finding.unit,
        "node": finding.node,
        "criterion": finding.criterion,
        "source": finding.source,
        "fix": finding.fix,
        "detail": finding.detail,
        "limit_kind": finding.limit_kind,
    }


def report_to_dict(report: PlanReport) -> dict[str, Any]:
    """The report as plain JSON types: strings, finite floats or null, ints, lists and dicts."""
    s = report.summary
    counts = {v.value: sum(1 for f in report.findings if f.verdict is v) for v in Verdict}
    bias = s.bias
    return {
        "engine_version": report.engine_version,
        "verdict": report.verdict.value,
        "counts": counts,
        "plan": plan_to_dict(report.plan),
        "resolved": {
            "cable": {
                "label": report.bus.cable.label,
                "z0_ohm": report.bus.cable.z0_ohm,
                "velocity_factor": report.bus.cable.velocity_factor,
                "resistance_ohm_per_m": report.bus.cable.resistance_ohm_per_m,
                "capacitance_f_per_m": report.bus.cable.capacitance_f_per_m,
                "source": report.bus.cable.source,
            },
            "driver": {
                "label": report.bus.driver.label,
                "rise_time_s": report.bus.driver.rise_time_s,
                "open_circuit_v": report.bus.driver.open_circuit_v,
                "source_ohm": report.bus.driver.source_ohm,
                "unit_loads": report.bus.driver.unit_loads,
                "source": report.bus.driver.source,
            },
        },
        "findings": [finding_to_dict(f) for f in report.findings],
        "summary": {
            "terminators": [
                {
                    "position_m": t.position_m,
                    "kind": t.kind,
                    "resistance_ohm": t.resistance_ohm,
                    "capacitance_f": _json_float(t.capacitance_f),
                    "power_rating_w": t.power_rating_w,
                }
                for t in s.terminators
            ],
            "bias": None
            if bias is None
            else {
                "position_m": bias.position_m,
                "pull_up_ohm": bias.pull_up_ohm,
                "pull_down_ohm": bias.pull_down_ohm,
                "supply_v": bias.supply_v,
                "idle_v": _json_float(bias.idle_v),
                "power_rating_w": bias.power_rating_w,
            },
            "bias_note": s.bias_note,
            "max_stub_m": {name: _json_float(v) for name, v in s.max_stub_m.items()},
            "spare_unit_loads": _json_float(s.spare_unit_loads),
            # RS-422 counts receivers, not unit loads: the receivers one driver may still feed (negative: over).
            "spare_receivers": int(s.spare_unit_loads) if report.plan.standard == "rs422" else None,
            "further_nodes": dict(s.further_nodes),
            "max_bit_rate_bps": _json_float(s.max_bit_rate_bps),
            "bom": [
                {"item": b.item, "value": b.value, "quantity": b.quantity, "rating": b.rating, "note": b.note}
                for b in s.bom
            ],
        },
    }


__all__ = [
    "RULES",
    "BiasAdvice",
    "BomItem",
    "PlanReport",
    "PlanSummary",
    "TerminatorAdvice",
    "advised_terminations",
    "check_plan",
    "finding_to_dict",
    "report_to_dict",
    "summarise",
]
