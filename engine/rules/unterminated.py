"""May the line stay unterminated? Published criteria disagree, so each is evaluated and named.

t_pd is the trunk's one-way delay L / (VF c0), t_r the driver's rise time, T_bit = 1 / bit rate:
  rise_vs_round_trip  t_r >= 2 t_pd (TIA TSB-89-A guideline as given in J. Axelson, Serial Port Complete; the
                      Intersil tutorial says the same: terminate when the round trip exceeds the rise time)
  bit_40x_delay       T_bit >= 40 t_pd (J. Axelson, Serial Port Complete)
  three_round_trips   6 t_pd <= T_bit / 2: three round trips settle before mid-bit (B&B application note)
  field_rule          T_bit > 4 t_pd and rate <= 200 kbit/s (common practice; 200 kbit/s at VF 0.6 -> 225 m)
The deciding criterion is three_round_trips: whether a receiver reads the right level is decided where it
samples, at mid-bit. After n round trips between the driver (source reflection Gamma_S) and an open end
(Gamma_L = +1) the level still differs from its final value by |Gamma_S Gamma_L|^n of the step: for the
library's 40 Ohm drivers on a 120 Ohm line Gamma_S = -0.5, so 12.5 % after three round trips, less with the
cable's loss and the receivers' load; with a multi-volt swing that stays well clear of the 200 mV threshold.
(A driver of near-zero source resistance would ring for longer; the simulation shows it.) It is also the
criterion with a published worked example (2000 ft at 9600 bit/s needs no terminator). The rise-time
criterion is stricter (no visible reflection at all, which edge-sensitive receivers want) and is shown
beside it; the simulation may confirm or override.
"""

import math
from dataclasses import dataclass

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.cable_ends import end_name, required_ends_m, terminator_value_ohm
from pairline.engine.units import delay_s, length_text, propagation_velocity_m_per_s, si_format

FIELD_RULE_MAX_RATE_BPS = 200e3
DECIDING_CRITERION = "three_round_trips"


def one_way_delay_s(bus: Bus) -> float:
    """The trunk's one-way delay t_pd = L / (VF c0)."""
    return delay_s(bus.plan.trunk_length_m, bus.cable.velocity_factor)


@dataclass(frozen=True, slots=True)
class OmitCriterion:
    """One published answer to "may this line stay unterminated?"."""

    key: str
    name: str
    statement: str  # the inequality
    source: str
    value: float  # left side, in unit
    limit: float  # right side, in unit
    unit: str
    holds: bool  # True: by this criterion no terminator is needed
    max_length_m: float  # longest unterminated trunk this criterion allows at the plan's rate and rise time
    deciding: bool


def unterminated_criteria(bus: Bus) -> tuple[OmitCriterion, ...]:
    """Every published unterminated-line criterion evaluated on the plan; exactly one is marked deciding."""
    t_pd = one_way_delay_s(bus)
    t_r = bus.fastest_rise_time_s
    rate = bus.plan.bit_rate_bps
    t_bit = 1.0 / rate
    v = propagation_velocity_m_per_s(bus.cable.velocity_factor)
    slow_enough = rate <= FIELD_RULE_MAX_RATE_BPS
    rows = [
        (
            "rise_vs_round_trip",
            "Round trip within the rise time",
            "round trip 2·t_pd <= driver rise time t_r",
            "TIA TSB-89-A, as given in J. Axelson, Serial Port Complete, 2nd ed., ch. 7; Intersil tutorial "
            "High-Speed RS-485 Transceiver and Applications (terminate when the round trip exceeds the rise time)",
            2 * t_pd,
            t_r,
            t_r * v / 2,
        ),
        (
            "bit_40x_delay",
            "Bit at least 40 one-way delays",
            "40 × t_pd <= bit time",
            "J. Axelson, Serial Port Complete, 2nd ed., ch. 7",
            40 * t_pd,
            t_bit,
            t_bit * v / 40,
        ),
        (
            "three_round_trips",
            "Three round trips before mid-bit",
            "3 round trips (6·t_pd) <= half a bit",
            "B&B Electronics RS-422/485 application note",
            6 * t_pd,
            t_bit / 2,
            0.5 * t_bit * v / 6,
        ),
        (
            "field_rule",
            "Field rule of thumb",
            "bit time > 4 × t_pd and bit rate <= 200 kbit/s",
            "common practice",
            4 * t_pd,
            t_bit if slow_enough else 0.0,
            t_bit * v / 4 if slow_enough else 0.0,
        ),
    ]
    return tuple(
        OmitCriterion(
            key,
            name,
            statement,
            source,
            value,
            limit,
            "s",
            holds=value <= limit if key != "field_rule" else value < limit,
            max_length_m=max_len,
            deciding=key == DECIDING_CRITERION,
        )
        for key, name, statement, source, value, limit, max_len in rows
    )


def line_may_stay_unterminated(bus: Bus) -> bool:
    """The deciding criterion's answer (three round trips settle before mid-bit)."""
    return next(c for c in unterminated_criteria(bus) if c.deciding).holds


def _criterion_line(c: OmitCriterion) -> str:
    answer = "no terminator needed" if c.holds else "terminate"
    if c.max_length_m > 0.0:
        reach = f"allows up to {c.max_length_m:.0f} m unterminated at this rate and rise time"
    else:
        reach = f"allows no unterminated line above {FIELD_RULE_MAX_RATE_BPS / 1e3:.0f} kbit/s"
    return (
        f"{'[deciding] ' if c.deciding else ''}{c.name} ({c.source}): {c.statement}: "
        f"{si_format(c.value, 's')} vs {si_format(c.limit, 's')}, {answer}; {reach}."
    )


def check_unterminated(bus: Bus) -> list[Finding]:
    """Rule "termination.may_omit": each published criterion with its result; three_round_trips decides."""
    criteria = unterminated_criteria(bus)
    deciding = next(c for c in criteria if c.deciding)
    others_disagree = [c for c in criteria if not c.deciding and c.holds != deciding.holds]
    why = (
        "Three round trips before mid-bit decides: receivers sample at mid-bit, so what matters is whether the "
        "reflections have settled by then; the stricter rise-time criterion (no visible reflection at all) is "
        "shown beside it."
    )
    settles = "three round trips settle before mid-bit" if deciding.holds else "three round trips outlast half a bit"
    ends = required_ends_m(bus)
    ends_text = " and ".join(end_name(bus, e) for e in ends)
    values = {terminator_value_ohm(bus, e) for e in ends}
    resistor = (
        f"{values.pop():g} Ω" if len(values) == 1 else " / ".join(f"{terminator_value_ohm(bus, e):g} Ω" for e in ends)
    )
    if bus.plan.terminations:
        verdict = Verdict.HOLDS
        title = f"Terminators {'optional' if deciding.holds else 'needed'}: {settles}"
        head = (
            "The plan terminates the line"
            + (", which it needs." if not deciding.holds else "; by the deciding criterion it need not.")
            + " Placement and values are checked under termination.placement and termination.value."
        )
    elif not deciding.holds:
        verdict = Verdict.BREAKS
        title = f"Unterminated line: {settles}"
        head = "The plan has no terminator, and the line needs one."
    elif others_disagree:
        verdict = Verdict.TIGHT
        title = f"Unterminated line: {settles}, other criteria disagree"
        head = "The line may stay unterminated, but " + ", ".join(c.name for c in others_disagree) + " disagree."
    else:
        verdict = Verdict.HOLDS
        title = f"Unterminated line: {settles}"
        head = "The line may stay unterminated; every criterion agrees."
    fix = ""
    if verdict is Verdict.BREAKS:
        fix = (
            f"Fit a {resistor} terminator at {ends_text}, or shorten the trunk to at most "
            f"{length_text(math.floor(deciding.max_length_m))}, or lower the bit rate to "
            "at most "
            f"{_rate_floor_text(_max_unterminated_rate_bps(bus))}."
        )
    elif verdict is Verdict.TIGHT:
        fix = (
            f"Optional: a {resistor} terminator at {ends_text} satisfies "
            + ", ".join(c.name for c in others_disagree)
            + " too; otherwise check the simulated waveforms before leaving the line unterminated."
        )
    return [
        Finding(
            rule_id="termination.may_omit",
            title=title,
            verdict=verdict,
            value=deciding.value,
            limit=deciding.limit,
            unit="s",
            node=None,
            criterion=f"{deciding.name}: {deciding.statement}",
            source=deciding.source,
            fix=fix,
            detail=" ".join([head, why, *map(_criterion_line, criteria)]),
            # The limit is the deciding criterion for leaving the line open; when the line needs terminators
            # the numbers only explain why, so the limit carries no direction for the verdict.
            limit_kind="max" if deciding.holds else "none",
        )
    ]


def _max_unterminated_rate_bps(bus: Bus) -> float:
    """Highest rate at which three round trips still fit in half a bit: 1 / (12 t_pd)."""
    return 1.0 / (12.0 * one_way_delay_s(bus))


def _rate_floor_text(rate_bps: float) -> str:
    """A rate limit shown to 3 significant digits, rounded down so that following the fix really fixes it."""
    scale = 10.0 ** (math.floor(math.log10(rate_bps)) - 2)
    return si_format(math.floor(rate_bps / scale + 1e-9) * scale, "bit/s")


__all__ = [
    "DECIDING_CRITERION",
    "OmitCriterion",
    "check_unterminated",
    "line_may_stay_unterminated",
    "one_way_delay_s",
    "unterminated_criteria",
]
