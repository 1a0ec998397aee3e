"""Reading a raw plan document (a dict from JSON, not yet validated) for the cross-field checks: numbers, parts and
lists that are what they should be, or nothing (the field checks report what is not)."""

from collections.abc import Callable
from typing import Any

from pairline.engine.plan.model import MAX_NODES, MIN_TRUNK_M
from pairline.engine.plan.problems import Problem, finite_float

PastEnd = Callable[[str, str, float | None], None]


def num(obj: Any, key: str, default: float | None = None) -> float | None:
    """A finite number from a raw dict, or the default when absent or not a number (field checks report it)."""
    raw = obj.get(key, default) if isinstance(obj, dict) else default
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        return None
    return finite_float(raw)


def sub(obj: dict[str, Any], key: str) -> dict[str, Any]:
    raw = obj.get(key)
    return raw if isinstance(raw, dict) else {}


def items(obj: Any, key: str) -> list[Any]:
    raw = obj.get(key) if isinstance(obj, dict) else None
    return raw if isinstance(raw, list) and len(raw) <= MAX_NODES else []


def past_end_check(data: dict[str, Any], problems: list[Problem], length_field: str = "trunk_length_m") -> PastEnd:
    """A function that reports a position past the end of a trunk (`data` the plan or a segment of it, whose
    trunk_length_m is at `length_field`)."""
    length = num(data, "trunk_length_m")

    def past_end(path: str, label: str, position_m: float | None) -> None:
        if length is not None and length >= MIN_TRUNK_M and position_m is not None and position_m > length:
            problems.append(
                Problem(
                    path,
                    label,
                    position_m,
                    {"min": 0.0, "max": length, "unit": "m"},
                    f"{label} is at {position_m:g} m, past the trunk end at {length:g} m "
                    f"({length_field}); allowed 0 to {length:g} m.",
                )
            )

    return past_end


def named_rows(data: dict[str, Any]) -> list[tuple[str, str | None, str]]:
    """Every named part of the plan, in order: (its name field's path, its name or None, how to call it). The
    driver first, then the nodes, every further segment's nodes, and the repeaters."""
    driver_name = sub(data, "driver").get("name", "driver")
    rows: list[tuple[str, str | None, str]] = [
        ("driver.name", driver_name if isinstance(driver_name, str) else None, "the driver")
    ]
    for prefix, holder, label in trunks(data):
        where = f" of s{label[1:]}" if label else ""
        for j, node in enumerate(items(holder, "nodes")):
            name = node.get("name") if isinstance(node, dict) else None
            rows.append((f"{prefix}nodes.{j}.name", name if isinstance(name, str) else None, f"node {j + 1}{where}"))
    for i, rep in enumerate(items(data, "repeaters")):
        name = rep.get("name") if isinstance(rep, dict) else None
        rows.append((f"repeaters.{i}.name", name if isinstance(name, str) else None, f"repeater {i + 1}"))
    return rows


def trunks(data: dict[str, Any]) -> list[tuple[str, dict[str, Any], str]]:
    """The plan's own trunk and every further segment (format 3): (field prefix, its fields, its label: "" for the
    plan's own, "Segment 1 ('store')" for segments.0)."""
    out: list[tuple[str, dict[str, Any], str]] = [("", data, "")]
    for i, seg in enumerate(items(data, "segments")):
        if isinstance(seg, dict):
            out.append((f"segments.{i}.", seg, segment_label(i, seg)))
    return out


def segment_label(i: int, seg: Any) -> str:
    """ "Segment 1 ('store')": further segment i (segments.i) as messages name it."""
    name = seg.get("name") if isinstance(seg, dict) else None
    return f"Segment {i + 1}" + (f" ('{name}')" if isinstance(name, str) else "")
