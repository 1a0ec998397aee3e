"""Checks that involve more than one field of a plan document (version 2), run on the raw document so they are
reported alongside the field checks: positions past the trunk end, names used twice, an RC terminator without
its capacitor, unknown cable or device classes, a threshold window that is not a window, isolation without a
rating, a node that may drive on an RS-422 line, a node of its own values that may drive without an edge time."""

from collections.abc import Mapping
from typing import Any

from pairline.engine.library import CABLES, STANDARD_MINIMUM, TRANSCEIVERS, TransceiverClass
from pairline.engine.plan.model import DEFAULT_DEVICE, MAX_TRUNK_M, CableSpec
from pairline.engine.plan.problems import (
    Problem,
    allowed_of,
    field_info,
    range_text,
    row_label,
    short,
    value_text,
)
from pairline.engine.plan.raw import PastEnd, items, named_rows, num, past_end_check, sub, trunks
from pairline.engine.plan.topology import BusPlan
from pairline.engine.plan.topology_checks import topology_problems
from pairline.engine.units import si_format
from pydantic import BaseModel

__all__ = ["DEVICE_CHOICES", "class_problems", "cross_field_problems", "items", "num", "past_end_check"]


def shared_problems(data: dict[str, Any], past_end: PastEnd) -> list[Problem]:
    """Checks every format version shares: names, node and terminator positions, RC capacitors, probes, the
    tolerances' edge range, the cable class."""
    problems: list[Problem] = name_problems(data)
    past_end("driver.position_m", "Driver position", num(sub(data, "driver"), "position_m", 0.0))
    problems += trunk_problems(data, "", "", past_end)
    length = num(data, "trunk_length_m")
    for i, probe in enumerate(items(data, "probes")):
        if not isinstance(probe, dict):
            continue
        kind = probe.get("kind", "node")
        node_names = [name for path, name, _ in named_rows(data) if ".nodes." in f".{path}" and name is not None]
        if kind == "node" and probe.get("node") not in node_names:
            problems.append(
                Problem(
                    f"probes.{i}.node",
                    f"Probe {i + 1} node",
                    short(probe.get("node")),
                    {"choices": [n for n in node_names if isinstance(n, str)]},
                    f"Probe {i + 1} names node {short(probe.get('node'))!r}, which is not a node of this bus; "
                    f"choose one of the nodes (the driver's pins are probe kind 'driver_pin').",
                )
            )
        if kind == "junction":
            position = num(probe, "position_m")
            if position is None:
                problems.append(
                    Problem(
                        f"probes.{i}.position_m",
                        f"Probe {i + 1} trunk position",
                        None,
                        {"min": 0.0, "max": length, "unit": "m"},
                        f"Probe {i + 1} reads the trunk and needs a position; allowed 0 to "
                        f"{length if length is not None else MAX_TRUNK_M:g} m.",
                    )
                )
            past_end(f"probes.{i}.position_m", f"Probe {i + 1} trunk position", position)
    tolerances = sub(data, "tolerances")
    fastest, slowest = num(tolerances, "rise_time_min_s"), num(tolerances, "rise_time_max_s")
    if fastest is not None and slowest is not None and fastest > slowest:
        problems.append(
            Problem(
                "tolerances.rise_time_max_s",
                "Slowest driver edge",
                slowest,
                {"min": fastest, "unit": "s"},
                f"The slowest driver edge ({si_format(slowest, 's')}) is faster than the fastest "
                f"(tolerances.rise_time_min_s, {si_format(fastest, 's')}); it must be at least that.",
            )
        )
    problems += class_problems(
        data, "cable", "class_key", "pair-24awg-120", "Cable class", CABLES, CableSpec, _CABLE_VALUES
    )
    return problems


_CABLE_VALUES = ("z0_ohm", "velocity_factor", "resistance_ohm_per_m")  # what a cable of its own values must state


def name_problems(data: dict[str, Any]) -> list[Problem]:
    """Every node and repeater has its own name: a node belongs to one segment only."""
    problems: list[Problem] = []
    seen: dict[str, tuple[str, str]] = {}
    for path, name, what in named_rows(data):
        if name is None:
            continue
        if name in seen:
            other_path, other = seen[name]
            label = what[0].upper() + what[1:] + " name"
            problems.append(
                Problem(
                    path,
                    label,
                    name,
                    {"rule": "unique among the driver, every segment's nodes and the repeaters", "used_by": other_path},
                    f"{label} '{name}' is already used by {other} ({other_path}); every node belongs to one segment "
                    "and needs its own name.",
                )
            )
        else:
            seen[name] = (path, what)
    return problems


def within(label_prefix: str, what: str) -> str:
    """ "Segment 1 ('store') node 2 position" from "Segment 1 ('store') " and "Node 2 position"."""
    return f"{label_prefix}{what[0].lower()}{what[1:]}" if label_prefix else what


def trunk_problems(data: dict[str, Any], prefix: str, label_prefix: str, past_end: PastEnd) -> list[Problem]:
    """One trunk's rows (the plan's own, or a further segment's at `prefix`): node and terminator positions on it,
    an RC terminator's capacitor."""
    problems: list[Problem] = []
    for i, node in enumerate(items(data, "nodes")):
        if isinstance(node, dict) and node.get("branch") is None:  # a branch's node: along the branch
            name = node.get("name")
            shown = f" ('{name}')" if isinstance(name, str) else ""
            past_end(
                f"{prefix}nodes.{i}.position_m",
                within(label_prefix, f"Node {i + 1}{shown} position"),
                num(node, "position_m"),
            )
    for i, term in enumerate(items(data, "terminations")):
        if not isinstance(term, dict):
            continue
        label = within(label_prefix, f"Terminator {i + 1}")
        past_end(f"{prefix}terminations.{i}.position_m", f"{label} position", num(term, "position_m"))
        if term.get("kind") == "rc" and term.get("capacitance_f") is None:
            problems.append(
                Problem(
                    f"{prefix}terminations.{i}.capacitance_f",
                    f"{label} capacitance",
                    None,
                    {"min": 1e-12, "max": 100e-6, "unit": "F"},
                    f"{label} is an RC terminator and needs a capacitance; allowed 1 pF to 100 µF.",
                )
            )
    return problems


def class_problems(
    data: dict[str, Any],
    part: str,
    key_field: str,
    default_key: str,
    label: str,
    library: Mapping[str, Any],
    model: type[BaseModel],
    custom_fields: tuple[str, ...],
    prefix: str = "",
) -> list[Problem]:
    """A part that names a library class (the cable, a format-1 driver): the class is known, or with no class
    (null) the values a custom part needs are given. prefix: where `data` sits in the plan ("segments.1.")."""
    given = sub(data, part)
    key = given.get(key_field, default_key)
    path = f"{prefix}{part}.{key_field}"
    if isinstance(key, str) and key not in library:
        return [
            Problem(
                path,
                label,
                short(key),
                {"choices": sorted(library)},
                f"{label} '{short(key)}' is not in the library; choose one of {', '.join(sorted(library))}, or "
                "leave it empty and enter custom values.",
            )
        ]
    if key is not None:
        return []
    return [
        missing_custom(f"{prefix}{part}", model.model_fields[k], k, path) for k in custom_fields if given.get(k) is None
    ]


def missing_custom(prefix: str, info: Any, key: str, class_field: str, why: str = "", label: str = "") -> Problem:
    """A value a custom class needs: "Driver rise time is needed when no class is chosen (...); allowed ..."."""
    allowed = allowed_of(info)
    because = why or f"no class is chosen ({class_field} is empty)"
    shown = label or info.title or key
    return Problem(
        f"{prefix}.{key}", shown, None, allowed, f"{shown} is needed when {because}; allowed {range_text(allowed)}."
    )


DEVICE_CHOICES: list[str | None] = [*sorted(TRANSCEIVERS), None]


def cross_field_problems(data: dict[str, Any]) -> list[Problem]:
    """Every cross-field problem of a version-3 document (see the module docstring); a version-2 document is one
    with none of version 3's additions."""
    problems: list[Problem] = []
    past_end = past_end_check(data, problems)
    problems += shared_problems(data, past_end)
    standard = data.get("standard", "rs485")
    four_wire = isinstance(data.get("four_wire"), dict)
    default_key = data.get("default_device", DEFAULT_DEVICE)
    if not isinstance(default_key, str) or default_key not in TRANSCEIVERS:
        problems.append(_unknown_class("default_device", "Default device class", default_key, own_values=False))
        default_key = None
    problems += _device_problems(data, "driver.device", sub(data, "driver").get("device"), default_key, True)
    for prefix, trunk, label in trunks(data):
        label_prefix = f"{label} " if label else ""
        if prefix:
            ends = past_end_check(trunk, problems, f"{prefix}trunk_length_m")
            problems += trunk_problems(trunk, prefix, label_prefix, ends)
            if isinstance(trunk.get("cable"), dict):
                problems += class_problems(
                    trunk,
                    "cable",
                    "class_key",
                    "pair-24awg-120",
                    "Cable class",
                    CABLES,
                    CableSpec,
                    _CABLE_VALUES,
                    prefix,
                )
        else:
            ends = past_end
        for i, bias in enumerate(items(trunk, "bias")):
            if isinstance(bias, dict):
                label = within(label_prefix, f"Bias network {i + 1} position")
                ends(f"{prefix}bias.{i}.position_m", label, num(bias, "position_m", 0.0))
        for i, node in enumerate(items(trunk, "nodes")):
            if not isinstance(node, dict):
                continue
            talks = node.get("may_drive") is True
            if standard == "rs422" and talks and not four_wire:
                problems.append(rs422_talker_problem(i, node, "may_drive", True, False, "may drive", prefix))
            talks = talks and (standard == "rs485" or four_wire)
            problems += _device_problems(data, f"{prefix}nodes.{i}.device", node.get("device"), default_key, talks)
    for i, rep in enumerate(items(data, "repeaters")):
        if isinstance(rep, dict):
            problems += _device_problems(data, f"repeaters.{i}.device", rep.get("device"), default_key, True)
    return problems + topology_problems(data)


def rs422_talker_problem(
    i: int, node: dict[str, Any], key: str, value: Any, allowed: Any, says: str, prefix: str = ""
) -> Problem:
    """Node i would drive an RS-422 line, which has one driver: "Node 3 ('pump') may drive, but ..."."""
    name = node.get("name")
    shown = f" ('{name}')" if isinstance(name, str) else ""
    label = f"Node {i + 1}{shown} {key.replace('_', ' ')}"
    return Problem(
        f"{prefix}nodes.{i}.{key}",
        label,
        value,
        {"choices": [allowed], "because": "standard is rs422"},
        f"Node {i + 1}{shown} {says}, but an RS-422 bus has one driver and receivers only (standard); allowed: "
        f"{str(allowed).lower() if isinstance(allowed, bool) else allowed}. Make it a receiver or choose RS-485.",
    )


def _unknown_class(path: str, label: str, key: Any, own_values: bool = True) -> Problem:
    """A class key the library does not hold; a device (not the plan's default) may also be given by its own
    values."""
    choices = sorted(TRANSCEIVERS)
    return Problem(
        path,
        label,
        short(key),
        {"choices": DEVICE_CHOICES if own_values else choices},
        f"{label} '{short(key)}' is not in the library; choose one of {', '.join(choices)}"
        + (", or give the device's own values (class_key null)." if own_values else "."),
    )


def _device_problems(
    data: dict[str, Any], prefix: str, raw: Any, default_key: str | None, talks: bool
) -> list[Problem]:
    """One device: its class is known, its window is a window, an isolated one has a rating, a driver model is
    given one way only, and a device of its own values that may drive states its edge time."""
    if raw is None:
        return []
    given: dict[str, Any] = raw if isinstance(raw, dict) else {}
    key_path = prefix if isinstance(raw, str) else f"{prefix}.class_key"
    key = raw if isinstance(raw, str) else given.get("class_key", default_key)
    if not isinstance(raw, str | dict):
        return []  # the field check reports it
    loc = tuple(int(p) if p.isdigit() else p for p in prefix.split("."))

    def label(field: str) -> str:
        info = field_info(BusPlan, (*loc, field))
        return row_label((*loc, field), data, info.title if info and info.title else field)

    if key is not None and (not isinstance(key, str) or key not in TRANSCEIVERS):
        return [_unknown_class(key_path, label("class_key"), key)]
    base: TransceiverClass = TRANSCEIVERS[key] if key is not None else STANDARD_MINIMUM
    problems: list[Problem] = []

    def value(field: str) -> Any:
        return given[field] if given.get(field) is not None else getattr(base, field)

    low, high = num({"v": value("threshold_low_v")}, "v"), num({"v": value("threshold_high_v")}, "v")
    typed = [f for f in ("threshold_high_v", "threshold_low_v") if given.get(f) is not None]
    if low is not None and high is not None and low >= high:
        field = typed[0] if typed else "threshold_high_v"
        problems.append(
            Problem(
                f"{prefix}.{field}",
                label(field),
                given.get(field, value(field)),
                {"rule": "threshold_high_v above threshold_low_v", "threshold_low_v": low, "threshold_high_v": high},
                f"{label(field)}: the window from {value_text(low, 'V')} (low threshold) to {value_text(high, 'V')} "
                f"(high threshold) is not a window; the high threshold must be above the low one "
                f"({prefix}.threshold_low_v, {prefix}.threshold_high_v).",
            )
        )
    elif high is not None and value("failsafe") == "idle_bus" and high >= 0.0:
        field = "threshold_high_v" if given.get("threshold_high_v") is not None else "failsafe"
        problems.append(
            Problem(
                f"{prefix}.{field}",
                label(field),
                given.get(field, value(field)),
                {"max": 0.0, "max_exclusive": True, "unit": "V", "because": "failsafe is idle_bus"},
                f"{label(field)}: an idle-bus failsafe receiver reads 0 V as a 1, so its high threshold must be below "
                f"0 V; it is {value_text(high, 'V')} ({prefix}.threshold_high_v). Lower it, or choose failsafe "
                "none or open_short.",
            )
        )
    if value("isolated") is True and value("isolation_rating_vrms") is None:
        problems.append(
            missing_custom(
                prefix,
                field_info(BusPlan, (*loc, "isolation_rating_vrms")),
                "isolation_rating_vrms",
                "",
                f"the device is isolated ({prefix}.isolated): the rating decides what ground offset it may stand",
                label("isolation_rating_vrms"),
            )
        )
    if given.get("output_54_ohm_v") is not None:
        both = [f for f in ("open_circuit_v", "source_ohm") if given.get(f) is not None]
        if both:
            problems.append(
                Problem(
                    f"{prefix}.output_54_ohm_v",
                    label("output_54_ohm_v"),
                    given["output_54_ohm_v"],
                    {"rule": "either output_54_ohm_v, or open_circuit_v with source_ohm", "also_given": both},
                    f"{label('output_54_ohm_v')}: give the driver's output one way, either its minimum into 54 Ω "
                    f"or its open-circuit voltage with its source resistance, not both "
                    f"({' and '.join(f'{prefix}.{f}' for f in both)} {'is' if len(both) == 1 else 'are'} also given).",
                )
            )
    if talks and key is None and given.get("rise_time_s") is None:
        problems.append(
            missing_custom(
                prefix,
                field_info(BusPlan, (*loc, "rise_time_s")),
                "rise_time_s",
                "",
                "the device is given by its own values and the node may drive",
                label("rise_time_s"),
            )
        )
    return problems
