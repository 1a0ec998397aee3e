"""Common-mode range at every node: ground offset + driver common-mode output + noise vs the standard's range.

A receiver sees each bus wire relative to its own ground. The driver holds the pair around its common-mode
output V_OC (about half its supply) relative to the driver's ground; if the receiving node's ground sits
V_gnd above the driver's, the pair appears at V_OC - V_gnd, and induced noise moves it a further +/- V_noise.
The receiver must see

    V_min <= V_OC - V_gnd - V_noise   and   V_OC - V_gnd + V_noise <= V_max

with (V_min, V_max) = (-7 V, +12 V) for RS-485 (TIA/EIA-485-A) and (-7 V, +7 V) for RS-422 (TIA/EIA-422-B).
With V_OC = 2.5 V and V_noise = 2.5 V this is the published budget 2.5 + 7 + 2.5 = 12 V / 2.5 - 7 - 2.5 = -7 V:
a ground offset of up to 7 V either way. On RS-485 any transceiver node may drive, so each node is checked
against every node that can drive it (the offset that matters is the difference of their grounds).

Verdict: BREAKS when the budget leaves the range; TIGHT when it would with the driver's common-mode output moved
by its supply's 5 % (V_OC is about half the supply; engine.rules.margins): the noise allowance is already the
margin the published budget keeps.
"""

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.margins import SUPPLY_TOLERANCE, band_verdict

RULE_ID = "common_mode.range"
NOISE_ALLOWANCE_V = 2.5  # induced noise on the pair, as in the Intersil high-speed RS-485 tutorial's budget
EXTENDED_COMMON_MODE_V = 25.0  # extended common-mode transceivers cover tens of volts (from memory)
ELV_LIMIT_V = 50.0  # extra-low-voltage band, IEC 61140 / IEC 60449 (50 V a.c.); common practice as a danger line
SERIES_GROUND_OHM = 100.0  # series resistor in the signal-ground wire at each node (TI SLLA272)
RANGES_V: dict[str, tuple[float, float]] = {"rs485": (-7.0, 12.0), "rs422": (-7.0, 7.0)}
SOURCE = (
    "Common-mode range -7..+12 V: TIA/EIA-485-A; +/-7 V: TIA/EIA-422-B; budget V_OC 2.5 V + offset 7 V + noise "
    "2.5 V: Intersil tutorial 'High-Speed RS-485 Transceiver and Applications'; grounding and isolation: "
    "TI SLLA272 (The RS-485 Design Guide)"
)
CAUTION = (
    "A bare ground wire between buildings or distant supplies carries ground-loop current; outdoor and "
    "inter-building runs also take lightning surges (tested with the IEC 61000-4-5 1.2/50 us wave): fit surge "
    "protection where the cable leaves a building, earth a shield at one point only, and have the earthing "
    "and mains side designed and inspected to your local electrical codes by licensed practice."
)


def common_mode_extremes_v(driver_common_mode_v: float, ground_offset_v: float, noise_v: float) -> tuple[float, float]:
    """(lowest, highest) common-mode voltage at a receiver whose ground is ground_offset_v above the driver's."""
    centre_v = driver_common_mode_v - ground_offset_v
    return centre_v - noise_v, centre_v + noise_v


def allowed_offset_v(
    standard: str, driver_common_mode_v: float, noise_v: float = NOISE_ALLOWANCE_V
) -> tuple[float, float]:
    """(most negative, most positive) receiver ground offset that keeps the budget inside the range."""
    v_min, v_max = RANGES_V[standard]
    return -(v_max - driver_common_mode_v - noise_v), driver_common_mode_v - noise_v - v_min


def _drivers(bus: Bus) -> list[tuple[str, float]]:
    """(name, ground offset) of every possible driver; the primary driver's ground is the reference, 0 V."""
    drivers = [(bus.plan.driver.name, 0.0)]
    drivers += [(n.name, n.ground_offset_v) for n in bus.plan.nodes if n.role == "transceiver"]
    return drivers


def check_common_mode(bus: Bus) -> list[Finding]:
    """One finding per node: its worst ground offset against any driver vs the allowed offset."""
    v_oc = bus.driver.common_mode_v
    lo_allowed, hi_allowed = allowed_offset_v(bus.plan.standard, v_oc)
    v_min, v_max = RANGES_V[bus.plan.standard]
    by_ground = sorted(_drivers(bus), key=lambda item: item[1])
    extremes = by_ground[:2] + by_ground[-2:]
    findings = []
    for node in bus.plan.nodes:
        # Offset of this node's ground above each possible driver's ground; find the one closest to a limit.
        # The extremes decide: only the two lowest and two highest driver grounds can be the worst.
        rel = [(node.ground_offset_v - g, name) for name, g in extremes if name != node.name]
        if not rel:
            rel = [(0.0, bus.plan.driver.name)]

        offset_v, against = max(rel, key=lambda item: _fraction_used(item[0], lo_allowed, hi_allowed))
        limit_v = hi_allowed if offset_v >= 0 else lo_allowed
        low_v, high_v = common_mode_extremes_v(v_oc, offset_v, NOISE_ALLOWANCE_V)
        corner_low_v, _ = common_mode_extremes_v(v_oc * (1 - SUPPLY_TOLERANCE), offset_v, NOISE_ALLOWANCE_V)
        _, corner_high_v = common_mode_extremes_v(v_oc * (1 + SUPPLY_TOLERANCE), offset_v, NOISE_ALLOWANCE_V)
        verdict = band_verdict(v_min <= low_v and high_v <= v_max, v_min <= corner_low_v and corner_high_v <= v_max)
        findings.append(
            Finding(
                RULE_ID,
                "Ground offset against the common-mode range",
                verdict,
                abs(offset_v),
                abs(limit_v),
                "V",
                node.name,
                f"V_OC {v_oc:g} V - ground offset +/- {NOISE_ALLOWANCE_V:g} V noise within "
                f"{v_min:+g} .. {v_max:+g} V; tight when V_OC 5 % off (its supply) would leave the range",
                SOURCE,
                fix=_fix(verdict, node.name, offset_v, limit_v),
                detail=(
                    f"Ground {offset_v:+g} V relative to '{against}': the wires sit between {low_v:+.1f} and "
                    f"{high_v:+.1f} V at this receiver (allowed {v_min:+g} .. {v_max:+g} V). "
                    + danger_text(offset_v)
                    + (CAUTION if offset_v != 0 else "")
                ).strip(),
            )
        )
    return findings


def _fraction_used(offset_v: float, lo_allowed_v: float, hi_allowed_v: float) -> float:
    """How much of the allowed offset (in its direction) is used; inf when that direction allows none."""
    if offset_v == 0.0:
        return 0.0
    limit_v = hi_allowed_v if offset_v > 0 else lo_allowed_v
    return offset_v / limit_v if limit_v * offset_v > 0 else float("inf")


def isolation_advice(offset_v: float) -> str:
    """Isolation to name for a ground offset: a rating class, or fibre where the classes run out.

    The working voltage an isolated transceiver tolerates continuously is far below its 1-minute withstand
    rating; the classes 2.5 kVrms (basic) and 5 kVrms (reinforced) are the usual ones (from memory), and the
    working-voltage bands used here (about 400 V and 1 kV) are Pairline's conservative reading of them.
    """
    offset = abs(offset_v)
    if offset <= EXTENDED_COMMON_MODE_V:
        return (
            "an isolated transceiver with an isolated supply (>= 2.5 kVrms basic class), or transceivers with an "
            "extended common-mode range that covers the offset"
        )
    if offset <= 400.0:
        return "an isolated transceiver with an isolated supply rated >= 2.5 kVrms (basic class)"
    if offset <= 1000.0:
        return "an isolated transceiver with an isolated supply rated >= 5 kVrms (reinforced class)"
    return (
        "a fibre-optic link in place of the copper pair to this node: the offset is beyond what the usual "
        "transceiver isolation classes (2.5 kVrms basic, 5 kVrms reinforced) are meant to stand continuously"
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


def _fix(verdict: Verdict, name: str, offset_v: float, limit_v: float) -> str:
    if verdict is Verdict.HOLDS:
        return ""
    codes = (
        "Fit surge protection where the cable leaves a building and have the earthing designed to your local "
        "electrical codes and licensed practice."
    )
    if verdict is Verdict.TIGHT:
        return (
            f"The {abs(offset_v):g} V ground offset uses {abs(offset_v) / abs(limit_v):.0%} of the "
            f"{abs(limit_v):g} V allowed, leaving little room for noise: tie the grounds by running a signal-ground "
            f"conductor beside the pair to '{name}' with a {SERIES_GROUND_OHM:g} Ω resistor in series at each node, "
            f"or isolate the node galvanically. {codes}"
        )
    return (
        danger_text(offset_v)
        + f"Isolate '{name}' galvanically with {isolation_advice(offset_v)}, so its {abs(offset_v):g} V ground "
        f"offset no longer reaches the receiver, which allows only {abs(limit_v):g} V. {codes}"
    )
