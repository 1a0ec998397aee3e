"""Failsafe bias: whether every receiver reads the idle bus as a 1, with the plan's bias networks or without any.

With every driver off, a terminated pair sits at V_AB ~ 0 V. A receiver reads that as a 1 only if its high
threshold is below 0 V (an idle-bus failsafe receiver) or if bias lifts the pair to its high threshold; a plain
receiver (+/-200 mV, TIA/EIA-485-A) needs 200 mV. What each receiver's failsafe covers with no bias at all
(engine.devices.covers): on a bus with a parallel terminator the pair idles low-impedance at 0 V (the "idle"
state); on a bus without one (open or RC-terminated) a receiver's inputs float (the "open" state), which an
open/short failsafe also covers. The receivers their failsafe does not cover are the ones that need bias, and
the bias is sized for those alone.

A pull-up R_B from the bias supply V_S to A and a pull-down R_B from B to ground hold the idle bus at

    V_AB = V_S * R_eq / (2 R_B + R_eq),    R_eq = terminations || receiver inputs (RC terminators open at DC),

so the largest resistor that still gives V_min is R_B,max = (R_eq / 2) (V_S / V_min - 1).
The check solves the DC ladder of engine.dc with every bias network of the plan as a source (bias at both ends
is common), so the drop along the cable counts; the closed form is reported beside it for one network. On RS-485
the primary driver's own receiver listens while idle; on RS-422 the single driver stays enabled, so the line
idles only when the driver is disabled or unplugged.

Verdict (engine.rules.margins): BREAKS when a receiver that needs bias idles below its high threshold; TIGHT
when one would at the worst corner: bias supplies 5 % low, bias resistors 5 % high, terminators 5 % low, and the
run 10 % longer and 50 Celsius warm.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus, view_key, with_plan
from pairline.engine.dc import (
    bias_supply_v,
    bias_view,
    idle_levels_v,
    listener_devices,
    listener_elements,
    network_supply_v,
    receiver_loads_ohm,
)
from pairline.engine.devices import ResolvedDevice, covers
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import MAX_BIAS_OHM, MIN_BIAS_OHM, BiasSpec
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
IDLE_THRESHOLD_V = 0.200  # a plain receiver's high threshold, TIA/EIA-485-A
SOURCE = (
    "Idle-bus biasing: TI SLLA272 (The RS-485 Design Guide) and B&B Electronics RS-422/485 application note; "
    "receiver threshold +/-200 mV: TIA/EIA-485-A; what failsafe receivers cover (open, short, idle bus): Exar "
    "AN-207 and the TI E2E FAQ on fail-safe biasing; tight band from the tolerances of engine.rules.margins"
)
MAX_NAMED = 6  # receivers named one by one in a sentence; the rest counted


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


def unbiased_state(bus: Bus) -> str:
    """What the pair presents with no driver and no bias: "idle" (held at 0 V by a parallel terminator) or
    "open" (nothing but receiver inputs across it)."""
    return "idle" if any(t.kind == "parallel" for t in bus.plan.terminations) else "open"


@dataclass(frozen=True, slots=True)
class ListenerNeed:
    """One receiver listening while the bus idles, and whether its failsafe covers the bus without bias."""

    name: str
    device: ResolvedDevice
    covered: bool  # its failsafe reads the unbiased bus as a 1
    why: str  # why it needs bias; "" when covered


def listener_needs(bus: Bus) -> list[ListenerNeed]:
    """Every listener (engine.dc.listener_elements order) with what its failsafe covers on this bus unbiased."""
    state = unbiased_state(bus)
    return list(bus.memo.get(("listener_needs", bus.plan.standard, state), lambda: _listener_needs(bus, state)))


def _listener_needs(bus: Bus, state: str) -> tuple[ListenerNeed, ...]:
    out = []
    for element, device in zip(listener_elements(bus), listener_devices(bus), strict=True):
        covered = covers(device, state)
        why = ""
        if not covered:
            why = (
                f"thresholds of {device.threshold_low_v * 1e3:+.0f} .. {device.threshold_high_v * 1e3:+.0f} mV "
                "leave an undriven bus at 0 V undefined"
            )
            if device.failsafe == "open_short":
                why = "a failsafe for open or shorted inputs only, which the terminators across the pair defeat"
        out.append(ListenerNeed(element.name, device, covered, why))
    return tuple(out)


def names_text(names: "list[str] | tuple[str, ...]") -> str:
    """ "'a', 'b' and 'c'", at most MAX_NAMED named and the rest counted."""
    shown = [f"'{n}'" for n in names[:MAX_NAMED]]
    if len(names) > MAX_NAMED:
        return ", ".join(shown) + f" and {len(names) - MAX_NAMED} more"
    return shown[0] if len(shown) == 1 else ", ".join(shown[:-1]) + f" and {shown[-1]}"


def bias_position_m(bus: Bus) -> float:
    """Where the bias sits: the plan's first bias network, else beside the primary driver."""
    return bus.plan.bias[0].position_m if bus.plan.bias else bus.plan.driver.position_m


def idle_corner_bus(bus: Bus) -> Bus:
    """The bus at the corner that lowers the idle level (see the module docstring)."""
    return corner_bus(bus, terminators=-1, bias_resistors=1, bias_supply=-1, cable_resistance=1)


def without_bias(bus: Bus) -> Bus:
    return with_plan(bus, bus.plan.model_copy(update={"bias": []}))


@dataclass(frozen=True, slots=True)
class BiasSizing:
    """How weak a bias from one point may be: the largest equal pull-up / pull-down that idles every receiver that
    needs bias at its high threshold at the worst corner of the tolerances, and the largest that does so with
    nominal parts. needed False: every receiver's failsafe covers the bus, no bias is sized."""

    position_m: float
    supply_v: float
    corner_max_ohm: float  # 0 when no resistor reaches the thresholds at the corner
    nominal_max_ohm: float  # 0 when no resistor reaches them at all
    needed: bool = True

    def values_ohm(self, min_ohm: float) -> list[float]:
        """Values to try, best first: the weakest E24 (5 %) part that holds at the corner; then, when the room
        (min_ohm) leaves none, the weakest E24 and the weakest E96 (1 %) part that hold with nominal parts."""
        if not self.needed:
            return []
        out = [preferred_at_or_below(self.corner_max_ohm)] if self.corner_max_ohm > 0.0 else []
        if not out or out[0] < min_ohm:
            for series in (E24, E96):
                r = preferred_at_or_below(self.nominal_max_ohm, series) if self.nominal_max_ohm > 0.0 else 0.0
                if r >= min_ohm and r not in out:
                    out.append(r)
        return out


def _max_bias_from_view_ohm(
    r_in: float, ratios: np.ndarray, required_v: np.ndarray, supply_v: float, resistor_factor: float
) -> float:
    """Largest R_B with supply_v t_k R_in / (2 resistor_factor R_B + R_in) >= required_k for every listener k; 0 if
    some listener cannot reach its threshold through any resistor."""
    reach_v = supply_v * ratios
    if np.any(reach_v <= required_v):
        return 0.0
    return float(np.min(r_in / (2.0 * resistor_factor) * (reach_v / required_v - 1.0)))


def size_bias(bus: Bus, position_m: float, supply_v: float | None = None) -> BiasSizing:
    """How weak a bias at position_m may be, for the bus's own terminators and the receivers that need bias (the
    plan's bias networks left out).

    From the view of the idle bus (R_in, t_k; engine.dc.bias_view) a bias of V_S behind 2 R_B idles listener k
    at V_S t_k R_in / (2 R_B + R_in), so R_B <= R_in / 2 (V_S t_k / V_th,k - 1) over the listeners that need
    bias (V_th,k their high thresholds). At the corner the view is taken with terminators 5 % low on a warm,
    longer run, the supply 5 % low and the resistors 5 % high.
    """
    supply = bias_supply_v(bus) if supply_v is None else supply_v
    bare = without_bias(bus) if bus.plan.bias else bus
    # sized once per layout, terminators and place: the design search asks again as it iterates
    return bare.memo.get(
        ("size_bias", view_key(bare), position_m, supply), lambda: _size_bias(bare, position_m, supply)
    )


def _size_bias(bare: Bus, position_m: float, supply: float) -> BiasSizing:
    needs = listener_needs(bare)
    need = np.array([not n.covered for n in needs])
    if not need.any():
        return BiasSizing(position_m, supply, math.inf, math.inf, needed=False)
    required_v = np.array([n.device.threshold_high_v for n in needs])[need]
    r_in, ratios = bias_view(bare, position_m)
    nominal = _max_bias_from_view_ohm(r_in, ratios[need], required_v, supply, 1.0)
    r_in_c, ratios_c = bias_view(corner_bus(bare, terminators=-1, cable_resistance=1), position_m)
    corner = _max_bias_from_view_ohm(
        r_in_c, ratios_c[need], required_v, (1.0 - SUPPLY_TOLERANCE) * supply, 1.0 + RESISTOR_TOLERANCE
    )
    return BiasSizing(position_m, supply, corner, nominal)


_BISECTIONS = 40  # halves the log range 40 times: far finer than any preferred-series step


def size_bias_networks(bus: Bus, positions: tuple[float, ...], supply_v: float) -> BiasSizing:
    """size_bias for equal networks at several points at once (bias at both ends, say), found by bisection on
    R_B: every idle level falls as R_B rises. The corner is idle_corner_bus's."""
    bare = without_bias(bus) if bus.plan.bias else bus
    needs = listener_needs(bare)
    need = np.array([not n.covered for n in needs])
    if not need.any():
        return BiasSizing(positions[0], supply_v, math.inf, math.inf, needed=False)
    required_v = np.array([n.device.threshold_high_v for n in needs])[need]

    def holds(r_ohm: float, corner: bool) -> bool:
        networks = [
            BiasSpec(position_m=p, pull_up_ohm=r_ohm, pull_down_ohm=r_ohm, supply_v=supply_v) for p in positions
        ]
        biased = with_plan(bare, bare.plan.model_copy(update={"bias": networks}))
        _, levels_v = idle_levels_v(idle_corner_bus(biased) if corner else biased)
        return bool(np.all(levels_v[need] >= required_v))

    def largest(corner: bool) -> float:
        lo, hi = MIN_BIAS_OHM, MAX_BIAS_OHM
        if not holds(lo, corner):
            return 0.0
        if holds(hi, corner):
            return hi
        for _ in range(_BISECTIONS):
            mid = math.sqrt(lo * hi)
            lo, hi = (mid, hi) if holds(mid, corner) else (lo, mid)
        return lo

    return BiasSizing(positions[0], supply_v, largest(True), largest(False))


def bias_min_ohm(bus: Bus) -> float:
    """Smallest equal pull-up / pull-down one more bias network has room for beside the plan's (RS-485; 0 on
    RS-422).

    Unit loads: a bias network is rated like a load (engine.rules.loads.bias_unit_loads, which scales as 1 / R),
    and nodes + driver's receiver + bias must stay within 32 UL (TIA-485-A). Driver load:
    terminators || receivers || bias networks || 2 R_B must stay at or above the fully loaded bus (51.7 Ohm;
    TIA-485-A, TI SLLA628).
    """
    if bus.plan.standard != "rs485":
        return 0.0
    parts = unit_load_parts(bus)
    headroom_ul = RS485_UNIT_LOAD_BUDGET - parts["nodes"] - parts["driver"] - parts["bias"]
    r_ul = bias_unit_loads(1.0, 1.0) / headroom_ul if headroom_ul > 0 else math.inf
    rest_ohm = parallel_ohm(
        *[t.resistance_ohm for t in bus.plan.terminations],
        *receiver_loads_ohm(bus),
        *[b.pull_up_ohm + b.pull_down_ohm for b in bus.plan.bias],
    )
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


def failsafe_step(needing: list[ListenerNeed], total: int) -> str:
    """The alternative to bias: failsafe receivers where they are missing."""
    if len(needing) == total:
        return "use idle-bus failsafe receivers on every node"
    return f"use idle-bus failsafe receivers at {names_text([n.name for n in needing])}"


def _standalone_fix(bus: Bus, needing: list[ListenerNeed], total: int) -> str:
    """What to fit for the plan's own terminators: the weakest E24 pair that holds at the worst corner from the
    plan's bias point or the middle of the trunk, within the unit-load and driver-load room, sized for the
    receivers that need bias."""
    plan = bus.plan
    bare = without_bias(bus)
    r_min = bias_min_ohm(bare)
    supply_v = bias_supply_v(bus)
    sizings = [size_bias(bare, p, supply_v) for p in dict.fromkeys((bias_position_m(bus), 0.5 * plan.trunk_length_m))]
    fitting = [(s, r) for s in sizings for r in s.values_ohm(r_min)[:1] if r >= r_min]
    failsafe = failsafe_step(needing, total)
    if fitting:
        s, r = fitting[0]
        return f"fit {bias_text(r, r, supply_v, s.position_m)}, or {failsafe}"
    best = max(sizings, key=lambda s: s.nominal_max_ohm)
    room = (
        "the nodes already take the whole 32 UL budget"
        if math.isinf(r_min)
        else f"the 32 UL budget and the driver-load limit need at least {r_min:.0f} Ω"
    )
    steps = [failsafe]
    if any(t.kind == "parallel" for t in plan.terminations):
        steps.append("fit RC terminators at the cable ends so the bias sees only the receivers")
    steps.append("split the bus with a repeater")
    return (
        f"no pull-up / pull-down pair fits this bus: the receivers that need bias reach their thresholds with at "
        f"most {best.nominal_max_ohm:.0f} Ω each, while {room}. {_capital(either(steps))}"
    )


def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


def _needs_text(needs: list[ListenerNeed]) -> str:
    """Which receivers need bias and why, and which are covered by their failsafe."""
    needing = [n for n in needs if not n.covered]
    covered = [n for n in needs if n.covered]
    parts = []
    for why in dict.fromkeys(n.why for n in needing):
        named = [n.name for n in needing if n.why == why]
        parts.append(f"{names_text(named)} need{'s' if len(named) == 1 else ''} bias: {why}")
    if covered:
        kinds = sorted({n.device.failsafe_text for n in covered})
        parts.append(
            f"{len(covered)} receiver{'s' if len(covered) != 1 else ''} read{'s' if len(covered) == 1 else ''} the "
            f"undriven bus as a 1 without bias ({'; '.join(kinds)})"
        )
    return ". ".join(p[:1].upper() + p[1:] for p in parts) + "."


def check_failsafe_bias(bus: Bus, *, with_fix: bool = True) -> list[Finding]:
    """Idle-bus level with the plan's bias networks (or none) vs each receiver's high threshold; one whole-bus
    finding. with_fix=False leaves the fix sentence out (its sizing is the costly part), for callers that only
    weigh verdicts."""
    plan = bus.plan
    needs = listener_needs(bus)
    needing = [n for n in needs if not n.covered]
    criterion = (
        "every receiver reads the undriven bus as a 1: its failsafe covers the bus as built (idle-bus failsafe; "
        "open/short failsafe on a line with no parallel terminator), or the bias networks hold V_AB = V_S R_eq / "
        "(2 R_B + R_eq) at or above its high threshold (200 mV for a plain receiver), solved along the cable; "
        "tight when the worst corner (supply 5 % low, bias resistors 5 % high, terminators 5 % low, the run 10 % "
        "longer and 50 °C warm) falls below it"
    )
    rs422_note = (
        " On RS-422 the single driver normally stays enabled, so this matters only if the driver is disabled, "
        "powered down or unplugged."
        if plan.standard == "rs422"
        else ""
    )
    thresholds = np.array([n.device.threshold_high_v for n in needs])
    if not plan.bias:
        rs422 = plan.standard == "rs422"
        covered = not needing
        verdict = Verdict.HOLDS if rs422 or covered else Verdict.BREAKS
        binding = max(needing or needs, key=lambda n: n.device.threshold_high_v)
        if rs422:
            title = "No bias network, none needed: the single RS-422 driver stays enabled"
        elif covered:
            title = "No bias network, none needed: every receiver's failsafe covers the undriven bus"
        else:
            title = "Idle-bus level with no bias network"
        return [
            Finding(
                RULE_ID,
                title,
                verdict,
                None if rs422 else 0.0,
                None if rs422 else binding.device.threshold_high_v,
                "" if rs422 else "V",
                None,
                criterion,
                SOURCE,
                fix=""
                if verdict is Verdict.HOLDS or not with_fix
                else f"Add failsafe bias for the receivers that need it: {_standalone_fix(bus, needing, len(needs))}.",
                detail="With every driver off the pair idles at 0 V. " + _needs_text(needs) + rs422_note,
                limit_kind="none" if rs422 else "min",
                figures=(("receivers_needing_bias", float(len(needing))),),
            )
        ]
    names, levels_v = idle_levels_v(bus)
    _, corner_v = idle_levels_v(idle_corner_bus(bus))
    # A receiver its failsafe covers unbiased stays covered: bias only lifts the pair further towards a 1.
    covered_mask = np.array([n.covered for n in needs])
    ok = covered_mask | (levels_v >= thresholds)
    ok_corner = covered_mask | (corner_v >= thresholds)
    verdict = band_verdict(bool(ok.all()), bool(ok_corner.all()))
    candidates = np.flatnonzero(~covered_mask)
    if candidates.size == 0:
        candidates = np.arange(len(needs))
    k = int(candidates[np.argmin(levels_v[candidates] - thresholds[candidates])])
    v_worst = float(levels_v[k])
    k_corner = int(candidates[np.argmin(corner_v[candidates] - thresholds[candidates])])
    v_corner = float(corner_v[k_corner])
    detail = _networks_text(bus) + (
        f" Lowest against its threshold: {v_worst:.3f} V at '{names[k]}' (threshold "
        f"{thresholds[k] * 1e3:+.0f} mV), {v_corner:.3f} V at '{names[k_corner]}' at the worst corner. "
    )
    detail += _needs_text(needs) + rs422_note
    failing = [needs[i] for i in np.flatnonzero(~ok_corner)]
    return [
        Finding(
            RULE_ID,
            "Idle-bus level with the plan's bias (the receiver nearest its threshold)",
            verdict,
            v_worst,
            float(thresholds[k]),
            "V",
            None,
            criterion,
            SOURCE,
            fix=""
            if verdict is Verdict.HOLDS or not with_fix
            else f"Change the bias: {_standalone_fix(bus, failing or needing, len(needs))}.",
            detail=detail,
            limit_kind="min",
            figures=(("corner_v", v_corner), ("receivers_needing_bias", float(len(needing)))),
        )
    ]


def _networks_text(bus: Bus) -> str:
    """The plan's bias networks with their currents; the lumped formula for a plan with one."""
    plan = bus.plan
    r_eq = idle_load_ohm(bus)
    if len(plan.bias) == 1:
        b = plan.bias[0]
        supply_v = network_supply_v(bus, b)
        v_lumped = idle_voltage_v(supply_v, b.pull_up_ohm, b.pull_down_ohm, r_eq)
        current_a = supply_v / (b.pull_up_ohm + b.pull_down_ohm + r_eq) if math.isfinite(r_eq) else 0.0
        return (
            f"Lumped formula: {v_lumped:.3f} V with R_eq {si_format(r_eq, 'Ω')} and {b.pull_up_ohm:g} / "
            f"{b.pull_down_ohm:g} Ω from {supply_v:g} V ({current_a * 1e3:.2f} mA)."
        )
    listed = "; ".join(
        f"{b.pull_up_ohm:g} / {b.pull_down_ohm:g} Ω from {network_supply_v(bus, b):g} V at {length_text(b.position_m)}"
        for b in plan.bias
    )
    return f"{len(plan.bias)} bias networks ({listed}), solved together along the cable."
