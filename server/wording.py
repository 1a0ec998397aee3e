"""Words and numbers for people: lengths in the plan's units, counts that agree with their nouns, verdicts in
plain words, dates. Used by every page's data (server.views) so each reads the same way.
"""

import math
import re
from collections.abc import Mapping

from pairline.engine.network import NetworkReport
from pairline.engine.segments import PlanPart
from pairline.engine.units import si_format
from pairline.server.quantities import UnitSystem, length_text, number_text


def quantity_text(value: float | None, unit: str, units: UnitSystem) -> str:
    """A result value for reading: lengths in the plan's display unit, others with an SI prefix."""
    if value is None:
        return "—"
    if not math.isfinite(value):
        return "unlimited" if value > 0 else "—"
    if unit == "m":
        return length_text(value, units)
    if unit in ("s", "F", "Hz", "Ω", "bit/s", "W", "A", "V") and value != 0:
        return si_format(value, unit)
    return f"{number_text(value)} {unit}".strip()


# "<number> m" (or cm, mm: the engine writes short lengths so) as a length: not inside a word or formula
# ("10^8 m·bit/s", "Ω/m", "mV" and "mm²" stay as they are), nor already in brackets after feet ("4000 ft (1200 m)").
METRIC_LENGTH = r"(\d+(?:\.\d+)?(?:[eE][-+]?\d+)?) (m|cm|mm)(?![\w·/^²])"
_METRES_IN_TEXT = re.compile(r"(?<![\w.^/])(?<!ft \()" + METRIC_LENGTH)
_IN_METRES = {"m": 1.0, "cm": 1e-2, "mm": 1e-3}


def metres_of(match: re.Match[str]) -> float:
    """The length in metres of a METRIC_LENGTH match ("53 cm" -> 0.53)."""
    return float(match.group(1)) * _IN_METRES[match.group(2)]


# A source that states metres with feet in brackets ("1200 m (4000 ft)"), read feet first in an imperial plan.
_METRES_THEN_FEET = re.compile(r"(?<![\w.])(\d+(?:\.\d+)?) m \((\d[\d,.\u202f]*) ft\)")


def lengths_in_text(text: str, units: UnitSystem, keep_metres: bool = False) -> str:
    """An engine sentence with every "<number> m" restated in the display unit and the house rounding;
    with `keep_metres`, feet are followed by the engine's metres in brackets."""

    def restate(m: re.Match[str]) -> str:
        shown = length_text(metres_of(m), units)
        return f"{shown} ({m.group(0)})" if keep_metres and units == "imperial" else shown

    if units == "imperial":
        text = _METRES_THEN_FEET.sub(lambda m: f"{m.group(2)} ft ({m.group(1)} m)", text)
    return _METRES_IN_TEXT.sub(restate, text)


def in_plan_units(text: str, units: UnitSystem) -> str:
    """An engine sentence for an imperial plan: each length in feet, the engine's metres kept in brackets."""
    return lengths_in_text(text, units, keep_metres=True) if units == "imperial" else text


MONTHS = ("January February March April May June July August September October November December").split()


def date_text(iso: str) -> str:
    """ "2025-12-02T08:06:31+00:00" -> "2 December 2025, 08:06 UTC"; text that is not such a time stays as is."""
    m = re.match(r"^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})", iso or "")
    if not m:
        return iso
    year, month, day, hour, minute = m.groups()
    return f"{int(day)} {MONTHS[int(month) - 1]} {year}, {hour}:{minute} UTC"


VERDICT_TEXT = {"holds": "holds", "tight": "close to the limit", "breaks": "breaks"}


VERDICT_HEADLINE = {"holds": "Holds", "tight": "Close to the limit", "breaks": "Breaks"}


def counted(n: int, one: str, many: str) -> str:
    """ "1 check" / "2 checks": the count with the word that agrees with it."""
    return f"{n} {one if n == 1 else many}"


def counts_text(counts: Mapping[str, int]) -> str:
    """ "2 checks break · 1 close to the limit · 61 hold"; parts with no findings are left out."""
    parts = []
    if counts.get("breaks"):
        parts.append(counted(counts["breaks"], "check breaks", "checks break"))
    if counts.get("tight"):
        parts.append(f"{counts['tight']} close to the limit")
    if counts.get("holds"):
        parts.append(
            counted(counts["holds"], "holds", "hold")
            if parts
            else counted(counts["holds"], "check holds", "checks hold")
        )
    return " · ".join(parts)


def shape_text(report: NetworkReport) -> str:
    """ "2 segments joined by 1 repeater" or "four-wire: a transmit pair and a return pair"."""
    plan = report.plan
    if plan.four_wire is not None:
        pairs = "a transmit pair and a return pair" if len(report.parts) > 1 else "a transmit pair (no slave replies)"
        return f"four-wire with {pairs}; master '{plan.driver.name}'"
    count = len(report.parts)
    return f"{count} segments joined by {len(plan.repeaters)} repeater(s)"


def driven_text(part: PlanPart) -> str:
    """Who drives a part: "driven by the master 'plc'", "driven by repeater 'gate'", "replies from 'valve-8' ..."."""
    driver = part.plan.driver.name
    if part.kind == "return_pair":
        talkers = [driver] + [n.name for n in part.plan.nodes if n.may_drive]
        return f"replies from {len(talkers)} slave(s) to the master's receiver"
    if part.feeder is not None:
        return f"driven by repeater '{part.feeder}'"
    return f"driven by the master '{driver}'"
