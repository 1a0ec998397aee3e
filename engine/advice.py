"""The advised plan: the best design (engine.design) built as a plan and checked by the same rules, in full.

What terminators and bias cannot meet is said plainly (Unmet): which rule, why, and what can (failsafe
receivers, lighter receivers, a repeater, a shorter stub, a lower bit rate); a remedy that edits the plan is
re-checked (the edited plan advised again) before it is offered.
"""

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass

from pairline.engine.bus import Bus, with_plan
from pairline.engine.dc import bias_supply_v
from pairline.engine.design import COVERED_RULES, PlanChange, apply_changes, best_design, bias_positions
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import BusPlan, DeviceSpec, NodeSpec
from pairline.engine.repeaters import isolated_split, split_for_length, split_for_unit_loads
from pairline.engine.rules.bias import bias_min_ohm, failsafe_step, listener_needs, size_bias, without_bias
from pairline.engine.rules.loads import RS485_UNIT_LOAD_BUDGET, bias_unit_loads
from pairline.engine.rules.margins import long_run_factor
from pairline.engine.ruleset import RuleRun, run_design_rules, run_rules
from pairline.engine.units import length_text


@dataclass(frozen=True, slots=True)
class Unmet:
    """A rule the advised plan still breaks: why terminators and bias cannot meet it, and what can."""

    rule_id: str
    nodes: tuple[str, ...]
    why: str
    remedies: tuple[str, ...]

    @property
    def text(self) -> str:
        return f"{self.why} What can: " + "; ".join(self.remedies) + "." if self.remedies else self.why


@dataclass(frozen=True, slots=True)
class Advice:
    """The advised plan, how it differs from the plan, and its own check."""

    plan: BusPlan
    changes: tuple[PlanChange, ...]
    run: RuleRun  # the advised plan's check: findings and simulation
    unmet: tuple[Unmet, ...]
    simulated: bool = True  # False: the quick form, its signal findings are the plan's (see advise)

    @property
    def findings(self) -> tuple[Finding, ...]:
        return self.run.findings

    @property
    def verdict(self) -> Verdict:
        return worst([f.verdict for f in self.run.findings])


# --- advising ----------------------------------------------------------------------------------------------------


def badness_by_rule(findings: Sequence[Finding]) -> dict[str, int]:
    """Per rule, the sum of its findings' verdict ranks: lower is better."""
    out: dict[str, int] = {}
    for f in findings:
        out[f.rule_id] = out.get(f.rule_id, 0) + f.verdict.rank
    return out


def _with_rules(bus: Bus, base: Sequence[Finding], changes: Sequence[PlanChange]) -> tuple[PlanChange, ...]:
    """Each change with the rules it moves for the better when made alone on the plan (re-checked)."""
    before = badness_by_rule([f for f in base if f.rule_id in COVERED_RULES])
    out = []
    for change in changes:
        after = badness_by_rule(run_design_rules(with_plan(bus, apply_changes(bus.plan, [change]))))
        improved = tuple(r for r in {**before, **after} if after.get(r, 0) < before.get(r, 0))
        out.append(dataclasses.replace(change, rule_ids=improved))
    return tuple(out)


def advise(run: RuleRun, *, simulate: bool = True) -> Advice:
    """The advised plan for a checked bus: the best design, its change list and its own full check.

    simulate=False is the quick form for a verdict while typing: the advised plan's design rules are run, the
    rest of its findings (stubs, ground offsets, length, the simulated signal) are the plan's own, and remedies
    that need a further search are left out. The plan, the changes and what they mean for the load rules (and so
    the spare capacity) are the same as in the full form."""
    bus = run.bus
    skip: set[str] = set()
    design = best_design(bus)
    while True:
        plan = design.plan if design is not None else bus.plan
        changes = _with_rules(bus, run.findings, design.changes) if design is not None else ()
        if not changes:
            advised_run = run
            break
        if not simulate:
            assert design is not None
            kept = [f for f in run.findings if f.rule_id not in {d.rule_id for d in design.findings}]
            advised_run = RuleRun(with_plan(bus, plan), (*design.findings, *kept), run.simulation)
            break
        advised_run = run_rules(with_plan(bus, plan))
        if covered_breaks(advised_run.findings) <= covered_breaks(run.findings):
            break
        # The simulation broke what the design rules could not see: try the next kind of terminators, and give
        # no advice rather than advice that leaves more broken.
        assert design is not None  # changes came from it
        skip.add(design.kind)
        design = best_design(bus, frozenset(skip))
    return Advice(
        plan=plan,
        changes=changes,
        run=advised_run,
        unmet=_unmet(advised_run, search=simulate, held_back=bool(skip) and not changes),
        simulated=simulate or not changes,
    )


def covered_breaks(findings: Sequence[Finding]) -> int:
    """How many findings of the rules a change of terminators or bias can move break."""
    return sum(f.verdict is Verdict.BREAKS for f in findings if f.rule_id in COVERED_RULES)


_NOT_COVERED = {
    "stub.length": "Terminators and bias do not shorten a stub: its reflection depends on its length and the "
    "driver's edge.",
    "stub.branch": "Terminators and bias on the trunk do not shorten a branch: its open end reflects the edge "
    "whatever the trunk's ends carry.",
    "common_mode.range": "Terminators and bias do not change a ground offset.",
    "length.rate_rule": "Terminators and bias do not change the path length or the bit rate.",
    "length.loss": "Terminators and bias do not change the cable's loss over the path.",
}
_REPEATER = "split the bus with a repeater (each segment has its own budget, terminators and bias)"


_HELD_BACK = (
    "The terminators and bias that would meet it leave the simulated signal broken at more receivers (a long stub "
    "or the line's length rings without them), so the plan's own are kept."
)


def _unmet(advised: RuleRun, *, search: bool = True, held_back: bool = False) -> tuple[Unmet, ...]:
    """Every rule the advised plan still breaks, why, and what can meet it. held_back: every design was worse once
    simulated, so the advised plan is the plan itself."""
    by_rule: dict[str, list[Finding]] = {}
    for f in advised.findings:
        if f.verdict is Verdict.BREAKS:
            by_rule.setdefault(f.rule_id, []).append(f)
    out = []
    for rule_id, found in by_rule.items():
        nodes = tuple(dict.fromkeys(f.node for f in found if f.node))
        own = [f.fix.rstrip(".") for f in found if f.fix]
        remedies = list(dict.fromkeys(own))[:4]
        if rule_id in _NOT_COVERED:
            why = _NOT_COVERED[rule_id]
        elif held_back and rule_id in COVERED_RULES:
            why = _HELD_BACK
            remedies = [*remedies[:3], _REPEATER] if remedies else [_REPEATER]
        elif rule_id == "bias.idle_level":
            why, remedies = _bias_unmet(advised.bus, search=search)
        elif rule_id in ("load.unit_loads", "load.driver"):
            why = (
                "The nodes and the driver's own receiver load the pair this much before any bias or terminator choice."
            )
            held = sum(bias_unit_loads(b.pull_up_ohm, b.pull_down_ohm) for b in advised.bus.plan.bias)
            remedies = [r for r in (_lighter_receivers(advised.bus, held) if search else "", _REPEATER) if r]
        elif rule_id in ("signal.integrity", "signal.confirms"):
            why = (
                "The simulated waveform still breaks with the advised terminators and bias: the cause is a stub, "
                "the bit rate or the driver's edge, which they do not change."
            )
        else:
            why = f"With the advised terminators and bias, {rule_id} still breaks."
        proposal = _repeater_proposal(advised.bus, rule_id, found)
        if proposal:
            remedies = [r for r in remedies if r != _REPEATER] + [proposal]
        out.append(Unmet(rule_id, nodes, why, tuple(remedies)))
    return tuple(out)


def _repeater_proposal(bus: Bus, rule_id: str, found: Sequence[Finding]) -> str:
    """Where a repeater would meet a rule that terminators and bias cannot (engine.repeaters), or ""."""
    if rule_id == "load.unit_loads":
        return split_for_unit_loads(bus, sum(bias_unit_loads(b.pull_up_ohm, b.pull_down_ohm) for b in bus.plan.bias))
    if rule_id in ("length.rate_rule", "length.loss"):
        worst_path = max(found, key=lambda f: f.value or 0.0)
        why = "the rule allows at this rate" if rule_id == "length.rate_rule" else "the cable's loss allows"
        return split_for_length(bus, worst_path.value or 0.0, (worst_path.limit or 0.0) / long_run_factor(), why)
    if rule_id == "common_mode.range":
        limit = min(f.limit for f in found if f.limit is not None)
        return isolated_split(bus, {n.name: n.ground_offset_v for n in bus.plan.nodes}, limit)
    return ""


def _bias_unmet(bus: Bus, *, search: bool = True) -> tuple[str, list[str]]:
    """Why no bias network fits the advised terminators, with the numbers, and what can replace it."""
    unbiased = without_bias(bus)
    r_min = bias_min_ohm(unbiased)
    sizings = [size_bias(unbiased, p, bias_supply_v(bus)) for p in bias_positions(bus.plan)]
    best = max(sizings, key=lambda s: s.nominal_max_ohm)
    room = (
        "the nodes already take the whole 32 UL budget"
        if r_min == float("inf")
        else f"the 32 UL budget and the driver-load limit need at least {r_min:.0f} Ω"
    )
    reach = (
        f"at most {best.nominal_max_ohm:.0f} Ω each (from {length_text(best.position_m)})"
        if best.nominal_max_ohm > 0.0
        else "more than the bias supply can give through any resistor"
    )
    why = (
        "No pull-up / pull-down pair idles every receiver that needs bias at its threshold within the bus's room, "
        f"not even 1 % parts: with the advised terminators that takes {reach}, while {room}."
    )
    needs = listener_needs(unbiased)
    needing = [n for n in needs if not n.covered]
    remedies = [failsafe_step(needing, len(needs)) + " (they read an idle terminated bus without bias)"]
    held = bias_unit_loads(best.nominal_max_ohm, best.nominal_max_ohm) if best.nominal_max_ohm else 0.0
    lighter = _lighter_receivers(bus, held) if search else ""
    if lighter:
        remedies.append(lighter)
    remedies.append(_REPEATER)
    return why, remedies


def _lighter_receivers(bus: Bus, bias_unit_loads: float = 0.0) -> str:
    """Receivers of fewer unit loads, if some rating makes the advice meet every rule it covers (re-checked by
    advising the edited plan); empty when none does. The first rating tried is the heaviest that leaves room, by
    arithmetic, for the driver's receiver and a bias of bias_unit_loads; lighter ones follow if it fails."""
    plan = bus.plan
    if plan.standard != "rs485" or not plan.nodes:
        return ""
    heaviest = max(bus.devices[n.name].unit_loads for n in plan.nodes)
    room_each = (RS485_UNIT_LOAD_BUDGET - bus.driver_device.unit_loads - bias_unit_loads) / len(plan.nodes)
    ratings = [r for r in (0.5, 0.25, 0.125) if r < heaviest and (r <= room_each or r == 0.125)]
    for rating in ratings:
        nodes = [_rated(bus, n, rating) for n in plan.nodes]
        design = best_design(with_plan(bus, plan.model_copy(update={"nodes": nodes})))
        if design is not None and design.breaks == 0:
            steps = " and ".join(c.text for c in design.changes)
            return f"use receivers of {rating:g} UL on every node" + (f", then {steps}" if steps else "")
    return ""


def _rated(bus: Bus, node: NodeSpec, rating: float) -> NodeSpec:
    """The node with a device of at most `rating` unit loads, otherwise as it was."""
    ul = bus.devices[node.name].unit_loads
    if ul <= rating:
        return node
    spec = node.device or DeviceSpec(class_key=bus.plan.default_device)
    return node.model_copy(update={"device": spec.model_copy(update={"unit_loads": rating})})
