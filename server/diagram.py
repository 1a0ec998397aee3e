"""SVG coordinates of the bus drawing: the trunk to scale, stubs, nodes, terminators, bias and the driver.

Positions along the trunk are to scale. Stubs hang below the trunk; they share the trunk's scale when that
makes the longest stub visible, otherwise they get their own vertical scale and the caption says so. Each node
carries its worst verdict, drawn as a coloured marker whose shape also differs (circle / diamond / square), so
the drawing reads without colour too. The template only places what this module computes.
"""

from collections.abc import Mapping
from dataclasses import dataclass, replace

from pairline.engine.plan import BusPlan
from pairline.server.quantities import UnitSystem, length_in, length_text

WIDTH_PX = 960.0
LEFT_PX = 70.0
RIGHT_PX = 110.0  # room for the last node's slanted label
RULER_Y_PX = 22.0  # the scale ruler runs across the top
LANE_PX = 28.0  # parts above the trunk (driver, terminators, bias) sit in lanes so their labels never overlap
LANES = 3
TRUNK_Y_PX = RULER_Y_PX + 18.0 + LANES * LANE_PX + 8.0
CHAR_PX = 6.6  # average label character width at the drawing's font size
STUB_MIN_PX = 14.0  # a zero-length stub still shows its node just under the trunk
STUB_MAX_PX = 90.0
LABEL_CHARS = 16
LABEL_GAP_PX = 16.0  # slanted labels need this much horizontal room each (11 px text / sin 40°)


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
    """Greedy interval packing: each (x, width) goes in the first lane whose last label ends left of x.
    Items past the last lane share the top lane (overlap is then unavoidable and rare)."""
    order = sorted(range(len(items)), key=lambda i: items[i][0])
    lane_end = [-1e9] * LANES
    lanes = [0] * len(items)
    for i in order:
        x, width = items[i]
        lane = next((k for k in range(LANES) if lane_end[k] <= x - 4.0), LANES - 1)
        lanes[i] = lane
        lane_end[lane] = max(lane_end[lane], x + width)
    return lanes


def lane_y(lane: int) -> float:
    """Top of a part symbol in a lane; lane 0 is nearest the trunk."""
    return TRUNK_Y_PX - 8.0 - (lane + 1) * LANE_PX + 6.0


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
    ticks: tuple[Tick, ...]
    nodes: tuple[NodeMark, ...]
    terminators: tuple[PartMark, ...]
    bias: PartMark | None
    driver: NodeMark
    caption: str


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


def bus_drawing(plan: BusPlan, node_verdicts: Mapping[str, str], units: UnitSystem) -> BusDrawing:
    """Lay out the bus. `node_verdicts` maps node (and driver) names to their worst verdict value."""
    length_m = plan.trunk_length_m
    px_per_m = (WIDTH_PX - LEFT_PX - RIGHT_PX) / length_m
    longest_stub_m = max([n.stub_length_m for n in plan.nodes] + [plan.driver.stub_length_m])
    room_px = STUB_MAX_PX - STUB_MIN_PX
    if longest_stub_m <= 0:
        stub_px_per_m, caption_scale = px_per_m, "Stubs to the trunk's scale."
    elif longest_stub_m * px_per_m >= 20.0 and longest_stub_m * px_per_m <= room_px:
        stub_px_per_m, caption_scale = px_per_m, "Stubs to the trunk's scale."
    else:
        stub_px_per_m = room_px / longest_stub_m
        factor = stub_px_per_m / px_per_m
        caption_scale = f"Stubs drawn {factor:.3g}× the trunk's scale (each length is in the node table)."

    ticks: list[Tick] = []
    span = length_in(length_m, units)
    step = _nice_step(span)
    k = 0
    while k * step <= span * 1.0001:
        value = k * step
        ticks.append(Tick(LEFT_PX + (WIDTH_PX - LEFT_PX - RIGHT_PX) * value / span, f"{value:g}"))
        k += 1

    nodes = []
    for i, node in enumerate(plan.nodes):
        stub_px = STUB_MIN_PX + node.stub_length_m * stub_px_per_m
        nodes.append(
            NodeMark(
                name=node.name,
                label=_short(node.name),
                x=x_of(node.position_m, length_m),
                stub_top_y=TRUNK_Y_PX,
                stub_bottom_y=TRUNK_Y_PX + stub_px,
                verdict=node_verdicts.get(node.name, "unchecked"),
                role=node.role,
                stub_text=_length_text(node.stub_length_m, units) if node.stub_length_m > 0 else "",
                anchor=node_anchor(i),
            )
        )
    nodes = _thin_labels(nodes)
    drv = plan.driver
    parts: list[tuple[str, float, str, str]] = [
        # The driver's label has a lane of its own width above the trunk: its full name fits.
        ("driver", x_of(drv.position_m, length_m), f"{drv.name} (driver)", f"Driver {drv.name}"),
    ]
    for i, t in enumerate(plan.terminations):
        text = _ohm_text(t.resistance_ohm) + (f" + {_farad_text(t.capacitance_f)}" if t.capacitance_f else "")
        title = f"Terminator {i + 1}: {t.kind} at {_length_text(t.position_m, units)}"
        parts.append(("terminator", x_of(t.position_m, length_m), text, title))
    if plan.bias is not None:
        b = plan.bias
        text = f"bias ↑{_ohm_text(b.pull_up_ohm)} ↓{_ohm_text(b.pull_down_ohm)}"
        parts.append(
            ("bias", x_of(b.position_m, length_m), text, f"Failsafe bias at {_length_text(b.position_m, units)}")
        )
    spans = []
    for _, x, text, _ in parts:
        width = 20.0 + CHAR_PX * len(text)
        spans.append((x - 8.0, width) if x + width <= WIDTH_PX else (x - width + 8.0, width))
    lanes = assign_lanes(spans)
    marks = [
        PartMark(
            x=x,
            y=lane_y(lane),
            text=text,
            title=title,
            kind=kind,
            text_x=x + 10.0 if start == x - 8.0 else x - 10.0,
            text_anchor="start" if start == x - 8.0 else "end",
        )
        for (kind, x, text, title), lane, (start, _) in zip(parts, lanes, spans, strict=True)
    ]
    driver_mark = marks[0]
    driver = NodeMark(
        name=drv.name,
        label=driver_mark.text,
        x=driver_mark.x,
        stub_top_y=driver_mark.y + 14.0,
        stub_bottom_y=TRUNK_Y_PX,
        verdict=node_verdicts.get(drv.name, "unchecked"),
        role="driver",
        stub_text=_length_text(drv.stub_length_m, units) if drv.stub_length_m > 0 else "",
        anchor="driver",
    )
    terminators = tuple(m for m in marks if m.kind == "terminator")
    bias = next((m for m in marks if m.kind == "bias"), None)
    # Labels slant at 40°: they drop by about sin(40°) of their length below the node marker.
    lowest = max([n.stub_bottom_y for n in nodes], default=TRUNK_Y_PX)
    longest_label = max((len(n.label) for n in nodes), default=4)
    height = lowest + 18.0 + 0.65 * CHAR_PX * longest_label + 8.0
    caption = (
        f"Trunk {_length_text(length_m, units)} drawn to scale; the driver ({drv.name}), terminators and bias sit "
        "above it, "
        f"nodes hang below on their stubs. " + caption_scale
    )
    if any(not n.show_label for n in nodes):
        caption += " Where nodes crowd, some names are left out; point at a marker for its name, or see the table."
    return BusDrawing(
        width=WIDTH_PX,
        height=round(height, 1),
        trunk_x0=LEFT_PX,
        trunk_x1=WIDTH_PX - RIGHT_PX,
        trunk_y=TRUNK_Y_PX,
        ruler_y=RULER_Y_PX,
        px_per_m=px_per_m,
        stub_px_per_m=stub_px_per_m,
        ticks=tuple(ticks),
        nodes=tuple(nodes),
        terminators=terminators,
        bias=bias,
        driver=driver,
        caption=caption,
    )


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


def _thin_labels(nodes: list[NodeMark]) -> list[NodeMark]:
    """Keep labels at least LABEL_GAP_PX apart: nodes that do not hold get theirs first, then the rest left to
    right. A dropped label still has its name in the marker's tooltip and in the node table."""
    rank = {"breaks": 0, "tight": 1}
    order = sorted(range(len(nodes)), key=lambda i: (rank.get(nodes[i].verdict, 2), nodes[i].x))
    placed: list[float] = []
    keep: set[int] = set()
    for i in order:
        if all(abs(nodes[i].x - x) >= LABEL_GAP_PX for x in placed):
            placed.append(nodes[i].x)
            keep.add(i)
    return [replace(n, show_label=i in keep) for i, n in enumerate(nodes)]
