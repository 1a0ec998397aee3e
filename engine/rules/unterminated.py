"""May the line stay unterminated? Published criteria disagree, so each is evaluated and named.

t_pd is the
trunk's one-way delay L / (VF c0), t_r the driver's rise time, T_bit = 1 / bit rate:
  rise_vs_round_trip  t_r >= 2 t_pd (terminate when the round trip exceeds the rise time; Intersil tutorial)
  tsb89_rise_time     t_r >= 2 t_pd (TIA TSB-89-A guideline as given in J. Axelson, Serial Port Complete)
  bit_40x_delay       T_bit >= 40 t_pd (J. Axelson, Serial Port Complete)
  three_round_trips   6 t_pd <= T_bit / 2: three round trips settle before mid-bit (B&B application note)
  field_rule          T_bit > 4 t_pd and rate < 200 kbit/s (common practice)
The deciding criterion is three_round_trips: whether a receiver reads the right level is decided where it
samples, at mid-bit, and after three round trips the reflections between a low-impedance driver and an
open end have died to a few percent; it is also the one with a published worked example (2000 ft at
9600 bit/s needs no terminator). The rise-time criteria are stricter (no visible reflection at all, which
edge-sensitive receivers want) and are shown as opinions beside it; the simulation may confirm or override.
"""

import math
from dataclasses import dataclass

from engine.bus import Bus
from engine.findings import Finding, Verdict
from engine.rules.cable_ends import required_ends_m
from engine.rules.preferred import nearest_preferred
from engine.units import SPEED_OF_LIGHT_M_PER_S, delay_s, si_format

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
    t_r = bus.driver.rise_time_s
    rate = bus.plan.bit_rate_bps
    t_bit = 1.0 / rate
    v = bus.cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S
    rows = [
        (
            "rise_vs_round_trip",
            "Rise time vs round trip",
            "round trip 2·t_pd <= driver rise time t_r",
            "Intersil tutorial High-Speed RS-485 Transceiver and Applications",
            2 * t_pd,
            t_r,
            "s",
            t_r * v / 2,
        ),
        (
            "tsb89_rise_time",
            "TSB-89-A rise-time guideline",
            "2 × one-way delay <= driver rise time (same inequality as above)",
            "TIA TSB-89-A, as given in J. Axelson, Serial Port Complete, 2nd ed., ch. 7",
            2 * t_pd,
            t_r,
            "s",
            t_r * v / 2,
        ),
        (
            "bit_40x_delay",
            "Bit at least 40 one-way delays",
            "40 × t_pd <= bit time",
            "J. Axelson, Serial Port Complete, 2nd ed., ch. 7",
            40 * t_pd,
            t_bit,
            "s",
            t_bit * v / 40,
        ),
        (
            "three_round_trips",
            "Three round trips before mid-bit",
            "3 round trips (6·t_pd) <= half a bit",
            "B&B Electronics RS-422/485 application note",
            6 * t_pd,
            t_bit / 2,
            "s",
            0.5 * t_bit * v / 6,
        ),
        (
            "field_rule",
            "Field rule of thumb",
            "bit time > 4 × t_pd and bit rate < 200 kbit/s",
            "common practice",
            4 * t_pd,
            t_bit if rate < FIELD_RULE_MAX_RATE_BPS else 0.0,
            "s",
            t_bit * v / 4 if rate < FIELD_RULE_MAX_RATE_BPS else 0.0,
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
            unit,
            holds=value <= limit if key != "field_rule" else value < limit,
            max_length_m=max_len,
            deciding=key == DECIDING_CRITERION,
        )
        for key, name, statement, source, value, limit, unit, max_len in rows
    )


def line_may_stay_unterminated(bus: Bus) -> bool:
    """The deciding criterion's answer (three round trips settle before mid-bit)."""
    return next(c for c in unterminated_criteria(bus) if c.deciding).holds


def check_unterminated(bus: Bus) -> list[Finding]:
    """Rule "termination.may_omit": each published criterion with its result; three_round_trips decides."""
    criteria = unterminated_criteria(bus)
    deciding = next(c for c in criteria if c.deciding)
    others_disagree = [c for c in criteria if not c.deciding and c.holds != deciding.holds]
    lines = [
        f"{'[deciding] ' if c.deciding else ''}{c.name} ({c.source}): {c.statement}: "
        f"{si_format(c.value, 's')} vs {si_format(c.limit, 's')} -> "
        f"{'no terminator needed' if c.holds else 'terminate'}; allows up to {c.max_length_m:.0f} m unterminated."
        for c in criteria
    ]
    why = (
        "Three round trips before mid-bit decides: receivers sample at mid-bit, so what matters is whether the "
        "reflections have settled by then; the stricter rise-time criteria (no visible reflection at all) are "
        "shown as opinions."
    )
    terminated = bool(bus.plan.terminations)
    if terminated:
        verdict = Verdict.HOLDS
        head = "The plan terminates the line; the criteria are shown for information."
    elif not deciding.holds:
        verdict = Verdict.BREAKS
        head = "The plan has no terminator, and the line needs one."
    elif others_disagree:
        verdict = Verdict.TIGHT
        head = "The line may stay unterminated, but " + ", ".join(c.name for c in others_disagree) + " disagree."
    else:
        verdict = Verdict.HOLDS
        head = "The line may stay unterminated; every criterion agrees."
    fix = ""
    if verdict is Verdict.BREAKS:
        ends = " and ".join(f"{e:g} m" for e in required_ends_m(bus))
        fix = (
            f"Terminate the cable end{'s' if len(required_ends_m(bus)) > 1 else ''} at {ends} with "
            f"{nearest_preferred(bus.cable.z0_ohm):g} Ω, or shorten the trunk to <= "
            f"{math.floor(deciding.max_length_m):.0f} m, or lower the bit rate to <= "
            f"{si_format(_max_unterminated_rate_bps(bus), 'bit/s')}."
        )
    elif verdict is Verdict.TIGHT:
        fix = (
            "Optional: terminate the cable ends to satisfy every criterion; check the simulated waveforms "
            "before leaving the line unterminated."
        )
    return [
        Finding(
            rule_id="termination.may_omit",
            title="May the line stay unterminated",
            verdict=verdict,
            value=deciding.value,
            limit=deciding.limit,
            unit="s",
            node=None,
            criterion=f"{deciding.name}: {deciding.statement}",
            source=deciding.source,
            fix=fix,
            detail=" ".join([head, why, *lines]),
        )
    ]


def _max_unterminated_rate_bps(bus: Bus) -> float:
    """Highest rate at which three round trips still fit in half a bit: 1 / (12 t_pd)."""
    return 1.0 / (12.0 * one_way_delay_s(bus))


__all__ = [
    "DECIDING_CRITERION",
    "OmitCriterion",
    "check_unterminated",
    "line_may_stay_unterminated",
    "one_way_delay_s",
    "unterminated_criteria",
]
