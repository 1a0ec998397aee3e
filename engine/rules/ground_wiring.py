"""The ground and shield wiring as whole-bus findings: the current the signal-ground conductor carries between
earths and the power in its series resistors, and how the shield is earthed.

The conductor's current comes from engine.grounding's DC network: I = dV / (2 R_series + R_conductor) between two
earths (common practice), each node joined through its series resistor (the usual 100 Ohm; TI SLLA272, B&B
RS-422/485 application note). A shield earthed at both ends across different earths carries their loop current.
"""

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.grounding import GroundState, ground_state
from pairline.engine.rules.common_mode import SERIES_GROUND_OHM, fault_text
from pairline.engine.rules.power import rating_text, rating_to_buy_w

GROUND_RULE_ID = "common_mode.ground_current"
SHIELD_RULE_ID = "common_mode.shield"


def check_ground_wiring(bus: Bus) -> list[Finding]:
    """The signal-ground conductor's current, then the shield, each one whole-bus finding."""
    state = ground_state(bus)
    return [_ground_current_finding(bus, state), _shield_finding(bus, state)]


def _ground_current_finding(bus: Bus, state: GroundState) -> Finding:
    """The signal-ground conductor's loop current and the power in its series resistors."""
    g = bus.plan.grounding
    criterion = (
        "I = dV / (2 R_series + R_conductor) between earths; the series resistor dissipates I^2 R, bought at "
        "twice that (common practice); breaks when a resistor would dissipate more than 1 W (a 2 W part at half "
        "rating) or the conductor is joined without series resistors between different earths"
    )
    source = (
        "100 Ω in series with each node's signal-ground connection: TI SLLA272, B&B RS-422/485 application note; "
        "P = I^2 R (Joule); 2x derating: common practice"
    )
    if not state.conductor:
        return _statement(
            GROUND_RULE_ID,
            "No signal-ground conductor",
            criterion,
            source,
            "The plan runs no signal-ground conductor: each earthed interface sits on its own earth, and an isolated "
            "one floats with the bus.",
        )
    power = state.series_power_w
    k = int(np.argmax(np.abs(state.series_current_a)))
    current_a = float(abs(state.series_current_a[k]))
    worst_w = float(power[k])
    spread_v = float(np.ptp(state.earth_v[~state.isolated])) if (~state.isolated).any() else 0.0
    no_resistor = g.ground_series_ohm == 0.0 and spread_v > 0.0
    verdict = Verdict.BREAKS if no_resistor or worst_w * 2.0 > 2.0 else Verdict.HOLDS
    fix = ""
    if no_resistor:
        fix = (
            f"Fit a {SERIES_GROUND_OHM:g} Ω resistor in series with every node's connection to the signal-ground "
            f"conductor: without them the {spread_v:g} V between earths drives the whole loop current through it."
        )
    elif verdict is Verdict.BREAKS:
        fix = (
            fault_text(spread_v)
            + f"The series resistor at '{state.names[k]}' would dissipate {rating_text(worst_w)}: isolate the nodes on "
            "the other earth instead of joining the earths through the conductor."
        )
    return Finding(
        GROUND_RULE_ID,
        "Current in the signal-ground conductor",
        verdict,
        worst_w,
        1.0,
        "W",
        None,
        criterion,
        source,
        fix=fix,
        detail=(
            f"Earths up to {spread_v:g} V apart drive {current_a * 1e3:.1f} mA through the conductor (at "
            f"'{state.names[k]}'); its {g.ground_series_ohm:g} Ω series resistor dissipates {rating_text(worst_w)}, "
            f"buy {rating_text(rating_to_buy_w(worst_w))}. Earthed interfaces still see their own earth; the "
            "conductor gives isolated interfaces their reference."
        ),
        figures=(("current_a", current_a),),
    )


def _shield_finding(bus: Bus, state: GroundState) -> Finding:
    """How the shield is earthed: one end (the practice applied), both ends across different earths (loop
    current in the shield), or none stated."""
    shield = bus.plan.grounding.shield
    ends = [int(np.argmin(state.position_m)), int(np.argmax(state.position_m))]
    across_v = float(abs(state.earth_v[ends[1]] - state.earth_v[ends[0]]))
    spread_v = float(np.ptp(state.earth_v))
    criterion = (
        "the shield is earthed at one point, so no ground-loop current flows in it (the practice Pairline applies; "
        "published practice differs: both ends also screen inductive coupling, and a capacitor at the second end "
        "does both)"
    )
    source = (
        "one earth point: B&B RS-422/485 application note; both ends: OBO Bettermann Lightning Protection Guide "
        "(2018) and L. West, emcstandards.co.uk (2018); 0.1 µF with 470 kΩ at the second end: Echelon LonWorks "
        "LN-series interface guide"
    )
    if shield == "both_ends" and spread_v >= 1.0:
        return Finding(
            SHIELD_RULE_ID,
            "Shield earthed at both ends across different earths",
            Verdict.TIGHT,
            spread_v,
            1.0,
            "V",
            None,
            criterion,
            source,
            fix=(
                f"The shield joins earths up to {spread_v:g} V apart and carries their loop current: earth it at one "
                "end only, or at the second end through a 0.1 µF capacitor with a 470 kΩ bleed resistor."
            ),
            detail=f"Earths at the two cable ends differ by {across_v:g} V.",
        )
    words = {
        "one_end": "Shield earthed at one end",
        "both_ends": "Shield earthed at both ends, on one earth",
        "none": "No shield earthing stated",
    }
    detail = {
        "one_end": "No loop current flows in the shield.",
        "both_ends": "Both ends sit on one earth, so the shield carries no loop current and screens both ways.",
        "none": "Unshielded, or its earthing not stated; where the cable leaves a building, earth a shield at one "
        "point.",
    }[shield]
    return _statement(SHIELD_RULE_ID, words[shield], criterion, source, detail)


def _statement(rule_id: str, title: str, criterion: str, source: str, detail: str) -> Finding:
    """A whole-bus finding that holds and has no number to weigh: what the plan's wiring is."""
    return Finding(
        rule_id, title, Verdict.HOLDS, None, None, "", None, criterion, source, detail=detail, limit_kind="none"
    )
