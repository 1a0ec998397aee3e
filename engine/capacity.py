"""How many more receivers this driver can feed: one answer, per device class, computed on the advised plan.

RS-485: N more receivers of a class fit when the advised plan with N more of them still breaks none of the load
rules it does not break already: the 32 UL budget (load.unit_loads), the fully loaded bus (load.driver) and the
idle level its bias network holds (bias.idle_level, with the advised bias left as it is). The N receivers are
put where they hurt the idle level most: at the trunk end farthest from the bias network. The budget gives an
upper bound, floor(spare UL / UL per receiver) (TI SLLA166); the other two rules are checked there and N is
bisected down when one of them breaks. RS-422 counts receivers: at most 10 per driver (TIA/EIA-422-B).

The classes are the unit-load ratings of the library today; with per-node device classes each class brings its
own rating (and, for failsafe receivers, no bias to hold), and the same search answers for it.
"""

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.dc import idle_levels_v
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import NodeSpec
from pairline.engine.rules.bias import IDLE_THRESHOLD_V
from pairline.engine.rules.loads import (
    RS422_MAX_RECEIVERS,
    RS485_UNIT_LOAD_BUDGET,
    UNIT_LOAD_CLASSES,
    driver_load_holds_ohm,
    driver_load_ohm,
    max_nodes,
    unit_load_total,
)


def _within_budget(bus: Bus) -> bool:
    return unit_load_total(bus) <= RS485_UNIT_LOAD_BUDGET + 1e-9


def _within_driver_load(bus: Bus) -> bool:
    return driver_load_ohm(bus) >= driver_load_holds_ohm(bus.plan.standard)


def _idle_holds(bus: Bus) -> bool:
    return float(np.min(idle_levels_v(bus)[1])) >= IDLE_THRESHOLD_V


# What each load rule BREAKS on (its nominal limit), as engine.rules.loads and engine.rules.bias judge it.
_LIMITS: dict[str, Callable[[Bus], bool]] = {
    "load.unit_loads": _within_budget,
    "load.driver": _within_driver_load,
    "bias.idle_level": _idle_holds,
}
_LIMIT_NAMES = {
    "load.unit_loads": "the 32 UL budget",
    "load.driver": "the driver-load limit",
    "bias.idle_level": "the idle level the bias holds",
    "receivers": "the 10 receivers one RS-422 driver feeds",
}


@dataclass(frozen=True, slots=True)
class ClassCapacity:
    label: str  # "1 UL", "1/8 UL", or "receivers" on RS-422
    unit_loads: float
    count: int
    limited_by: str  # rule id, or "receivers"


@dataclass(frozen=True, slots=True)
class Capacity:
    """Further receivers per class on the advised plan, with what limits them."""

    classes: tuple[ClassCapacity, ...]
    spare_unit_loads: float  # RS-485: 32 UL minus the advised plan's total; RS-422: receivers left
    text: str  # "7 more of 1 UL, 14 of 1/2 UL, 29 of 1/4 UL or 59 of 1/8 UL"

    @property
    def further_nodes(self) -> dict[str, int]:
        return {c.label: c.count for c in self.classes}


def _far_point_m(bus: Bus) -> float:
    """The trunk end farthest from the bias network (from the driver when there is none)."""
    plan = bus.plan
    source = plan.bias.position_m if plan.bias is not None else plan.driver.position_m
    return 0.0 if source > 0.5 * plan.trunk_length_m else plan.trunk_length_m


def _with_more(bus: Bus, count: int, unit_loads: float) -> Bus:
    """The bus with `count` receivers of `unit_loads` lumped at its far point (one node standing for them all)."""
    more = NodeSpec.model_construct(
        name="(further receivers)",
        position_m=_far_point_m(bus),
        stub_length_m=0.0,
        role="receiver",
        unit_loads=count * unit_loads,
        input_capacitance_f=0.0,
        ground_offset_v=0.0,
    )
    plan = bus.plan.model_copy(update={"nodes": [*bus.plan.nodes, more]})
    return Bus(plan=plan, cable=bus.cable, driver=bus.driver)


def _first_limit(bus: Bus, count: int, unit_loads: float, rules: list[str]) -> str | None:
    """The first of the rules that `count` more receivers would break, or None."""
    if count == 0:
        return None
    more = _with_more(bus, count, unit_loads)
    return next((r for r in rules if not _LIMITS[r](more)), None)


def receiver_capacity(bus: Bus, findings: tuple[Finding, ...]) -> Capacity:
    """Further receivers per class that the bus (the advised plan) and its findings leave room for."""
    plan = bus.plan
    if plan.standard == "rs422":
        spare = max(0, RS422_MAX_RECEIVERS - len(plan.nodes))
        one = (ClassCapacity("receivers", 1.0, spare, "receivers"),)
        return Capacity(one, float(RS422_MAX_RECEIVERS - len(plan.nodes)), _text(one))
    spare_ul = RS485_UNIT_LOAD_BUDGET - unit_load_total(bus)
    broken = {f.rule_id for f in findings if f.verdict is Verdict.BREAKS}
    rules = [r for r in _LIMITS if r not in broken and (r != "bias.idle_level" or plan.bias is not None)]
    classes = []
    for label, ul in UNIT_LOAD_CLASSES.items():
        count = max_nodes(ul, spare_ul) if "load.unit_loads" not in broken else 0
        limit = _first_limit(bus, count, ul, rules)
        limited_by = "load.unit_loads"
        if limit is not None:
            limited_by = limit
            lo, hi = 0, count  # lo fits, hi does not
            while hi - lo > 1:
                mid = (lo + hi) // 2
                lo, hi = (mid, hi) if _first_limit(bus, mid, ul, rules) is None else (lo, mid)
            count = lo
        classes.append(ClassCapacity(label, ul, count, limited_by))
    return Capacity(tuple(classes), spare_ul, _text(tuple(classes)))


def _text(classes: tuple[ClassCapacity, ...]) -> str:
    """The one sentence every report uses for spare capacity."""
    if len(classes) == 1:
        c = classes[0]
        return f"{c.count} more receiver{'s' if c.count != 1 else ''} (limited by {_LIMIT_NAMES[c.limited_by]})"
    if all(c.count == 0 for c in classes):
        return f"no more receivers (limited by {_LIMIT_NAMES[classes[0].limited_by]})"
    parts = [f"{c.count} of {c.label}" for c in classes]
    limits = sorted({_LIMIT_NAMES[c.limited_by] for c in classes})
    return (
        f"{parts[0].replace(' of ', ' more of ', 1)}, " + ", ".join(parts[1:-1]) + f" or {parts[-1]}"
        f" (limited by {' and '.join(limits)})"
    )
