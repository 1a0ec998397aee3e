"""Common mode at every node: the ground offset it sees, the talker's common-mode output and noise against the
node's common-mode range; what the signal-ground conductor carries; how the shield is earthed.

A receiver sees each bus wire relative to its interface ground. A talker holds the pair around its common-mode
output V_OC (about half its supply) relative to its own interface ground; if the listener's interface ground
sits V_gnd above the talker's, the pair appears at V_OC - V_gnd, and induced noise moves it a further
+/- V_noise. The listener must see

    V_min <= V_OC - V_gnd - V_noise   and   V_OC - V_gnd + V_noise <= V_max

with (V_min, V_max) its device's common-mode range (-7 V, +12 V for an RS-485 part, TIA/EIA-485-A; +/-7 V for
RS-422, TIA/EIA-422-B). With V_OC = 2.5 V and V_noise = 2.5 V this is the published budget 2.5 + 7 + 2.5 = 12 V
/ 2.5 - 7 - 2.5 = -7 V: a ground offset of up to 7 V either way. Where each interface ground sits (its earth, the
signal-ground conductor, or floating with the bus when it is isolated) is engine.grounding's. Every node that
may drive is checked against every node that listens.

Where an offset breaks, the fix names the boundary: the nodes on another earth than most of the bus (grouped by
engine.grounding.earth_groups) are the ones to isolate, not every node. The cautions follow the size: tens of
volts between earths is itself a fault to find before isolating anything (common practice: between outlets of
one installation a few volts is usual); above 30 Vrms the difference is hazardous and the isolation named is
reinforced, or fibre (TI blog "Our isolators are certified"; D. Lohbeck, EDN 2016); above the 50 V
extra-low-voltage limit the DANGER sentence comes first: stop.

Verdict: BREAKS when the budget leaves the range; TIGHT when it would with the talker's common-mode output moved
by its supply's 5 % (V_OC is about half the supply; engine.rules.margins): the noise allowance is already the
margin the published budget keeps.
"""

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.grounding import GroundState, earth_groups, ground_state, home_group
from pairline.engine.rules.margins import SUPPLY_TOLERANCE, band_verdict
from pairline.engine.units import length_text

RULE_ID = "common_mode.range"
NOISE_ALLOWANCE_V = 2.5  # induced noise on the pair, as in the Intersil high-speed RS-485 tutorial's budget
EXTENDED_COMMON_MODE_V = 25.0  # extended common-mode transceivers cover tens of volts (from memory)
FAULT_OFFSET_V = 20.0  # tens of volts between earths: a fault to investigate first (common practice)
HAZARDOUS_V = 30.0  # above 30 Vrms a circuit is hazardous and insulation must be reinforced (EDN, Lohbeck 2016)
ELV_LIMIT_V = 50.0  # extra-low-voltage band, IEC 61140 / IEC 60449 (50 V a.c.); common practice as a danger line
SERIES_GROUND_OHM = 100.0  # series resistor in the signal-ground wire at each node (TI SLLA272)
RANGES_V: dict[str, tuple[float, float]] = {"rs485": (-7.0, 12.0), "rs422": (-7.0, 7.0)}
SOURCE = (
    "Common-mode range -7..+12 V: TIA/EIA-485-A; +/-7 V: TIA/EIA-422-B (or the device's own range); budget V_OC "
    "2.5 V + offset 7 V + noise 2.5 V: Intersil tutorial 'High-Speed RS-485 Transceiver and Applications'; "
    "grounding and isolation: TI SLLA272 (The RS-485 Design Guide) and B&B Electronics RS-422/485 application note"
)
CAUTION = (
    "A bare ground wire between buildings or distant supplies carries ground-loop current; outdoor and "
    "inter-building runs also take lightning surges (tested with the IEC 61000-4-5 1.2/50 us wave): fit surge "
    "protection where the cable leaves a building, earth a shield at one point only, and have the earthing "
    "and mains side designed and inspected to your local electrical codes by licensed practice."
)
_CODES = (
    "Fit surge protection where the cable leaves a building and have the earthing designed to your local "
    "electrical codes and licensed practice."
)


def common_mode_extremes_v(driver_common_mode_v: float, ground_offset_v: float, noise_v: float) -> tuple[float, float]:
    """(lowest, highest) common-mode voltage at a receiver whose ground is ground_offset_v above the driver's."""
    centre_v = driver_common_mode_v - ground_offset_v
    return centre_v - noise_v, centre_v + noise_v


def allowed_offset_v(
    standard: str, driver_common_mode_v: float, noise_v: float = NOISE_ALLOWANCE_V
) -> tuple[float, float]:
    """(most negative, most positive) receiver ground offset that keeps the budget inside the standard's range."""
    return allowed_offset_in_range_v(RANGES_V[standard], driver_common_mode_v, noise_v)


def allowed_offset_in_range_v(
    range_v: tuple[float, float], driver_common_mode_v: float, noise_v: float = NOISE_ALLOWANCE_V
) -> tuple[float, float]:
    """(most negative, most positive) ground offset that keeps V_OC -/+ noise inside a receiver's range."""
    v_min, v_max = range_v
    return -(v_max - driver_common_mode_v - noise_v), driver_common_mode_v - noise_v - v_min


def check_common_mode(bus: Bus) -> list[Finding]:
    """One finding per node: its worst offset against any talker (the ground conductor's current and the shield:
    engine.rules.ground_wiring)."""
    state = ground_state(bus)
    plan = bus.plan
    talkers = [state.names.index(name) for name in bus.drivers_possible]
    offsets = state.offsets_v(talkers)  # (n_talkers, n)
    v_oc = np.array([bus.devices[state.names[t]].output_common_mode_v for t in talkers])
    findings = []
    for i, node in enumerate(plan.nodes, start=1):
        device = bus.devices[node.name]
        range_v = (device.common_mode_min_v, device.common_mode_max_v)
        best: tuple[float, int] | None = None
        for k, t in enumerate(talkers):
            if t == i:
                continue
            used = _fraction_used(float(offsets[k, i]), *allowed_offset_in_range_v(range_v, float(v_oc[k])))
            if best is None or used > best[0]:
                best = (used, k)
        k = best[1] if best is not None else 0
        offset_v = float(offsets[k, i]) if best is not None else 0.0
        oc = float(v_oc[k])
        lo_allowed, hi_allowed = allowed_offset_in_range_v(range_v, oc)
        limit_v = hi_allowed if offset_v >= 0 else lo_allowed
        low_v, high_v = common_mode_extremes_v(oc, offset_v, NOISE_ALLOWANCE_V)
        corner_low_v, _ = common_mode_extremes_v(oc * (1 - SUPPLY_TOLERANCE), offset_v, NOISE_ALLOWANCE_V)
        _, corner_high_v = common_mode_extremes_v(oc * (1 + SUPPLY_TOLERANCE), offset_v, NOISE_ALLOWANCE_V)
        v_min, v_max = range_v
        verdict = band_verdict(v_min <= low_v and high_v <= v_max, v_min <= corner_low_v and corner_high_v <= v_max)
        against = state.names[talkers[k]]
        barrier = _barrier_finding(bus, state, i, talkers)
        earth_v = float(state.earth_v[i])
        where = _where_text(state, i)
        fix = _fix(bus, state, verdict, i, talkers[k], offset_v, limit_v)
        if barrier is not None and barrier[0] is Verdict.BREAKS:
            verdict, fix = Verdict.BREAKS, barrier[1] + (" " + fix if fix else "")
        findings.append(
            Finding(
                RULE_ID,
                "Ground offset against the common-mode range",
                verdict,
                abs(offset_v),
                abs(limit_v),
                "V",
                node.name,
                f"V_OC {oc:g} V - ground offset +/- {NOISE_ALLOWANCE_V:g} V noise within the receiver's "
                f"{v_min:+g} .. {v_max:+g} V; tight when V_OC 5 % off (its supply) would leave the range",
                SOURCE,
                fix=fix,
                detail=(
                    f"{where} Ground {offset_v:+g} V relative to '{against}': the wires sit between {low_v:+.1f} and "
                    f"{high_v:+.1f} V at this receiver (allowed {v_min:+g} .. {v_max:+g} V). "
                    + danger_text(max(abs(offset_v), abs(earth_v)))
                    + fault_text(max(abs(offset_v), abs(earth_v)))
                    + (CAUTION if offset_v != 0 or earth_v != 0 else "")
                ).strip(),
            )
        )
    return findings


def _where_text(state: GroundState, i: int) -> str:
    """Where the node's interface ground sits, in a sentence."""
    if not state.isolated[i]:
        return f"Interface on its local earth ({state.earth_v[i]:+g} V)."
    if np.isnan(state.reference_v[i]):
        return "Isolated interface with no signal-ground conductor: it floats with the bus."
    return f"Isolated interface on the signal-ground conductor ({state.reference_v[i]:+.2f} V at its tap)."


def _fraction_used(offset_v: float, lo_allowed_v: float, hi_allowed_v: float) -> float:
    """How much of the allowed offset (in its direction) is used; inf when that direction allows none."""
    if offset_v == 0.0:
        return 0.0
    limit_v = hi_allowed_v if offset_v > 0 else lo_allowed_v
    return offset_v / limit_v if limit_v * offset_v > 0 else float("inf")


def isolation_advice(offset_v: float) -> str:
    """Isolation to name for a difference between earths: a rating class, or fibre where the classes run out.

    Up to 30 Vrms the difference is not hazardous and basic isolation (a 2.5 kVrms UL 1577 class, ADI FAQ
    'What is isolation rating?') is the common practice for a data bus; above it the barrier stands between a
    hazardous voltage and the circuits people touch, which asks for reinforced insulation (TI blog 'Our
    isolators are certified'; D. Lohbeck, EDN 2016): a reinforced part (IEC 60747-17, a 5 kVrms class) whose
    working voltage covers the difference. Past about 1 kV Pairline names fibre (from memory: beyond what the
    usual transceiver working voltages are meant to stand).
    """
    offset = abs(offset_v)
    if offset <= EXTENDED_COMMON_MODE_V:
        return (
            "isolated transceivers with isolated supplies (basic isolation, a 2.5 kVrms class), or transceivers with "
            "an extended common-mode range that covers the offset"
        )
    if offset <= HAZARDOUS_V:
        return "isolated transceivers with isolated supplies (basic isolation, a 2.5 kVrms class)"
    if offset <= 1000.0:
        return (
            "reinforced isolation: isolated transceivers and supplies certified reinforced (IEC 60747-17, a 5 kVrms "
            "class) with a working voltage above the offset, or a fibre-optic link"
        )
    return (
        "a fibre-optic link in place of the copper pair: the offset is beyond what the usual transceiver isolation "
        "classes (2.5 kVrms basic, 5 kVrms reinforced) are meant to stand continuously"
    )


def danger_text(offset_v: float) -> str:
    """The danger sentence for an offset above the extra-low-voltage limit; empty below it."""
    if abs(offset_v) <= ELV_LIMIT_V:
        return ""
    return (
        f"DANGER: a {abs(offset_v):g} V difference between grounds is above the {ELV_LIMIT_V:g} V extra-low-voltage "
        "limit: stop. It is a shock hazard or a fault (a broken or missing protective earth, a miswired supply); "
        "have a licensed electrician find and clear it before connecting any cable. "
    )


def fault_text(offset_v: float) -> str:
    """For tens of volts between earths: investigate before choosing isolation; empty below."""
    if abs(offset_v) < FAULT_OFFSET_V:
        return ""
    return (
        f"A {abs(offset_v):g} V difference between earths is itself a fault to investigate (an earthing or wiring "
        "fault, or a site on another supply) before any isolation is chosen. "
    )


def _barrier_finding(bus: Bus, state: GroundState, i: int, talkers: list[int]) -> tuple[Verdict, str] | None:
    """An isolated node's own barrier: the difference between its earth and its interface ground. Above 30 Vrms
    a basic barrier breaks (reinforced is required)."""
    if not state.isolated[i]:
        return None
    device = bus.devices[state.names[i]]
    if np.isnan(state.reference_v[i]):
        across_v = max(abs(state.earth_v[i] - state.talker_reference_v(t)) for t in talkers if t != i)
    else:
        across_v = abs(state.earth_v[i] - state.reference_v[i])
    if across_v <= HAZARDOUS_V or device.isolation_grade == "reinforced":
        return None
    return (
        Verdict.BREAKS,
        f"'{state.names[i]}' is isolated with {device.isolation_grade} insulation across a {across_v:.0f} V difference "
        f"between earths: above {HAZARDOUS_V:g} Vrms use {isolation_advice(across_v)}.",
    )


def _fix(bus: Bus, state: GroundState, verdict: Verdict, i: int, t: int, offset_v: float, limit_v: float) -> str:
    name = state.names[i]
    if verdict is Verdict.HOLDS:
        return ""
    if verdict is Verdict.TIGHT:
        return (
            f"The {abs(offset_v):g} V ground offset uses {abs(offset_v) / abs(limit_v):.0%} of the "
            f"{abs(limit_v):g} V allowed, leaving little room for noise: isolate '{name}' (an isolated transceiver, "
            f"or a supply not tied to earth) and run a signal-ground conductor beside the pair with a "
            f"{SERIES_GROUND_OHM:g} Ω resistor in series at each node, so its interface takes the bus's ground; or "
            f"use transceivers with an extended common-mode range. {_CODES}"
        )
    size = max(abs(offset_v), abs(float(state.earth_v[i])))
    return danger_text(size) + fault_text(size) + _boundary_text(bus, state, i, t, offset_v, limit_v) + " " + _CODES


def _boundary_text(bus: Bus, state: GroundState, i: int, t: int, offset_v: float, limit_v: float) -> str:
    """Where the isolation belongs: the nodes on another earth than most of the bus, named, with the stretch of
    trunk they occupy when they sit together."""
    groups = earth_groups(state)
    home = home_group(groups)
    name = state.names[i]
    advice = isolation_advice(offset_v)
    why = f"so the {abs(offset_v):g} V offset no longer reaches the receivers, which allow {abs(limit_v):g} V"
    if state.isolated[i] and state.isolated[t]:
        return (
            f"'{name}' and '{state.names[t]}' are isolated yet still {abs(offset_v):g} V apart: join their interface "
            f"grounds with a signal-ground conductor ({why})."
        )
    other = [g for g in groups if g is not home and (i in g or t in g)]
    if not other:
        return f"Isolate '{name}' galvanically with {advice}, {why}."
    members = sorted({m for g in other for m in g}, key=lambda m: state.position_m[m])
    names = [state.names[m] for m in members]
    shown = ", ".join(f"'{n}'" for n in names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")
    earth = ", ".join(f"{state.earth_v[g[0]]:+g} V" for g in other)
    stretch = _stretch_text(state, members, home, bus.plan.display_units)
    driver_side = " (the driver's own node among them)" if 0 in members else ""
    kept = len(home)
    return (
        f"Isolate at the boundary between earths: the {len(members)} node{'s' if len(members) != 1 else ''} on the "
        f"other earth ({earth} from the driver's){driver_side}, {shown}{stretch}: isolate them galvanically with "
        f"{advice}, {why}; the {kept} on the shared earth need none."
    )


def _stretch_text(state: GroundState, members: list[int], home: list[int], units: str) -> str:
    """ " (the stretch from 480 m to 600 m)" when no node of the shared earth sits among them; else ""."""
    lo, hi = state.position_m[members[0]], state.position_m[members[-1]]
    if any(lo <= state.position_m[h] <= hi for h in home):
        return ""
    return f" (the stretch from {length_text(lo, units)} to {length_text(hi, units)})"
