"""Termination: where the terminators sit, and their values.

Placement. One terminator at each cable end that needs one (engine.rules.cable_ends: both ends for RS-485,
the far end for RS-422 driven from one end), none elsewhere. Whether a missing or misplaced terminator
breaks the bus depends on whether the line may stay unterminated (engine.rules.unterminated).

Value. A matched end presents Z0. Receivers or a bias network lumped at the same end (within the end
tolerance) sit in parallel with the terminator, so the resistor is raised until R_T || R_P = Z0, i.e.
R_T = Z0 / (1 - Z0/R_P) (parallel resistances; for a bias network at the end this is the matched bias end
R_T2 = 2 R_B Z0 / (2 R_B - Z0) of J. Axelson, Serial Port Complete, ch. 7). The verdict reads the reflection
coefficient of the whole end, Gamma = (R_T||R_P - Z0)/(R_T||R_P + Z0), against |Gamma| <= 1/7 (0.143): the
reflection of a 120 Ohm terminator on the lowest cable impedance RS-485 accepts, 90 Ohm (120 +/- 30 Ohm,
Intersil high-speed RS-485 tutorial). It is TIGHT when the worst corner of the terminator's 5 % and the cable's
Z0 tolerance (engine.rules.margins) goes beyond that.

RC (AC) terminators are checked by engine.rules.rc_termination.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.plan import TerminationSpec
from pairline.engine.rules.cable_ends import (
    corrected_termination_ohm,
    end_name,
    end_tolerance_m,
    lumped_load_ohm,
    nearest_end_m,
    required_ends_m,
    terminator_value_ohm,
)
from pairline.engine.rules.margins import RESISTOR_TOLERANCE, band_verdict, z0_tolerance
from pairline.engine.rules.preferred import nearest_preferred
from pairline.engine.rules.unterminated import line_may_stay_unterminated
from pairline.engine.units import length_text, parallel_ohm

GAMMA_LIMIT = 30.0 / 210.0  # (120 - 90) / (120 + 90): a 120 Ohm terminator on a 90 Ohm cable

_PLACEMENT_SOURCE = (
    "TI SLLA272 The RS-485 Design Guide and B&B Electronics RS-422/485 application note (both cable ends); "
    "National Semiconductor AN-903 (single-driver RS-422: far end only)"
)
VALUE_SOURCE = (
    "R_T = Z0 matches the line (TI SLLA272); R_T || R_P = Z0 for lumped loads at the end (parallel resistances; "
    "matched bias end: J. Axelson, Serial Port Complete, ch. 7); |Γ| <= 1/7 from the 120 +/- 30 Ω cables RS-485 "
    "accepts (Intersil high-speed RS-485 tutorial); tight band from engine.rules.margins"
)


# --- closed forms ---------------------------------------------------------------------------------------


def reflection_coefficient(load_ohm: float, z0_ohm: float) -> float:
    """Voltage reflection at a resistive load: (Z_L - Z0)/(Z_L + Z0); an open end (inf) gives +1.

    Source: D. M. Pozar, Microwave Engineering, sec. 2.3 (terminated lossless line).
    """
    if math.isinf(load_ohm):
        return 1.0
    return (load_ohm - z0_ohm) / (load_ohm + z0_ohm)


# --- where terminators belong ---------------------------------------------------------------------------


def recommended_termination_ohm(bus: Bus, end_m: float) -> float:
    """The exact terminator for one cable end: Z0 corrected for the loads lumped there."""
    return corrected_termination_ohm(bus.cable.z0_ohm, lumped_load_ohm(bus, end_m))


def ends_to_terminate_m(bus: Bus) -> tuple[float, ...]:
    """Cable ends that must carry a terminator on this bus: the one answer the placement rule and the summary share.

    When the line needs terminators (engine.rules.unterminated), every end of required_ends_m. When it may stay
    unterminated, only those required ends where the plan already has a terminator (keeping one there is
    harmless; adding one elsewhere is not needed).
    """
    required = required_ends_m(bus)
    if not line_may_stay_unterminated(bus):
        return required
    return tuple(end for end in required if any(nearest_end_m(bus, t.position_m) == end for t in bus.plan.terminations))


# --- placement and value --------------------------------------------------------------------------------


def check_termination(bus: Bus) -> list[Finding]:
    """Rules "termination.placement" (missing / extra / mid-bus) and "termination.value" (R vs corrected Z0)."""
    return _placement_findings(bus) + _value_findings(bus)


def _placement_findings(bus: Bus) -> list[Finding]:
    """One finding per cable end that needs a terminator, per terminator at an end that needs none (RS-422
    driver's end), and per terminator away from the ends."""
    plan = bus.plan
    tol = end_tolerance_m(bus)
    required = required_ends_m(bus)
    to_terminate = ends_to_terminate_m(bus)
    needs = not line_may_stay_unterminated(bus)
    misplaced = Verdict.BREAKS if needs else Verdict.TIGHT
    at_end: dict[float, list[TerminationSpec]] = {0.0: [], plan.trunk_length_m: []}
    loose: list[TerminationSpec] = []
    for term in plan.terminations:
        end = nearest_end_m(bus, term.position_m)
        if end is None:
            loose.append(term)
        else:
            at_end[end].append(term)
    ends_text = " and ".join(end_name(bus, e) for e in required)
    criterion = f"One terminator at {ends_text}, each within {_at(bus, tol)} of its end; none elsewhere"
    why = (
        "the line needs terminators (three round trips outlast half a bit)"
        if needs
        else "the line may stay unterminated (three round trips settle before mid-bit), so this only costs "
        "drive current"
    )
    findings: list[Finding] = []

    def add(title: str, verdict: Verdict, value: float | None, limit: float | None, fix: str, detail: str) -> None:
        unit = "m" if value is not None else ""
        findings.append(
            Finding(
                "termination.placement",
                title,
                verdict,
                value,
                limit,
                unit,
                None,
                criterion,
                _PLACEMENT_SOURCE,
                fix,
                detail,
            )
        )

    missing = [e for e in required if not at_end[e]]
    for end in required:
        terms = at_end[end]
        name = end_name(bus, end)
        resistor = f"{terminator_value_ohm(bus, end):g} Ω"
        if not terms:
            if end in to_terminate:
                add(
                    f"No terminator at {name}",
                    Verdict.BREAKS,
                    None,
                    None,
                    f"Add a {resistor} terminator at {name}.",
                    f"Nothing terminates {name}, and {why}: each edge reflects there in full.",
                )
            else:
                add(
                    f"No terminator at {name} (none needed)",
                    Verdict.HOLDS,
                    None,
                    None,
                    "",
                    f"{name[0].upper()}{name[1:]} is left open; {why}.",
                )
            continue
        distance_m = max(abs(t.position_m - end) for t in terms)
        if len(terms) == 1:
            add(
                f"Terminator at {name}: distance from the end",
                Verdict.HOLDS,
                distance_m,
                tol,
                "",
                f"The terminator at {_at(bus, terms[0].position_m)} counts as at {name}: it is "
                f"{_at(bus, distance_m)} from the end, within {_at(bus, tol)} (the shorter of 1 m and the stub "
                "limit, since the cable beyond it is an open stub).",
            )
        else:
            add(
                f"{len(terms)} terminators at {name}: one too many"
                if len(terms) == 2
                else f"{len(terms)} terminators at {name}: {len(terms) - 1} too many",
                misplaced,
                None,
                None,
                f"Keep one terminator at {name} and remove the other"
                + (f" {len(terms) - 1}" if len(terms) > 2 else "")
                + ": "
                + ", ".join(f"{t.resistance_ohm:g} Ω at {_at(bus, t.position_m)}" for t in terms[1:])
                + ".",
                f"{len(terms)} terminators in parallel at {name} load it below the cable's {bus.cable.z0_ohm:g} Ω; "
                f"{why}.",
            )
    for end, terms in at_end.items():
        if end in required or not terms:
            continue
        for term in terms:
            add(
                f"Terminator at the RS-422 driver's end ({_at(bus, end)}): not wanted",
                misplaced,
                abs(term.position_m - end),
                tol,
                f"Remove the {term.resistance_ohm:g} Ω terminator at {_at(bus, term.position_m)}.",
                "A single RS-422 driver at this end terminates it with its own low output impedance; the "
                f"resistor only loads the driver ({why}).",
            )
    for term in loose:
        distance_m = min(term.position_m, plan.trunk_length_m - term.position_m)
        if missing:
            target = min(missing, key=lambda e: abs(e - term.position_m))
            fix = f"Move the terminator at {_at(bus, term.position_m)} to {end_name(bus, target)}."
        else:
            fix = (
                f"Remove the terminator at {_at(bus, term.position_m)}: "
                + ("both cable ends are" if len(required) > 1 else f"{end_name(bus, required[0])} is")
                + " already terminated."
            )
        add(
            f"Terminator at {_at(bus, term.position_m)}, mid-bus: distance to the nearest end",
            misplaced,
            distance_m,
            tol,
            fix,
            f"It sits {_at(bus, distance_m)} from the nearest cable end (more than {_at(bus, tol)}): a mid-bus "
            f"terminator loads the driver and reflects part of each edge; {why}.",
        )
    return findings


def corner_gamma(bus: Bus, resistance_ohm: float, lumped_ohm: float) -> float:
    """Largest |Gamma| of an end over the corners of the terminator's 5 % and the cable's Z0 tolerance."""
    z0 = bus.cable.z0_ohm
    tol_z0 = z0_tolerance(bus)
    return max(
        abs(reflection_coefficient(parallel_ohm(resistance_ohm * (1 + r), lumped_ohm), z0 * (1 + z)))
        for r in (-RESISTOR_TOLERANCE, RESISTOR_TOLERANCE)
        for z in (-tol_z0, tol_z0)
    )


def gamma_verdict(bus: Bus, resistance_ohm: float, lumped_ohm: float) -> Verdict:
    """BREAKS beyond |Gamma| 1/7 nominal, TIGHT beyond it at the worst corner, else HOLDS."""
    gamma = reflection_coefficient(parallel_ohm(resistance_ohm, lumped_ohm), bus.cable.z0_ohm)
    return band_verdict(abs(gamma) <= GAMMA_LIMIT, corner_gamma(bus, resistance_ohm, lumped_ohm) <= GAMMA_LIMIT)


def end_match(
    bus: Bus, position_m: float, resistance_ohm: float, others_ohm: list[float]
) -> tuple[float, float, float]:
    """(R_P, ideal R_T, Gamma of the whole end) for a terminator of resistance_ohm at a position, with others_ohm
    (further terminators there) beside the lumped loads. Source: Gamma = (Z_L - Z0)/(Z_L + Z0), D. M. Pozar,
    Microwave Engineering, sec. 2.3; R_T || R_P = Z0 solved for R_T (parallel resistances)."""
    z0 = bus.cable.z0_ohm
    r_p = parallel_ohm(lumped_load_ohm(bus, position_m), *others_ohm)
    ideal = corrected_termination_ohm(z0, r_p)
    gamma = reflection_coefficient(parallel_ohm(resistance_ohm, r_p), z0)
    return r_p, ideal, gamma


def _value_findings(bus: Bus) -> list[Finding]:
    """One finding per terminated cable end with a parallel terminator: |Gamma| of the whole end."""
    plan = bus.plan
    z0 = bus.cable.z0_ohm
    findings = []
    ends: dict[float, list[TerminationSpec]] = {}
    for term in plan.terminations:
        end = nearest_end_m(bus, term.position_m)
        if end is not None:
            ends.setdefault(end, []).append(term)
    for end, terms in sorted(ends.items()):
        parallel_terms = [t.resistance_ohm for t in terms if t.kind == "parallel"]
        if not parallel_terms:
            continue  # RC terminators are judged by termination.rc
        rc_terms = [t.resistance_ohm for t in terms if t.kind == "rc"]
        r_t = parallel_ohm(*parallel_terms)
        r_p, ideal, gamma = end_match(bus, end, r_t, rc_terms)
        verdict = gamma_verdict(bus, r_t, r_p)
        corner = corner_gamma(bus, r_t, r_p)
        name = end_name(bus, end)
        resistor = f"{r_t:.4g} Ω" + (" (terminators in parallel)" if len(parallel_terms) > 1 else "")
        detail = (
            f"Terminator {resistor}; other loads lumped at this end {ohm_text(r_p)}; together "
            f"{ohm_text(parallel_ohm(r_t, r_p))} on a {z0:g} Ω cable: reflection coefficient {gamma:+.3f}. "
            f"The ideal terminator here is {ohm_text(ideal)}. With the terminator 5 % off and the cable's Z0 "
            f"{z0_tolerance(bus):.0%} off, |Γ| reaches {corner:.3f}; the limit is {GAMMA_LIMIT:.3f}."
        )
        if plan.standard == "rs485" and not 90.0 <= z0 <= 150.0:
            detail += f" The cable's {z0:g} Ω is outside the 120 ± 30 Ω RS-485 accepts."
        fix = ""
        if verdict is not Verdict.HOLDS:
            if math.isinf(ideal):
                fix = (
                    f"Remove the terminator at {name}: the loads there ({ohm_text(r_p)}) already load the line "
                    f"below its {z0:g} Ω; move the bias network or receivers off the end."
                )
            else:
                fix = f"Use {nearest_preferred(ideal):g} Ω at {name} instead of {resistor} (ideal {ideal:.1f} Ω)."
        findings.append(
            Finding(
                "termination.value",
                f"Reflection at {name} with its {r_t:.4g} Ω terminator",
                verdict,
                abs(gamma),
                GAMMA_LIMIT,
                "",
                None,
                f"|Γ| of the whole end (terminator || lumped loads R_P vs Z0) <= 1/7 ({GAMMA_LIMIT:.3f}); tight "
                "when the terminator 5 % off and the cable's Z0 at its tolerance exceed it; "
                "ideal R_T = Z0/(1 - Z0/R_P)",
                VALUE_SOURCE,
                fix,
                detail,
            )
        )
    return findings


def ohm_text(value: float) -> str:
    """A resistance for a sentence: "120.0 Ω", or "none (open)" for an open end."""
    return "none (open)" if math.isinf(value) else f"{value:.1f} Ω"


def _at(bus: Bus, position_m: float) -> str:
    """A position along the trunk in the plan's display units."""
    return length_text(position_m)


def placement_verdict(bus: Bus) -> Verdict:
    """Worst verdict of the placement findings (used by property tests and summaries)."""
    return worst([f.verdict for f in _placement_findings(bus)])


__all__ = [
    "check_termination",
    "corrected_termination_ohm",
    "VALUE_SOURCE",
    "ohm_text",
    "end_match",
    "ends_to_terminate_m",
    "GAMMA_LIMIT",
    "corner_gamma",
    "gamma_verdict",
    "placement_verdict",
    "recommended_termination_ohm",
    "reflection_coefficient",
]
