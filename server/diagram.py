"""SVG coordinates of the bus drawing: the trunk to scale, stubs, branches, nodes, terminators, bias and the driver.

Positions along the trunk are to scale. Stubs hang below the trunk, each drawn exactly proportional to its
length: on the trunk's scale when that keeps the longest stub within a hand's breadth of the drawing, otherwise
on a second scale of their own, which a scale bar beside the trunk shows and the caption states. Each node
carries its worst verdict, drawn as a coloured marker whose shape also differs (circle / diamond / square), so
the drawing reads without colour too. Node names run slanted from one line below the deepest stub; where nodes
crowd, names shift sideways along that line with a leader to their marker, and only where even that cannot
keep them apart is a name left to the marker's tooltip and the node table. The template only places what this
module computes.
"""

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

from pairline.engine.plan import BusPlan
from pairline.server.quantities import UnitSystem, length_in, length_text, length_unit

WIDTH_PX = 960.0
LEFT_PX = 70.0
RIGHT_PX = 110.0  # room for the last node's slanted label
RULER_Y_PX = 22.0  # the scale ruler runs across the top
LANE_PX = 28.0  # parts above the trunk (driver, terminators, bias) sit in lanes so their labels never overlap
LANES = 3  # lanes reserved above the trunk; more are added when parts need them
TRUNK_Y_PX = RULER_Y_PX + 18.0 + LANES * LANE_PX + 8.0
CHAR_PX = 6.6  # average label character width at the drawing's font size
STUB_MAX_PX = 90.0  # the longest stub is drawn at most this long
STUB_MIN_PX = 20.0  # and at least this long: shorter on the trunk's scale, stubs get a scale of their own
MARK_PX = 12.0  # a node marker's height below its stub's end
LABEL_CHARS = 16
LABEL_ANGLE_SIN = 0.7071  # names slant at 45°
LABEL_GAP_PX = 19.0  # between the starts of two slanted names: 19 x sin 45° = 13.4 px apart, more than a line
LABEL_SHIFT_PX = 6 * LABEL_GAP_PX  # how far a crowded name may move from its node, with a leader line


@dataclass(frozen=True, slots=True)
class Tick:
    x: float
    label: str


@dataclass(frozen=True, slots=True)
class NodeMark:
    name: str
    label: str  # possibly shortened; the full name goes in the SVG <title>
    x: float
    stub_top_y: float
    stub_bottom_y: float
    verdict: str  # "holds" / "tight" / "breaks" / "unchecked"
    role: str
    stub_text: str
    anchor: str  # id of the node's row in the per-node table
    show_label: bool = True  # False where nodes crowd too closely for every slanted label
    label_x: float = 0.0  # where the slanted name starts (on the common name line)
    label_y: float = 0.0
    reason: str = ""  # the rule ids that set the verdict, when it is not "holds"
    branch_x: float | None = None  # a branch's node: where its branch runs; its own stub goes across from there


@dataclass(frozen=True, slots=True)
class PartMark:
    x: float  # where it joins the trunk
    y: float  # top of its symbol, in its lane
    text: str
    title: str
    kind: str  # "terminator", "bias" or "driver"
    text_x: float  # label anchor point
    text_anchor: str  # "start" (label right of the symbol) or "end" (left of it, near the right edge)


def assign_lanes(items: list[tuple[float, float]]) -> list[int]:
    """Greedy interval packing: each (x, width) goes in the first lane whose last label ends left of x; a new
    lane opens when none is free, so labels never overlap."""
    order = sorted(range(len(items)), key=lambda i: items[i][0])
    lane_end: list[float] = []
    lanes = [0] * len(items)
    for i in order:
        x, width = items[i]
        lane = next((k for k, end in enumerate(lane_end) if end <= x - 4.0), len(lane_end))
        if lane == len(lane_end):
            lane_end.append(-1e9)
        lanes[i] = lane
        lane_end[lane] = max(lane_end[lane], x + width)
    return lanes


def lane_y(lane: int, trunk_y: float = TRUNK_Y_PX) -> float:
    """Top of a part symbol in a lane; lane 0 is nearest the trunk."""
    return trunk_y - 8.0 - (lane + 1) * LANE_PX + 6.0


@dataclass(frozen=True, slots=True)
class BusDrawing:
    width: float
    height: float
    trunk_x0: float
    trunk_x1: float
    trunk_y: float
    ruler_y: float
    px_per_m: float
    stub_px_per_m: float
    stub_bar: "ScaleBar | None"  # drawn when stubs have their own scale
    ticks: tuple[Tick, ...]
    nodes: tuple[NodeMark, ...]
    terminators: tuple[PartMark, ...]
    bias: tuple[PartMark, ...]  # one per bias network
    driver: NodeMark
    caption: str
    branches: tuple[NodeMark, ...] = ()  # each branch as a line down from its junction, its name on the name line


@dataclass(frozen=True, slots=True)
class ScaleBar:
    """A vertical bar of a round length on the stubs' own scale, beside the trunk's start."""

    x: float
    y_top: float
    y_bottom: float
    label: str


def x_of(position_m: float, trunk_length_m: float) -> float:
    """Horizontal pixel of a trunk position: linear from the left margin to the right margin."""
    return LEFT_PX + (WIDTH_PX - LEFT_PX - RIGHT_PX) * position_m / trunk_length_m


def _nice_step(span: float, target_ticks: int = 6) -> float:
    raw = span / target_ticks
    magnitude = 10.0 ** int(f"{raw:e}".split("e")[1])
    for mult in (1, 2, 2.5, 5, 10):
        if raw <= mult * magnitude:
            return float(mult * magnitude)
    return 10.0 * magnitude


def _short(name: str) -> str:
    return name if len(name) <= LABEL_CHARS else name[: LABEL_CHARS - 1] + "…"


def _length_text(value_m: float, units: UnitSystem) -> str:
    return length_text(value_m, units)


def node_anchor(index: int) -> str:
    return f"node-{index + 1}"


def branch_anchor(index: int) -> str:
    return f"branch-{index + 1}"


def bus_drawing(
    plan: BusPlan,
    node_verdicts: Mapping[str, str],
    units: UnitSystem,
    node_reasons: Mapping[str, str] | None = None,
    branch_verdicts: Mapping[str, str] | None = None,
) -> BusDrawing:
    """Lay out the bus. `node_verdicts` maps node (and driver) names to their worst verdict value,
    `node_reasons` to the rule ids that set it; `branch_verdicts` maps branch names to theirs.

    A branch hangs straight down from its junction like a stub, on the stubs' scale; its nodes sit along it at
    their distances, each on its own stub drawn across to the right on the same scale."""
    reasons = node_reasons or {}
    length_m = plan.trunk_length_m
    px_per_m = (WIDTH_PX - LEFT_PX - RIGHT_PX) / length_m
    along = {b.name: b for b in plan.branches}
    runs = [b.length_m for b in plan.branches] + [n.position_m for n in plan.nodes if n.branch in along]
    longest_stub_m = max([n.stub_length_m for n in plan.nodes] + [plan.driver.stub_length_m] + runs)
    stub_bar: ScaleBar | None = None
    stub_px_per_m = px_per_m
    if longest_stub_m <= 0 or STUB_MIN_PX <= longest_stub_m * px_per_m <= STUB_MAX_PX:
        caption_scale = "Stubs are drawn to the trunk's scale."
    else:
        stub_px_per_m = STUB_MAX_PX / longest_stub_m
        bar_m = _round_down(length_in(longest_stub_m, units))  # in the display unit
        bar_text = f"{bar_m:g} {length_unit(units)}"
        caption_scale = (
            f"Stubs are drawn to a scale of their own, {stub_px_per_m / px_per_m:.3g}× the trunk's: the bar at the "
            f"left is {bar_text} of stub."
        )
        bar_px = bar_m / length_in(1.0, units) * stub_px_per_m
        stub_bar = ScaleBar(x=LEFT_PX - 14.0, y_top=0.0, y_bottom=bar_px, label=bar_text)

    ticks: list[Tick] = []
    span = length_in(length_m, units)
    step = _nice_step(span)
    k = 0
    while k * step <= span * 1.0001:
        value = k * step
        ticks.append(Tick(LEFT_PX + (WIDTH_PX - LEFT_PX - RIGHT_PX) * value / span, f"{value:g}"))
        k += 1

    drv = plan.driver
    driver_text = f"{drv.name} (driver" + (
        f", stub {_length_text(drv.stub_length_m, units)})" if drv.stub_length_m else ")"
    )
    parts: list[tuple[str, float, str, str]] = [
        # The driver's label has a lane of its own width above the trunk: its full name fits.
        ("driver", x_of(drv.position_m, length_m), driver_text, f"Driver {drv.name}"),
    ]
    for i, t in enumerate(plan.terminations):
        text = _ohm_text(t.resistance_ohm) + (f" + {_farad_text(t.capacitance_f)}" if t.capacitance_f else "")
        title = f"Terminator {i + 1}: {t.kind} at {_length_text(t.position_m, units)}"
        parts.append(("terminator", x_of(t.position_m, length_m), text, title))
    for b in plan.bias:
        text = f"bias ↑{_ohm_text(b.pull_up_ohm)} ↓{_ohm_text(b.pull_down_ohm)}"
        parts.append(
            ("bias", x_of(b.position_m, length_m), text, f"Failsafe bias at {_length_text(b.position_m, units)}")
        )
    spans = []
    for _, x, text, _ in parts:
        width = 20.0 + CHAR_PX * len(text)
        spans.append((x - 8.0, width) if x + width <= WIDTH_PX else (x - width + 8.0, width))
    lanes = assign_lanes(spans)
    trunk_y = RULER_Y_PX + 18.0 + max(LANES, max(lanes) + 1) * LANE_PX + 8.0
    marks = [
        PartMark(
            x=x,
            y=lane_y(lane, trunk_y),
            text=text,
            title=title,
            kind=kind,
            text_x=x + 10.0 if start == x - 8.0 else x - 10.0,
            text_anchor="start" if start == x - 8.0 else "end",
        )
        for (kind, x, text, title), lane, (start, _) in zip(parts, lanes, spans, strict=True)
    ]

    nodes = []
    for i, node in enumerate(plan.nodes):
        mark = NodeMark(
            name=node.name,
            label=_short(node.name),
            x=x_of(node.position_m, length_m),
            stub_top_y=trunk_y,
            stub_bottom_y=trunk_y + node.stub_length_m * stub_px_per_m,
            verdict=node_verdicts.get(node.name, "unchecked"),
            role="transceiver" if node.may_drive else "receiver",
            stub_text=_length_text(node.stub_length_m, units) if node.stub_length_m > 0 else "",
            anchor=node_anchor(i),
            reason=reasons.get(node.name, ""),
        )
        if node.branch in along:  # down its branch, then across on its own stub
            x_branch = x_of(along[node.branch].junction_position_m, length_m)
            y = trunk_y + node.position_m * stub_px_per_m
            mark = replace(
                mark, x=x_branch + node.stub_length_m * stub_px_per_m, stub_top_y=y, stub_bottom_y=y, branch_x=x_branch
            )
        nodes.append(mark)
    branch_verdicts = branch_verdicts or {}
    branches = [
        NodeMark(
            name=b.name,
            label=f"{_short(b.name)} (branch)",
            x=x_of(b.junction_position_m, length_m),
            stub_top_y=trunk_y,
            stub_bottom_y=trunk_y + b.length_m * stub_px_per_m,
            verdict=branch_verdicts.get(b.name, "unchecked"),
            role="branch",
            stub_text=_length_text(b.length_m, units),
            anchor=branch_anchor(k),
            reason="stub.branch" if branch_verdicts.get(b.name, "holds") != "holds" else "",
        )
        for k, b in enumerate(plan.branches)
    ]
    # Names start on one line below the deepest marker, so slanted names run parallel and never cross; a
    # branch's name takes its place on that line like a node's.
    name_y = max([n.stub_bottom_y for n in [*nodes, *branches]], default=trunk_y) + MARK_PX + 14.0
    placed = _place_labels([*nodes, *branches], name_y)
    nodes, branches = placed[: len(nodes)], placed[len(nodes) :]
    if stub_bar is not None:
        stub_bar = replace(stub_bar, y_top=trunk_y, y_bottom=trunk_y + stub_bar.y_bottom)
    driver_mark = marks[0]
    driver = NodeMark(
        name=drv.name,
        label=driver_mark.text,
        x=driver_mark.x,
        stub_top_y=driver_mark.y + 14.0,
        stub_bottom_y=trunk_y,
        verdict=node_verdicts.get(drv.name, "unchecked"),
        role="driver",
        stub_text=_length_text(drv.stub_length_m, units) if drv.stub_length_m > 0 else "",
        anchor="driver",
    )
    terminators = tuple(m for m in marks if m.kind == "terminator")
    bias = tuple(m for m in marks if m.kind == "bias")
    # a branch's name follows its verdict marker along the slant, two characters on
    longest_label = max([len(n.label) for n in nodes if n.show_label] + [len(b.label) + 2 for b in branches], default=4)
    height = name_y + LABEL_ANGLE_SIN * CHAR_PX * longest_label + 12.0
    caption = (
        f"Trunk {_length_text(length_m, units)} drawn to scale; the driver ({drv.name}), terminators and bias sit "
        f"above it, nodes hang below on their stubs. {caption_scale}"
    )
    if branches:
        caption += (
            " Each branch hangs from its junction on the stubs' scale, its nodes along it at their distances, each "
            "on its own stub drawn across."
        )
    if any(not n.show_label for n in nodes):
        caption += " Where nodes crowd, some names are left out; point at a marker for its name, or see the table."
    return BusDrawing(
        width=WIDTH_PX,
        height=round(height, 1),
        trunk_x0=LEFT_PX,
        trunk_x1=WIDTH_PX - RIGHT_PX,
        trunk_y=trunk_y,
        ruler_y=RULER_Y_PX,
        px_per_m=px_per_m,
        stub_px_per_m=stub_px_per_m,
        stub_bar=stub_bar,
        ticks=tuple(ticks),
        nodes=tuple(nodes),
        terminators=terminators,
        bias=bias,
        driver=driver,
        caption=caption,
        branches=tuple(branches),
    )


def _round_down(value: float) -> float:
    """The largest 1, 2 or 5 times a power of ten at or below `value` (a scale bar's length)."""
    magnitude = 10.0 ** math.floor(math.log10(value))
    return next(m * magnitude for m in (5, 2, 1) if m * magnitude <= value * (1 + 1e-9))


def _ohm_text(value_ohm: float) -> str:
    if value_ohm >= 1e6:
        return f"{value_ohm / 1e6:.3g} MΩ"
    if value_ohm >= 1e3:
        return f"{value_ohm / 1e3:.3g} kΩ"
    return f"{value_ohm:.3g} Ω"


def _farad_text(value_f: float) -> str:
    for scale, prefix in ((1e-6, "µ"), (1e-9, "n"), (1e-12, "p")):
        if value_f >= scale:
            return f"{value_f / scale:.3g} {prefix}F"
    return f"{value_f:.3g} F"


def _place_labels(nodes: list[NodeMark], name_y: float) -> list[NodeMark]:
    """Start each slanted name on the line `name_y`, at least LABEL_GAP_PX after the one before it, moved at
    most LABEL_SHIFT_PX from its own node (a leader line joins them). Names that cannot be placed so are left
    out: first those of nodes that hold, so a node that does not hold keeps its name wherever it can."""
    rank = {"breaks": 0, "tight": 1}
    keep = set(range(len(nodes)))
    # More names than the line holds: keep every k-th along the trunk (and every node that does not hold), so
    # the names left are spread over the whole bus rather than bunched where the crowding is least.
    room = int((WIDTH_PX - LEFT_PX - RIGHT_PX) / LABEL_GAP_PX)
    if len(nodes) > room:
        along = sorted(range(len(nodes)), key=lambda i: nodes[i].x)
        step = math.ceil(len(nodes) / room)
        keep = {i for k, i in enumerate(along) if k % step == 0 or nodes[i].verdict in rank}
    while True:
        starts = _spread([nodes[i].x for i in sorted(keep, key=lambda i: nodes[i].x)])
        order = sorted(keep, key=lambda i: nodes[i].x)
        moved = {i: start for i, start in zip(order, starts, strict=True)}
        too_far = [i for i in order if abs(moved[i] - nodes[i].x) > LABEL_SHIFT_PX + 1e-9]
        if not too_far:
            break
        # Drop one name where the crowding is: the least urgent of the nodes that had to move too far.
        worst_spot = max(too_far, key=lambda i: (rank.get(nodes[i].verdict, 2), abs(moved[i] - nodes[i].x)))
        keep.discard(worst_spot)
    return [replace(n, show_label=i in keep, label_x=moved.get(i, n.x), label_y=name_y) for i, n in enumerate(nodes)]


def _spread(xs: list[float]) -> list[float]:
    """Positions as near as can be to the sorted `xs`, each at least LABEL_GAP_PX after the one before: a
    crowded group spreads around its middle rather than only to the right."""
    out: list[float] = []
    for x in xs:
        out.append(max(x, out[-1] + LABEL_GAP_PX) if out else x)
    # Pull each run of pushed names back so it sits centred on the nodes it stands for.
    i = 0
    while i < len(out):
        j = i
        while j + 1 < len(out) and out[j + 1] - out[j] <= LABEL_GAP_PX + 1e-9:
            j += 1
        if j > i:
            shift = sum(out[k] - xs[k] for k in range(i, j + 1)) / (j - i + 1)
            floor = out[i - 1] + LABEL_GAP_PX if i > 0 else -1e9
            shift = min(shift, out[i] - floor)
            for k in range(i, j + 1):
                out[k] -= shift
        i = j + 1
    return out
