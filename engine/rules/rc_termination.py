"""RC (AC) terminators: the resistor against the line, the time constant against the round trip and the bit.

R should match Z0 like a parallel terminator (engine.rules.termination: |Gamma| of the end with the capacitor a
short during an edge). The time constant RC should be long against the round trip, so the capacitor still looks
like a short while reflections arrive (RC >> 2 t_pd; B&B application note; read as RC >= 3 round trips, common
practice): BREAKS below, TIGHT when the capacitor 20 % and the resistor 5 % low would fall below
(engine.rules.margins). It should also be short against a bit: the idle bus reaches its bias level only about
3 RC after the drivers release, so TIGHT when 3 RC at the high corner exceeds T_bit (the data still pass: the
terminator then acts as a plain resistor while data flow).
"""

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.cable_ends import end_name, nearest_end_m
from pairline.engine.rules.margins import CAPACITOR_TOLERANCE, RESISTOR_TOLERANCE, band_verdict
from pairline.engine.rules.preferred import nearest_preferred
from pairline.engine.rules.termination import GAMMA_LIMIT, VALUE_SOURCE, end_match, gamma_verdict, ohm_text
from pairline.engine.rules.unterminated import one_way_delay_s
from pairline.engine.units import length_text, si_format

RC_ROUND_TRIPS_HOLDS = 3.0
RC_SETTLE_TIME_CONSTANTS = 3.0
_RC_SOURCE = "B&B Electronics RS-422/485 application note (AC termination: R = Z0, RC >> round-trip delay)"


def rc_capacitance_window_f(bus: Bus, resistance_ohm: float) -> tuple[float, float]:
    """(C_min, C_max) of a capacitor whose whole tolerance band holds: RC >= 3 round trips with C 20 % and R 5 %
    low, and 3 RC <= one bit with C 20 % and R 5 % high. Empty when C_min > C_max."""
    round_trip = 2.0 * one_way_delay_s(bus)
    t_bit = 1.0 / bus.plan.bit_rate_bps
    low, high = _rc_factors()
    return (
        RC_ROUND_TRIPS_HOLDS * round_trip / (resistance_ohm * low),
        t_bit / (RC_SETTLE_TIME_CONSTANTS * resistance_ohm * high),
    )


def _rc_factors() -> tuple[float, float]:
    """The time constant's low and high corners against nominal: (0.8 x 0.95, 1.2 x 1.05)."""
    return (1 - CAPACITOR_TOLERANCE) * (1 - RESISTOR_TOLERANCE), (1 + CAPACITOR_TOLERANCE) * (1 + RESISTOR_TOLERANCE)


def check_ac_termination(bus: Bus) -> list[Finding]:
    """Rule "termination.rc": per RC terminator, R vs Z0, RC vs the round trip and RC vs a bit."""
    findings = []
    round_trip = 2.0 * one_way_delay_s(bus)
    t_bit = 1.0 / bus.plan.bit_rate_bps
    for term in bus.plan.terminations:
        if term.kind != "rc" or term.capacitance_f is None:
            continue
        end = nearest_end_m(bus, term.position_m)
        where = end_name(bus, end) if end is not None else length_text(term.position_m)
        r = term.resistance_ohm
        tau = r * term.capacitance_f
        part = f"RC terminator at {where} ({r:g} Ω + {si_format(term.capacitance_f, 'F')})"
        c_lo, c_hi = rc_capacitance_window_f(bus, r)
        if c_lo <= c_hi:
            change = f"Use a capacitor from {si_format(c_lo, 'F')} to {si_format(c_hi, 'F')} in the {part}"
        else:
            change = (
                f"No capacitor suits both the round trip and the bit in the {part}: use a parallel terminator "
                "there (with a bias network sized for it)"
            )
        others = [t.resistance_ohm for t in bus.plan.terminations if t is not term and t.position_m == term.position_m]
        r_p, ideal, gamma = end_match(bus, term.position_m, r, others)
        v_r = gamma_verdict(bus, r, r_p)
        findings.append(
            Finding(
                "termination.rc",
                f"Reflection at {where} with its RC terminator's {r:g} Ω",
                v_r,
                abs(gamma),
                GAMMA_LIMIT,
                "",
                None,
                f"|Γ| of the end (R || lumped loads vs Z0, the capacitor a short during an edge) <= 1/7 "
                f"({GAMMA_LIMIT:.3f}); tight when the resistor 5 % off and the cable's Z0 at its tolerance exceed it",
                _RC_SOURCE + "; " + VALUE_SOURCE,
                "" if v_r is Verdict.HOLDS else f"Use {nearest_preferred(ideal):g} Ω in the {part}.",
                f"Reflection coefficient {gamma:+.3f}; other loads lumped here {ohm_text(r_p)}; ideal resistor "
                f"{ohm_text(ideal)}.",
            )
        )
        low, high = _rc_factors()
        v_t = band_verdict(tau >= RC_ROUND_TRIPS_HOLDS * round_trip, tau * low >= RC_ROUND_TRIPS_HOLDS * round_trip)
        findings.append(
            Finding(
                "termination.rc",
                f"RC terminator at {where}: time constant, longer than the round trip",
                v_t,
                tau,
                round_trip,
                "s",
                None,
                "RC >> round-trip delay 2·t_pd, read as RC >= 3 round trips; tight when the capacitor 20 % and the "
                "resistor 5 % low fall below",
                _RC_SOURCE,
                "" if v_t is Verdict.HOLDS else change + ".",
                f"RC {si_format(tau, 's')} ({si_format(tau * low, 's')} at the low corner); round trip "
                f"{si_format(round_trip, 's')}, limit {si_format(RC_ROUND_TRIPS_HOLDS * round_trip, 's')}. "
                "A shorter RC lets the capacitor charge while reflections still arrive, so the end is no longer "
                "matched.",
                limit_kind="min",
            )
        )
        settle_s = RC_SETTLE_TIME_CONSTANTS * tau
        v_b = Verdict.HOLDS if settle_s * high <= t_bit else Verdict.TIGHT
        findings.append(
            Finding(
                "termination.rc",
                f"RC terminator at {where}: settling time 3·RC, within one bit",
                v_b,
                settle_s,
                t_bit,
                "s",
                None,
                "3 RC <= one bit, so the idle bus reaches its bias level within a bit after the drivers release; "
                "tight (never a break: the data still pass) when 3 RC at the high corner (C 20 %, R 5 % high) "
                "exceeds it",
                _RC_SOURCE,
                ""
                if v_b is Verdict.HOLDS
                else (
                    change + f", or leave at least {si_format(settle_s, 's')} of idle after each turnaround before "
                    "the next transmission."
                ),
                f"3 RC {si_format(settle_s, 's')}, one bit {si_format(t_bit, 's')}; with RC longer than that the "
                "terminator acts as a plain resistor while data flow (the data still pass).",
            )
        )
    return findings
