"""Cross-field checks of what format 3 adds (engine.plan.topology), on the raw document: segments joined into a tree
by repeaters that sit on their segments, branches that leave their trunk from a point on it and carry their
nodes within their length, and a four-wire plan with its master and no crossed pair."""

from typing import Any

from pairline.engine.library import TRANSCEIVERS
from pairline.engine.plan.model import DEFAULT_DEVICE, MAX_NODES
from pairline.engine.plan.problems import Problem, short
from pairline.engine.plan.raw import items, num, past_end_check, segment_label, sub, trunks
from pairline.engine.plan.topology import MAIN_SEGMENT


def topology_problems(data: dict[str, Any]) -> list[Problem]:
    """Every problem of the segments, the repeaters and the four-wire pair (none for a plan of one bus)."""
    return _segment_problems(data) + _repeater_problems(data) + _branch_problems(data) + _four_wire_problems(data)


def _branch_problems(data: dict[str, Any]) -> list[Problem]:
    """Each trunk's branches: unique names, a junction on the trunk; a node names a branch of its own trunk and sits
    within that branch's length. A four-wire plan has no branch."""
    problems: list[Problem] = []
    for prefix, trunk, label in trunks(data):
        where = f"{label} " if label else ""
        past_end = past_end_check(trunk, problems, f"{prefix}trunk_length_m")
        lengths: dict[str, float | None] = {}
        for i, branch in enumerate(items(trunk, "branches")):
            if not isinstance(branch, dict):
                continue
            name = branch.get("name")
            shown = f"{where}branch {i + 1}" + (f" ('{name}')" if isinstance(name, str) else "")
            shown = shown[0].upper() + shown[1:]
            past_end(
                f"{prefix}branches.{i}.junction_position_m", f"{shown} junction", num(branch, "junction_position_m")
            )
            if not isinstance(name, str):
                continue
            if name in lengths:
                problems.append(
                    Problem(
                        f"{prefix}branches.{i}.name",
                        f"{shown} name",
                        name,
                        {"rule": "unique among the branches of one trunk"},
                        f"{shown} name '{name}' is already used by another branch of this trunk; every branch needs "
                        "its own name (its nodes name it).",
                    )
                )
                continue
            lengths[name] = num(branch, "length_m")
        for i, node in enumerate(items(trunk, "nodes")):
            branch_name = node.get("branch") if isinstance(node, dict) else None
            if not isinstance(branch_name, str) or not isinstance(node, dict):
                continue  # on the trunk, or not a name (the field check reports that)
            node_name = node.get("name")
            shown = f"{where}node {i + 1}" + (f" ('{node_name}')" if isinstance(node_name, str) else "")
            shown = shown[0].upper() + shown[1:]
            if branch_name not in lengths:
                choices = list(lengths)
                allowed = (
                    f"one of {', '.join(repr(c) for c in choices)}" if choices else "none: this trunk has no branch"
                )
                problems.append(
                    Problem(
                        f"{prefix}nodes.{i}.branch",
                        f"{shown} branch",
                        short(branch_name),
                        {"choices": [None, *choices]},
                        f"{shown} hangs on branch {short(branch_name)!r}, which is not a branch of its trunk; allowed "
                        f"{allowed}, or empty for the trunk itself.",
                    )
                )
                continue
            length, position = lengths[branch_name], num(node, "position_m")
            if length is not None and position is not None and position > length:
                problems.append(
                    Problem(
                        f"{prefix}nodes.{i}.position_m",
                        f"{shown} position",
                        position,
                        {"min": 0.0, "max": length, "unit": "m"},
                        f"{shown} is {position:g} m along branch '{branch_name}', past that branch's end at "
                        f"{length:g} m; allowed 0 to {length:g} m (a node's position on a branch is measured "
                        "along it from its junction).",
                    )
                )
    if isinstance(data.get("four_wire"), dict) and items(data, "branches"):
        problems.append(
            Problem(
                "branches",
                "Branches",
                len(items(data, "branches")),
                {"rule": "no branches on a four-wire plan"},
                "A four-wire plan is checked here as two straight pairs: lay its slaves along the trunk (each on "
                "its stub), or remove the four_wire return pair to keep the branches.",
            )
        )
    return problems


def _main_name(data: dict[str, Any]) -> str | None:
    name = data.get("segment_name", MAIN_SEGMENT)
    return name if isinstance(name, str) else None


def _segments_by_name(data: dict[str, Any]) -> dict[str, tuple[str, dict[str, Any]]]:
    """Each segment's name -> (its field prefix, its fields); the master's segment is the plan itself."""
    out: dict[str, tuple[str, dict[str, Any]]] = {}
    main = _main_name(data)
    if main is not None:
        out[main] = ("", data)
    for i, seg in enumerate(items(data, "segments")):
        name = seg.get("name") if isinstance(seg, dict) else None
        if isinstance(name, str) and name not in out:
            out[name] = (f"segments.{i}.", seg)
    return out


def _segment_problems(data: dict[str, Any]) -> list[Problem]:
    """Segment names are unique; a further segment holds a node or feeds a repeater; all the nodes together fit."""
    problems: list[Problem] = []
    main = _main_name(data)
    seen = {main: "the master's segment (segment_name)"} if main is not None else {}
    feeding = {r.get("upstream_segment") for r in items(data, "repeaters") if isinstance(r, dict)}
    for i, seg in enumerate(items(data, "segments")):
        if not isinstance(seg, dict):
            continue
        label = segment_label(i, seg)
        name = seg.get("name")
        if isinstance(name, str) and name in seen:
            problems.append(
                Problem(
                    f"segments.{i}.name",
                    f"Segment {i + 1} name",
                    name,
                    {"rule": "unique among the segments, the master's segment_name included"},
                    f"Segment {i + 1} name '{name}' is already used by {seen[name]}; every segment needs its own name.",
                )
            )
        elif isinstance(name, str):
            seen[name] = f"segment {i + 1} (segments.{i}.name)"
        if not items(seg, "nodes") and name not in feeding:
            problems.append(
                Problem(
                    f"segments.{i}.nodes",
                    f"{label} nodes",
                    0,
                    {"min_length": 1, "rule": "a node, or a repeater to a further segment"},
                    f"{label} has no node and feeds no repeater: give it the nodes it serves, or remove it and the "
                    "repeater that drives it.",
                )
            )
    total = sum(len(items(trunk, "nodes")) for _, trunk, _ in trunks(data))
    if total > MAX_NODES:
        problems.append(
            Problem(
                "segments",
                "Nodes in all segments",
                total,
                {"max": MAX_NODES},
                f"The segments hold {total} nodes together; a plan may hold at most {MAX_NODES}.",
            )
        )
    return problems


def _repeater_problems(data: dict[str, Any]) -> list[Problem]:
    """Each repeater joins two segments of the plan at positions on them; the segments form a tree rooted at the
    master's segment, each further segment driven by exactly one repeater."""
    problems: list[Problem] = []
    segments = _segments_by_name(data)
    main = _main_name(data)
    choices = list(segments)
    fed_by: dict[str, int] = {}
    parent: dict[str, str] = {}
    for i, rep in enumerate(items(data, "repeaters")):
        if not isinstance(rep, dict):
            continue
        shown = f"Repeater {i + 1}" + (f" ('{rep['name']}')" if isinstance(rep.get("name"), str) else "")
        ends = {}
        for side in ("upstream", "downstream"):
            field = f"repeaters.{i}.{side}_segment"
            name = rep.get(f"{side}_segment")
            if not isinstance(name, str):
                continue  # the field check reports it
            if name not in segments:
                problems.append(
                    Problem(
                        field,
                        f"{shown} {side} segment",
                        short(name),
                        {"choices": choices},
                        f"{shown} {side} segment '{short(name)}' is not a segment of this plan; allowed one of "
                        f"{', '.join(choices)}.",
                    )
                )
                continue
            ends[side] = name
            prefix, seg = segments[name]
            where = f"segment '{name}'"
            past = past_end_check(seg, problems, f"{prefix}trunk_length_m")
            past(
                f"repeaters.{i}.{side}_position_m",
                f"{shown} {side} position (on {where})",
                num(rep, f"{side}_position_m", 0.0),
            )
        if rep.get("downstream_ground_offset_v") is not None and not _isolated(data, rep):
            problems.append(
                Problem(
                    f"repeaters.{i}.downstream_ground_offset_v",
                    f"{shown} downstream port ground offset",
                    short(rep["downstream_ground_offset_v"]),
                    {"choices": [None], "because": "the repeater's device is not isolated"},
                    f"{shown} is not isolated, so both its ports stand on its own ground (ground_offset_v); leave "
                    "the downstream port's ground offset empty, or give the repeater an isolated device.",
                )
            )
        up, down = ends.get("upstream"), ends.get("downstream")
        if down is not None and down == main:
            problems.append(_into_main(i, shown, down, [c for c in choices if c != main]))
        elif down is not None and up == down:
            problems.append(
                Problem(
                    f"repeaters.{i}.downstream_segment",
                    f"{shown} downstream segment",
                    down,
                    {"choices": [c for c in choices if c not in (up, main)]},
                    f"{shown} joins segment '{down}' to itself; its downstream segment must be another one.",
                )
            )
        elif down is not None and down in fed_by:
            j = fed_by[down]
            problems.append(
                Problem(
                    f"repeaters.{i}.downstream_segment",
                    f"{shown} downstream segment",
                    down,
                    {"rule": "each further segment driven by one repeater (a tree from the master's segment)"},
                    f"{shown} drives segment '{down}', which repeater {j + 1} (repeaters.{j}) drives already: two "
                    f"repeaters into one segment close a loop. The segments must form a tree from the master's "
                    f"segment '{main}'.",
                )
            )
        elif down is not None and up is not None:
            fed_by[down] = i
            parent[down] = up
    problems += _unreached(data, main, fed_by, parent)
    return problems


def _isolated(data: dict[str, Any], rep: dict[str, Any]) -> bool:
    """Whether a raw repeater's device is isolated (its own value, else its class's, else the default class's)."""
    device = rep.get("device")
    key = device if isinstance(device, str) else device.get("class_key") if isinstance(device, dict) else None
    if isinstance(device, dict) and isinstance(device.get("isolated"), bool):
        return bool(device["isolated"])
    key = key if key is not None or isinstance(device, dict) else data.get("default_device", DEFAULT_DEVICE)
    return isinstance(key, str) and key in TRANSCEIVERS and TRANSCEIVERS[key].isolated


def _into_main(i: int, shown: str, main: str, allowed: list[str]) -> Problem:
    return Problem(
        f"repeaters.{i}.downstream_segment",
        f"{shown} downstream segment",
        main,
        {"choices": allowed},
        f"{shown} would drive '{main}', the master's segment, which the master drives; a repeater drives a further "
        f"segment: allowed one of {', '.join(allowed) or '(no further segment yet)'}.",
    )


def _unreached(data: dict[str, Any], main: str | None, fed_by: dict[str, int], parent: dict[str, str]) -> list[Problem]:
    """Further segments no repeater drives, and repeaters joined in a loop away from the master's segment."""
    problems: list[Problem] = []
    reported: set[str] = set()
    for i, seg in enumerate(items(data, "segments")):
        name = seg.get("name") if isinstance(seg, dict) else None
        if not isinstance(name, str) or name == main or name in reported:
            continue
        if name not in fed_by:
            problems.append(
                Problem(
                    f"segments.{i}.name",
                    f"{segment_label(i, seg)} name",
                    name,
                    {"rule": "a repeater's downstream_segment"},
                    f"{segment_label(i, seg)} is joined to nothing: no repeater drives it (names it as its "
                    "downstream_segment). Add the repeater that feeds it, or remove the segment.",
                )
            )
            continue
        path = [name]
        while path[-1] in parent and parent[path[-1]] != main and parent[path[-1]] not in path:
            path.append(parent[path[-1]])
        if path[-1] in parent and parent[path[-1]] in path:
            loop = path[path.index(parent[path[-1]]) :]
            reported.update(loop)
            k = fed_by[loop[0]]
            problems.append(
                Problem(
                    f"repeaters.{k}.downstream_segment",
                    f"Repeater {k + 1} downstream segment",
                    loop[0],
                    {"rule": "the segments form a tree rooted at the master's segment"},
                    f"Segments {', '.join(repr(s) for s in loop)} are joined to each other in a loop by their "
                    f"repeaters and to the master's segment '{main}' by none; the segments must form a tree rooted "
                    "at it.",
                )
            )
    return problems


def _four_wire_problems(data: dict[str, Any]) -> list[Problem]:
    """A four-wire plan names its master (the plan's driver), is one segment, and no slave drives the transmit
    pair; a two-wire plan states no pair for its nodes."""
    four_wire = data.get("four_wire")
    problems: list[Problem] = []
    if not isinstance(four_wire, dict):
        for prefix, trunk, _ in trunks(data):
            for i, node in enumerate(items(trunk, "nodes")):
                if isinstance(node, dict) and node.get("drives_pair") is not None:
                    problems.append(
                        Problem(
                            f"{prefix}nodes.{i}.drives_pair",
                            f"Node {i + 1} pair it drives",
                            short(node["drives_pair"]),
                            {"choices": [None], "because": "a two-wire plan (no four_wire)"},
                            f"Node {i + 1} states the pair it drives, but this is a two-wire plan whose one pair "
                            "carries both directions; leave it empty, or describe the four_wire return pair.",
                        )
                    )
        return problems
    driver = sub(data, "driver").get("name", "driver")
    master = four_wire.get("master")
    if master is None or master != driver:
        names = [n.get("name") for n in items(data, "nodes") if isinstance(n, dict)]
        if master is None:
            said = "A four-wire plan needs its master, and four_wire.master is empty"
        elif master in names:
            said = f"Four-wire master '{short(master)}' is a slave node of this plan, not its driver"
        else:
            said = f"Four-wire master {short(master)!r} is no node of this plan"
        problems.append(
            Problem(
                "four_wire.master",
                "Four-wire master",
                short(master),
                {"choices": [driver]},
                f"{said}; allowed: '{driver}', the plan's driver, which drives the transmit pair and listens on the "
                "return pair (make the master the plan's driver).",
            )
        )
    if items(data, "segments") or items(data, "repeaters"):
        problems.append(
            Problem(
                "four_wire",
                "Four-wire return pair",
                {"type": "object"},
                {"rule": "one segment: no segments or repeaters beside four_wire"},
                "A four-wire plan is one segment here: Pairline checks repeaters and further segments on two-wire "
                "buses only. Remove the segments and repeaters, or the four_wire return pair.",
            )
        )
    for i, node in enumerate(items(data, "nodes")):
        if isinstance(node, dict) and node.get("drives_pair") == "transmit":
            shown = f"Node {i + 1}" + (f" ('{node['name']}')" if isinstance(node.get("name"), str) else "")
            problems.append(
                Problem(
                    f"nodes.{i}.drives_pair",
                    f"{shown} pair it drives",
                    "transmit",
                    {"choices": ["return"]},
                    f"{shown} drives the transmit pair, which the master '{driver}' drives: a crossed pair. Its "
                    "driver would fight the master's and the master would never hear it; allowed: return. Connect "
                    "the slave's driver outputs to the return pair and its receiver inputs to the transmit pair.",
                )
            )
    past_end = past_end_check(data, problems)
    for key, what in (("return_terminations", "terminator"), ("return_bias", "bias network")):
        for i, row in enumerate(items(four_wire, key)):
            if isinstance(row, dict):
                past_end(
                    f"four_wire.{key}.{i}.position_m",
                    f"Return-pair {what} {i + 1} position",
                    num(row, "position_m", 0.0),
                )
    for i, term in enumerate(items(four_wire, "return_terminations")):
        if isinstance(term, dict) and term.get("kind") == "rc" and term.get("capacitance_f") is None:
            problems.append(
                Problem(
                    f"four_wire.return_terminations.{i}.capacitance_f",
                    f"Return-pair terminator {i + 1} capacitance",
                    None,
                    {"min": 1e-12, "max": 100e-6, "unit": "F"},
                    f"Return-pair terminator {i + 1} is an RC terminator and needs a capacitance; allowed 1 pF to "
                    "100 µF.",
                )
            )
    return problems
