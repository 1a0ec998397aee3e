"""The summary of a checked plan, read off the advised plan's own findings, and its bill of materials.

Nothing here asks a rule again: terminators and bias are the advised plan's parts, their ratings the power
findings' figures, the idle level the bias finding's value, the stub limits the stub findings' limits, the
highest bit rate the smallest "max_bit_rate_bps" figure any finding states, the longest path at any rate the
loss finding's "max_path_m", and the spare capacity engine.capacity's one answer.
"""

import dataclasses
import math
from dataclasses import dataclass

from pairline.engine.advice import Advice
from pairline.engine.bus import Bus
from pairline.engine.capacity import Capacity
from pairline.engine.dc import network_supply_v
from pairline.engine.design import PlanChange
from pairline.engine.devices import ResolvedDevice
from pairline.engine.findings import Finding
from pairline.engine.plan import BusPlan, TerminationSpec
from pairline.engine.rules.margins import LENGTH_ALLOWANCE, long_run_factor
from pairline.engine.rules.power import rating_text
from pairline.engine.units import length_text, si_format

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
    """One bias network of the advised plan; the idle levels are the whole bus's, held by every network."""

    position_m: float
    pull_up_ohm: float
    pull_down_ohm: float
    supply_v: float
    idle_v: float  # idle V_AB at the receiver nearest its threshold, advised terminators, cable included
    idle_corner_v: float  # the same at the worst corner of the tolerances
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
    bias: tuple[BiasAdvice, ...]  # every bias network of the advised plan, along the trunk
    bias_note: str  # why there is no bias network when one was wanted (or why none is needed); else ""
    max_stub_m: dict[str, float]
    capacity: Capacity
    max_bit_rate_bps: float  # highest rate the length and stub rules allow for the longest path
    max_path_m: float  # the longest path the cable's loss allows at any bit rate
    path_m: float  # the plan's longest signal path
    rate_note: str  # both limits stated when the path is beyond max_path_m; else ""
    bom: tuple[BomItem, ...]

    @property
    def spare_unit_loads(self) -> float:
        return self.capacity.spare_unit_loads

    @property
    def further_nodes(self) -> dict[str, int]:
        return self.capacity.further_nodes


def _by_position(plan: BusPlan) -> list[TerminationSpec]:
    """The plan's terminators along the trunk, as a reader looks for them."""
    return sorted(plan.terminations, key=lambda t: t.position_m)


def _power(findings: tuple[Finding, ...], prefix: str) -> float:
    """The rating the power rule gives a family of parts (every part of one family is rated alike)."""
    return next(
        (f.figure("rating_w") or 0.0 for f in findings if f.rule_id == "power.resistor" and prefix in f.title), 0.0
    )


def summarise(original: Bus, advice: Advice, capacity: Capacity) -> PlanSummary:
    """The summary of the advised plan, read off its findings (see the module docstring)."""
    findings = advice.findings
    plan = advice.plan
    term_w = _power(findings, "terminator")
    terminators = tuple(
        TerminatorAdvice(t.position_m, t.kind, t.resistance_ohm, t.capacitance_f, term_w) for t in _by_position(plan)
    )
    bias_note = ""
    idle = next(f for f in findings if f.rule_id == "bias.idle_level")
    bias = tuple(
        BiasAdvice(
            b.position_m,
            b.pull_up_ohm,
            b.pull_down_ohm,
            network_supply_v(advice.run.bus, b),
            idle.value or 0.0,
            idle.figure("corner_v") or 0.0,
            _power(findings, "bias"),
        )
        for b in sorted(plan.bias, key=lambda b: b.position_m)
    )
    if not bias and (plan.standard == "rs485" or original.plan.bias):
        unmet = next((u for u in advice.unmet if u.rule_id == "bias.idle_level"), None)
        if unmet is not None or idle.fix:
            bias_note = "none advised: " + (unmet.text if unmet else idle.fix)
        elif plan.standard == "rs485":
            bias_note = "none needed: every receiver's failsafe reads the undriven bus as a 1"
    rates = [r for f in findings if (r := f.figure("max_bit_rate_bps")) is not None]
    loss = next(f for f in findings if f.rule_id == "length.loss")
    path_m = next(f.value for f in findings if f.rule_id == "length.rate_rule") or 0.0
    max_path_m = loss.figure("max_path_m") or math.inf
    rate_note = ""
    if path_m > max_path_m:
        rate_note = (
            f"the longest path, {length_text(path_m)}, is beyond the {length_text(max_path_m)} the cable's loss "
            "allows at any bit rate (length.loss): shorten it or split the bus with a repeater"
        )
    summary = PlanSummary(
        terminators=terminators,
        bias=bias,
        bias_note=bias_note,
        max_stub_m={f.node: f.limit for f in findings if f.rule_id == "stub.length" and f.node and f.limit},
        capacity=capacity,
        max_bit_rate_bps=min(rates, default=math.inf),
        max_path_m=max_path_m,
        path_m=path_m,
        rate_note=rate_note,
        bom=(),
    )
    return dataclasses.replace(summary, bom=bill_of_materials(original, advice, summary))


# --- bill of materials ---------------------------------------------------------------------------------------


def _change_note(changes: tuple[PlanChange, ...], part: str, added: object) -> str:
    """How the advice arrived at a part: as in the plan, or the change that brought it."""
    for c in changes:
        if c.part == part and added in c.added:
            return f"{c.text} ({', '.join(c.rule_ids) or 'see the change list'})"
    return "as in the plan"


def bill_of_materials(original: Bus, advice: Advice, summary: PlanSummary) -> tuple[BomItem, ...]:
    """Terminators, capacitors and bias resistors of the advised plan; the cable with its spare; the transceivers
    by class."""
    plan = advice.plan
    items: list[BomItem] = []
    groups: dict[tuple[float, str], list[float]] = {}
    for spec, t in zip(_by_position(plan), summary.terminators, strict=True):
        groups.setdefault((t.resistance_ohm, _change_note(advice.changes, "terminator", spec)), []).append(t.position_m)
    rating = rating_text(summary.terminators[0].power_rating_w) if summary.terminators else ""
    for (r, note), where in groups.items():
        items.append(
            BomItem(
                "Terminator resistor (across A and B)",
                si_format(r, "Ω"),
                len(where),
                rating,
                "at " + " and ".join(length_text(p) for p in where) + f"; {note}",
            )
        )
    caps: dict[float, list[float]] = {}
    for t in summary.terminators:
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
    networks: dict[tuple[float, float, float, str], list[float]] = {}
    for network, b in zip(sorted(plan.bias, key=lambda b: b.position_m), summary.bias, strict=True):
        note = _change_note(advice.changes, "bias", network)
        networks.setdefault((b.pull_up_ohm, b.pull_down_ohm, b.supply_v, note), []).append(b.position_m)
    for (up, down, supply_v, note), where in networks.items():
        b = summary.bias[0]
        idle = (
            f"at {' and '.join(length_text(p) for p in where)}; the receivers that need bias idle at >= "
            f"{b.idle_v * 1e3:.0f} mV ({b.idle_corner_v * 1e3:.0f} mV at the worst corner of the tolerances); {note}"
        )
        for item, r in (
            (f"Bias pull-up resistor ({supply_v:g} V to A)", up),
            ("Bias pull-down resistor (B to ground)", down),
        ):
            items.append(BomItem(item, si_format(r, "Ω"), len(where), rating_text(b.power_rating_w), idle))
    items.append(_cable_item(advice.run.bus))
    items += _transceiver_items(advice.run.bus)
    return tuple(items)


def _cable_item(bus: Bus) -> BomItem:
    """The cable to order: trunk plus every branch and stub, with the spare a run as built needs. A branch's node
    counts its own stub only; the branch it hangs on is counted once, whole."""
    plan = bus.plan
    placed = {n.name: bus.layout.place(n) for n in plan.nodes}
    own = [p[2] if p is not None else n.stub_length_m for n, p in zip(plan.nodes, placed.values(), strict=True)]
    stubs_m = plan.driver.stub_length_m + sum(own)
    branches_m = sum(b.length_m for b in bus.layout.branches)
    drawn_m = plan.trunk_length_m + branches_m + stubs_m
    parts = f"trunk {plan.trunk_length_m:.4g} m + " + (f"branches {branches_m:.4g} m + " if branches_m else "")
    return BomItem(
        f"Cable: {bus.cable.label}",
        f"{math.ceil(round(drawn_m * long_run_factor(), 6)):.0f} m",  # round first: 100 m x 1.1 is 110 m, not 111
        1,
        f"Z0 {bus.cable.z0_ohm:g} Ω",
        f"{parts}stubs {stubs_m:.3g} m = {drawn_m:.4g} m, plus "
        f"{LENGTH_ALLOWANCE:.0%} spare for routing, service loops and terminations (common practice)",
    )


def _transceiver_items(bus: Bus) -> list[BomItem]:
    """The driver's part, then the nodes' parts counted per device (and whether they may drive)."""
    plan = bus.plan
    standard = "TIA-485-A" if plan.standard == "rs485" else "TIA/EIA-422-B"
    driver = bus.driver_device
    items = [
        BomItem(
            f"Driver transceiver: {driver.label}", f"{driver.unit_loads:.3g} UL", 1, standard, f"'{plan.driver.name}'"
        )
    ]
    classes: dict[tuple[bool, ResolvedDevice], list[str]] = {}
    for n in plan.nodes:
        classes.setdefault((n.may_drive, bus.devices[n.name]), []).append(n.name)
    for (talks, device), names in sorted(classes.items(), key=lambda item: (not item[0][0], item[0][1].label)):
        shown = ", ".join(f"'{name}'" for name in names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")
        item = f"{'Transceiver (may drive)' if talks else 'Receiver'}: {device.label}"
        rating = standard + (
            f"; isolated {device.isolation_rating_vrms:g} Vrms ({device.isolation_grade})" if device.isolated else ""
        )
        items.append(BomItem(item, f"{device.unit_loads:.3g} UL, {device.failsafe_text}", len(names), rating, shown))
    return items
