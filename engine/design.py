"""Designs for the advice: terminators and bias chosen together, each applied to the plan as a change list.

A design is a set of terminators and bias networks. For each place the bias could go (the plan's bias points, the
driver, the device nearest either cable end or the middle of the trunk) the terminators and the bias are sized
jointly: the terminator at an end is corrected for what else is lumped there, the bias network included (R_T || R_P
= Z0), and the bias is the weakest E24 pair that still idles every receiver at 200 mV at the worst corner of the
tolerances for those terminators (engine.rules.bias.size_bias); the two are iterated until they agree. Each design
is applied to the plan as a change list and weighed by the rules it can move (engine.ruleset.DESIGN_RULES): fewest
findings that break, then fewest tight, then the bias left where the plan has it, then fewest changes, then the bias
where the plan (or else the driver) has it, then the weakest bias (the most room left). Parallel terminators are
tried first; RC terminators, or none where the line may stay unterminated, only when the best parallel design is not
clean. The bias is an E24 (5 %) part that holds at the worst corner; only when none fits the room does the search
take one that holds with nominal parts (TIGHT), E24 or else E96 (1 %).
The chosen plan is then checked in full, simulation included.

Sizing goes through the listeners of engine.dc and counts only the receivers whose failsafe does not cover the
bus (engine.rules.bias.listener_needs): a bus of idle-bus failsafe receivers gets no bias. A plan with several
bias networks also gets them resized together, equal, where they are.
"""

import math
from collections.abc import Sequence
from dataclasses import dataclass

from pairline.engine.bus import Bus, view_key, with_plan
from pairline.engine.dc import network_supply_v
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import MAX_BIAS_OHM, BiasSpec, BusPlan, TerminationSpec
from pairline.engine.rules.bias import (
    BiasSizing,
    bias_min_ohm,
    bias_text,
    size_bias,
    size_bias_networks,
    without_bias,
)
from pairline.engine.rules.cable_ends import (
    end_name,
    lumped_load_ohm,
    nearest_end_m,
    required_ends_m,
    terminator_value_ohm,
)
from pairline.engine.rules.preferred import E24, E96, preferred_at_or_above, preferred_at_or_below
from pairline.engine.rules.rc_termination import rc_capacitance_window_f
from pairline.engine.rules.termination import ends_to_terminate_m, gamma_verdict
from pairline.engine.rules.unterminated import line_may_stay_unterminated
from pairline.engine.ruleset import run_design_rules
from pairline.engine.units import length_text, parallel_ohm, si_format

# Rules a change of terminators or bias can move; the others (stubs, ground offsets, length and rate) it cannot.
COVERED_RULES = frozenset(
    {
        "load.unit_loads",
        "load.driver",
        "termination.placement",
        "termination.value",
        "termination.rc",
        "termination.may_omit",
        "bias.idle_level",
        "signal.dc_level",
        "power.resistor",
        "signal.integrity",
        "signal.confirms",
    }
)
_SIZING_ROUNDS = 4  # terminator <-> bias agreement settles in two or three


Part = TerminationSpec | BiasSpec


@dataclass(frozen=True, slots=True)
class PlanChange:
    """One change from the plan to the advised plan: terminators at one place, or one bias network."""

    part: str  # "terminator" or "bias"
    where: str  # "the far end (1000 m)", "400 m", "bias network"
    removed: tuple[Part, ...]  # terminators or bias networks taken out
    added: tuple[Part, ...]  # terminators or bias networks put in
    before_text: str
    after_text: str
    text: str  # the change as an instruction, lower-case: "change the terminator at ... from 120 Ω to 130 Ω"
    why: str
    rule_ids: tuple[str, ...] = ()  # the rules it moves on its own (re-checked)


def apply_changes(plan: BusPlan, changes: Sequence[PlanChange]) -> BusPlan:
    """The plan with the changes made: listed terminators and bias networks out (one occurrence each), added ones
    in after the kept ones."""
    terminations = list(plan.terminations)
    bias = list(plan.bias)
    added_t: list[TerminationSpec] = []
    added_b: list[BiasSpec] = []
    for change in changes:
        for spec in change.removed:
            (bias if isinstance(spec, BiasSpec) else terminations).remove(spec)  # type: ignore[arg-type]
        added_t += [spec for spec in change.added if isinstance(spec, TerminationSpec)]
        added_b += [spec for spec in change.added if isinstance(spec, BiasSpec)]
    return plan.model_copy(update={"terminations": terminations + added_t, "bias": bias + added_b})


# --- designs ---------------------------------------------------------------------------------------------------


def _ohm(value: float) -> str:
    return si_format(value, "Ω")


def _term_text(t: TerminationSpec) -> str:
    return _ohm(t.resistance_ohm) + (
        f" + {si_format(t.capacitance_f, 'F')}" if t.kind == "rc" and t.capacitance_f else ""
    )


def _rc_spec(bus: Bus, end_m: float, resistance_ohm: float, old_c: float | None) -> TerminationSpec | None:
    """An RC terminator whose capacitor's whole tolerance band suits the round trip and the bit; None if none."""
    c_lo, c_hi = rc_capacitance_window_f(bus, resistance_ohm)
    if c_lo > c_hi:
        return None
    c = old_c if old_c is not None and c_lo <= old_c <= c_hi else preferred_at_or_above(c_lo)
    if c > c_hi:
        return None
    return TerminationSpec(position_m=end_m, kind="rc", resistance_ohm=resistance_ohm, capacitance_f=c)


def _holds_at_end(bus: Bus, term: TerminationSpec) -> bool:
    """The plan's terminator matches its end (termination.value HOLDS) and, if RC, its capacitor suits the window."""
    if gamma_verdict(bus, term.resistance_ohm, lumped_load_ohm(bus, term.position_m)) is not Verdict.HOLDS:
        return False
    if term.kind == "rc":
        c_lo, c_hi = rc_capacitance_window_f(bus, term.resistance_ohm)
        return term.capacitance_f is not None and c_lo <= term.capacitance_f <= c_hi
    return True


def _terminator_changes(bus: Bus, kind: str, original: Bus) -> list[PlanChange] | None:
    """_terminator_changes_for, worked out once per design kind and bias networks: the design search asks again
    for each bias position and tier it sizes."""
    key = ("terminator_changes", kind, tuple(bus.plan.bias), view_key(original))
    found = bus.memo.get(key, lambda: _terminator_changes_for(bus, kind, original))
    return None if found is None else list(found)


def _terminator_changes_for(bus: Bus, kind: str, original: Bus) -> tuple[PlanChange, ...] | None:
    """Terminator changes for one design kind, on a bus that already carries the design's bias network.

    kind "plan": keep each end's terminator that holds, unless the design changes what is lumped at that end (a
    bias moved to or from it: the terminator was sized for what was there), else a corrected one of the plan's
    kind where it fits;
    "parallel" / "rc": every end that needs one gets that kind; "none": no terminators (only where the line may
    stay unterminated). None when the kind cannot be built (no RC capacitor suits the bus)."""
    plan = bus.plan
    ends = ends_to_terminate_m(bus) if kind != "none" else ()
    at_end: dict[float, list[TerminationSpec]] = {0.0: [], plan.trunk_length_m: []}
    loose: list[TerminationSpec] = []
    for t in plan.terminations:
        end = nearest_end_m(bus, t.position_m)
        (at_end[end] if end is not None else loose).append(t)
    changes: list[PlanChange] = []
    for end, present in at_end.items():
        where = end_name(bus, end)
        if end not in ends:
            if present:
                unwanted = kind != "none" and end not in required_ends_m(bus)
                reason = (
                    "the driver's low output impedance ends the line there"
                    if unwanted
                    else "the line may stay unterminated"
                )
                changes.append(_removal(present, where, reason))
            continue
        same_loads = math.isclose(lumped_load_ohm(bus, end), lumped_load_ohm(original, end), rel_tol=1e-9)
        if kind == "plan" and len(present) == 1 and same_loads and _holds_at_end(bus, present[0]):
            continue
        r = terminator_value_ohm(bus, end)
        want_rc = kind == "rc" or (kind == "plan" and any(t.kind == "rc" for t in present))
        new = (
            _rc_spec(bus, end, r, next((t.capacitance_f for t in present if t.kind == "rc"), None)) if want_rc else None
        )
        if new is None:
            if kind == "rc":
                return None
            new = TerminationSpec(position_m=end, kind="parallel", resistance_ohm=r)
        if len(present) == 1 and present[0] == new:
            continue
        changes.append(_replacement(present, new, where))
    for t in loose:
        changes.append(
            _removal([t], length_text(t.position_m), "a terminator away from the cable ends only loads the driver")
        )
    return tuple(changes)


def _removal(present: list[TerminationSpec], where: str, reason: str) -> PlanChange:
    listed = " and ".join(_term_text(t) for t in present)
    return PlanChange(
        "terminator",
        where,
        tuple(present),
        (),
        listed,
        "none",
        f"remove the {listed} terminator{'s' if len(present) > 1 else ''} at {where}",
        reason,
    )


def _replacement(present: list[TerminationSpec], new: TerminationSpec, where: str) -> PlanChange:
    after = _term_text(new)
    if not present:
        text = f"fit a {after} {'RC ' if new.kind == 'rc' else ''}terminator at {where}"
        why = "the line needs a terminator there: three round trips outlast half a bit"
    elif len(present) > 1:
        text = f"keep one {after} terminator at {where} instead of the plan's {len(present)}"
        why = "more than one terminator at an end loads it below the cable's impedance"
    elif present[0].kind != new.kind:
        old = present[0]
        text = (
            f"replace the RC terminator at {where} ({_term_text(old)}) with a plain {_ohm(new.resistance_ohm)} resistor"
            if old.kind == "rc"
            else f"replace the {_term_text(old)} terminator at {where} with an RC terminator ({after})"
        )
        why = (
            "no capacitor suits both the round trip and the bit, or the bias needs the terminator's DC path"
            if old.kind == "rc"
            else "with RC terminators the bias network sees only the receivers, so a weak one holds the idle bus"
        )
    else:
        text = f"change the terminator at {where} from {_term_text(present[0])} to {after}"
        why = "so the end matches the cable with what else is lumped there (R_T || R_P = Z0)" + (
            ", its capacitor inside the window the round trip and the bit leave" if new.kind == "rc" else ""
        )
    before = " and ".join(_term_text(t) for t in present) or "none"
    return PlanChange("terminator", where, tuple(present), (new,), before, after, text, why)


_BIAS_WHY = (
    "the weakest standard pair that idles every receiver that needs bias at its threshold or more at the worst "
    "corner of the tolerances, sized with the terminators"
)


def _network_text(bus: Bus, b: BiasSpec) -> str:
    return bias_text(b.pull_up_ohm, b.pull_down_ohm, network_supply_v(bus, b), b.position_m)


def _bias_changes(bus: Bus, networks: tuple[BiasSpec, ...]) -> list[PlanChange]:
    """The bias networks of the plan turned into a design's: networks at the same place changed in place, one
    network moved when one replaces one, the rest added or removed."""
    old = list(bus.plan.bias)
    if tuple(old) == networks:
        return []
    if len(old) == 1 and len(networks) == 1 and old[0].position_m != networks[0].position_m:
        a, b = old[0], networks[0]
        text = (
            f"move the bias network from {length_text(a.position_m)} to {length_text(b.position_m)} and make it "
            f"{_ohm(b.pull_up_ohm)} / {_ohm(b.pull_down_ohm)}"
        )
        return [
            PlanChange(
                "bias", "bias network", (a,), (b,), _network_text(bus, a), _network_text(bus, b), text, _BIAS_WHY
            )
        ]
    changes = []
    unmatched = list(old)
    for b in networks:
        same = next((a for a in unmatched if a.position_m == b.position_m), None)
        if same is not None:
            unmatched.remove(same)
            if same == b:
                continue
            text = (
                f"change the bias resistors at {length_text(b.position_m)} from {_ohm(same.pull_up_ohm)} / "
                f"{_ohm(same.pull_down_ohm)} to {_ohm(b.pull_up_ohm)} / {_ohm(b.pull_down_ohm)}"
            )
            if len(old) == 1:
                text = text.replace(f" at {length_text(b.position_m)}", "")
            changes.append(
                PlanChange(
                    "bias",
                    "bias network",
                    (same,),
                    (b,),
                    _network_text(bus, same),
                    _network_text(bus, b),
                    text,
                    _BIAS_WHY,
                )
            )
        else:
            after = _network_text(bus, b)
            changes.append(
                PlanChange("bias", "bias network", (), (b,), "none", after, f"add failsafe bias: {after}", _BIAS_WHY)
            )
    for a in unmatched:
        why = (
            "every receiver's failsafe covers the undriven bus, so no bias is needed"
            if not networks and size_bias(without_bias(bus), a.position_m).needed is False
            else "no bias network fits this bus: see bias.idle_level"
            if not networks
            else "the advised bias network takes its place"
        )
        where = f" at {length_text(a.position_m)}" if len(old) > 1 else ""
        changes.append(
            PlanChange(
                "bias", "bias network", (a,), (), _network_text(bus, a), "none", f"remove the bias network{where}", why
            )
        )
    return changes


@dataclass(frozen=True, slots=True)
class Design:
    """A candidate: its changes, the plan they make, and that plan's design-rule findings."""

    changes: tuple[PlanChange, ...]
    plan: BusPlan
    findings: tuple[Finding, ...]
    bias_ohm: float  # the design's bias networks as one equivalent across the pair; 0 for none
    order: int  # preference of the bias position (the plan's first)
    moved: bool  # a bias network leaves the place the plan gives it
    kind: str  # the terminator kind: "plan", "parallel", "rc" or "none"

    @property
    def breaks(self) -> int:
        return sum(f.verdict is Verdict.BREAKS for f in self.findings)

    def key(self) -> tuple[int, int, int, int, int, int, float]:
        """Fewest breaks; among those, fewest in the loading rules (an idle level failsafe receivers can rescue,
        a loading limit they cannot); then fewest tight; then the bias left where the plan has it (changing
        resistor values is easier on site than moving a network to another device); fewest changes; the bias
        where the plan has it, else at the driver, where its supply is; the weakest bias."""
        load = sum(f.verdict is Verdict.BREAKS for f in self.findings if f.rule_id.startswith("load."))
        tight = sum(f.verdict is Verdict.TIGHT for f in self.findings)
        return (self.breaks, load, tight, int(self.moved), len(self.changes), self.order, -self.bias_ohm)


def _design(bus: Bus, kind: str, networks: tuple[BiasSpec, ...], order: int) -> Design | None:
    plan = bus.plan
    biased = with_plan(bus, plan.model_copy(update={"bias": list(networks)}))
    terminators = _terminator_changes(biased, kind, bus)
    if terminators is None:
        return None
    changes = tuple(terminators + _bias_changes(bus, networks))
    advised = apply_changes(plan, changes)
    findings = run_design_rules(with_plan(bus, advised))
    equivalent = parallel_ohm(*[b.pull_up_ohm + b.pull_down_ohm for b in networks]) if networks else 0.0
    moved = bool(plan.bias) and bool(networks) and _places(networks) != _places(tuple(plan.bias))
    return Design(changes, advised, findings, equivalent, order, moved, kind)


def _places(networks: tuple[BiasSpec, ...]) -> list[float]:
    return sorted(b.position_m for b in networks)


def _bias_value_ohm(sizing: BiasSizing, tier: int) -> float:
    """Tier 0: the weakest E24 part that holds at the worst corner; 1: the weakest E24 part that holds with
    nominal parts; 2: the weakest E96 (1 %) part that does. 0 when there is none (or none is needed). A bus that
    holds with a weaker part than a plan may name gets the weakest it may."""
    limit = sizing.corner_max_ohm if tier == 0 else sizing.nominal_max_ohm
    if limit <= 0.0 or not sizing.needed:
        return 0.0
    return preferred_at_or_below(min(limit, MAX_BIAS_OHM), E96 if tier == 2 else E24)


def _sized_networks(bus: Bus, kind: str, positions: tuple[float, ...], tier: int) -> tuple[BiasSpec, ...] | None:
    """Equal bias networks at the positions, sized jointly with the terminators of a design kind: alternate
    terminator correction and bias sizing until the values agree. None when no bias is needed or none fits."""
    plan = bus.plan
    supply = plan.bias[0].supply_v if plan.bias else None
    supply_v = supply if supply is not None else plan.supply_v
    networks: tuple[BiasSpec, ...] = ()
    for _ in range(_SIZING_ROUNDS):
        biased = with_plan(bus, plan.model_copy(update={"bias": list(networks)}))
        terminators = _terminator_changes(biased, kind, bus)
        if terminators is None:
            return None
        unbiased = with_plan(bus, apply_changes(plan, terminators).model_copy(update={"bias": []}))
        sizing = (
            size_bias(unbiased, positions[0], supply_v)
            if len(positions) == 1
            else size_bias_networks(unbiased, positions, supply_v)
        )
        r = _bias_value_ohm(sizing, tier)
        if r <= 0.0 or (tier > 0 and r < len(positions) * bias_min_ohm(unbiased)):
            return None  # the nominal tiers only serve when they fit the room; below it the load rules break
        new = tuple(BiasSpec(position_m=p, pull_up_ohm=r, pull_down_ohm=r, supply_v=supply) for p in positions)
        if new == networks:
            break
        networks = new
    return networks or None


def bias_positions(plan: BusPlan) -> list[float]:
    """Where a bias network may go, most preferred first: where the plan has its networks, at the driver, then at
    the device nearest each cable end and nearest the middle. A bias network needs a device's supply, so every
    place is a device's place."""
    places = [b.position_m for b in plan.bias]
    devices = [plan.driver.position_m] + [n.position_m for n in plan.nodes]
    places.append(plan.driver.position_m)
    for target in (0.0, plan.trunk_length_m, 0.5 * plan.trunk_length_m):
        places.append(min(devices, key=lambda p: abs(p - target)))
    return list(dict.fromkeys(places))


def best_design(bus: Bus, skip: frozenset[str] = frozenset()) -> Design | None:
    """The design the advice takes (see the module docstring for the order of preference); `skip` leaves out
    terminator kinds whose design proved worse once simulated. None when every kind is skipped."""
    plan = bus.plan
    wants_bias = plan.standard == "rs485" or bool(plan.bias)
    kinds = ["plan", "parallel", "rc"] + (["none"] if line_may_stay_unterminated(bus) else [])
    kinds = [k for k in kinds if k not in skip]
    has_rc = any(t.kind == "rc" for t in plan.terminations)
    best: Design | None = None
    seen: set[tuple[str, tuple[BiasSpec, ...]]] = set()
    own = tuple(plan.bias)

    def consider(kind: str, networks: tuple[BiasSpec, ...], order: int) -> None:
        nonlocal best
        if (kind, networks) in seen:
            return
        seen.add((kind, networks))
        d = _design(bus, kind, networks, order)
        if d is not None and (best is None or d.key() < best.key()):
            best = d

    for kind in kinds:
        if best is not None and best.key()[:3] == (0, 0, 0):
            break
        if kind == "parallel" and not has_rc and "plan" not in skip:
            continue  # the "plan" kind already built parallel terminators
        if own or not wants_bias:
            consider(kind, own, 0)
        if not wants_bias:
            continue
        consider(kind, (), 99)
        for tier in range(3):
            if tier and best is not None and best.breaks == 0:
                break
            places: list[tuple[float, ...]] = [(p,) for p in bias_positions(plan)]
            if len(own) > 1:
                places.insert(0, tuple(b.position_m for b in own))  # the plan's networks, resized together
            for order, positions in enumerate(places, start=1):
                networks = _sized_networks(bus, kind, positions, tier)
                if networks is not None:
                    consider(kind, networks, order)
    return best
