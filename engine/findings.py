"""What a rule returns: findings on a three-level scale, each with its number, limit, source and fix."""

from dataclasses import dataclass
from enum import StrEnum


class Verdict(StrEnum):
    """Pairline's three-level scale. Ordered: HOLDS < TIGHT < BREAKS."""

    HOLDS = "holds"  # inside the limit with margin
    TIGHT = "tight"  # inside the limit but with little margin, or a rule of thumb disagrees
    BREAKS = "breaks"  # outside the limit: the bus will misbehave or the standard is not met

    @property
    def rank(self) -> int:
        return _RANK[self]


_RANK = {Verdict.HOLDS: 0, Verdict.TIGHT: 1, Verdict.BREAKS: 2}


def worst(verdicts: "list[Verdict] | tuple[Verdict, ...]") -> Verdict:
    """The worst verdict of several; HOLDS for none."""
    return max(verdicts, key=lambda v: v.rank, default=Verdict.HOLDS)


@dataclass(frozen=True, slots=True)
class Finding:
    rule_id: str  # stable id, e.g. "stub.length"; used in JSON, HTML anchors and tests
    title: str  # short human name of the check
    verdict: Verdict
    value: float | None  # the quantity checked, in `unit`
    limit: float | None  # the limit it is held against, in `unit`
    unit: str
    node: str | None  # node name the finding concerns; None for the whole bus
    criterion: str  # the criterion applied, as a sentence or formula
    source: str  # where the criterion comes from
    fix: str = ""  # a concrete sentence; empty when nothing needs doing
    detail: str = ""  # further numbers or explanation
    # Direction of the limit: "max" the value must stay at or below it, "min" at or above it,
    # "none" the limit is informational (no direction).
    limit_kind: str = "max"
    # Further named numbers the rule worked out, in SI units by their names (e.g. ("max_bit_rate_bps", 8.3e4)):
    # what a summary reads instead of asking the rule again.
    figures: tuple[tuple[str, float], ...] = ()
    branch: str | None = None  # the branch the finding concerns (engine.plan BranchSpec), if any

    def figure(self, name: str) -> float | None:
        """One of the finding's named figures, or None when the rule gave none by that name."""
        return next((value for key, value in self.figures if key == name), None)


LIMIT_KINDS = ("max", "min", "none")
