"""SVG coordinates of a whole plan of several parts: every segment (or both four-wire pairs) on one row each, all
to one scale, with each repeater drawn from its port on the upstream segment to its port on the segment it
drives. Each segment is placed so that its repeater's two ports line up along the run: a row's ruler position is
the cable distance from the master's trunk start along the way the signal travels (repeaters take no length).
A branch hangs straight down from its junction with its nodes along it, on the drawing's scale (or, where the
longest branch would not fit between the rows, on one of its own that the caption states); the rows below move
down to make room. Each part's own page section draws its trunk in detail (server.diagram)."""

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from pairline.engine.segments import PlanPart
from pairline.server.diagram import _nice_step, _short
from pairline.server.quantities import UnitSystem, length_in, length_text, length_unit

WIDTH_PX = 960.0
LEFT_PX = 150.0  # room for each row's name
RIGHT_PX = 40.0
RULER_Y_PX = 24.0
FIRST_ROW_Y_PX = 70.0
ROW_PX = 70.0
BRANCH_MAX_PX = 120.0  # the longest branch is drawn at most this long


@dataclass(frozen=True, slots=True)
class Tick:
    x: float
    label: str


@dataclass(frozen=True, slots=True)
class Mark:
    x: float
    name: str
    label: str
    verdict: str
    kind: str  # "node", "driver" or "port"
    dy: float = 0.0  # a branch's node: how far below its row, down its branch


@dataclass(frozen=True, slots=True)
class BranchLine:
    """A branch: straight down from its junction (x, below its row's y) for `length_px`."""

    name: str
    x: float
    length_px: float
    verdict: str
    title: str


@dataclass(frozen=True, slots=True)
class Row:
    label: str
    y: float
    x0: float
    x1: float
    length_text: str
    verdict: str
    anchor: str  # the part's section on the page
    marks: tuple[Mark, ...]
    branches: tuple[BranchLine, ...] = ()
    length_x: float = 0.0  # where its length is written: the middle of the widest stretch no branch hangs from


@dataclass(frozen=True, slots=True)
class Link:
    """A repeater: from its upstream port (x_up on the row at y_up) to its downstream port (x_down, y_down)."""

    name: str
    x_up: float
    y_up: float
    x_down: float
    y_down: float
    isolated: bool
    title: str


@dataclass(frozen=True, slots=True)
class NetworkDrawing:
    width: float
    height: float
    ruler_y: float
    x0: float
    x1: float
    ticks: tuple[Tick, ...]
    rows: tuple[Row, ...]
    links: tuple[Link, ...]
    caption: str


def _origins_m(parts: Sequence[PlanPart], repeaters: Mapping[str, tuple[str, float, float]]) -> list[float]:
    """Where each part's trunk starts along the run: its repeater's upstream position on its parent's run, less
    the downstream position on its own trunk."""
    origin: dict[str, float] = {}
    out = []
    for part in parts:
        if part.feeder is None or part.feeder not in repeaters:
            here = 0.0
        else:
            upstream, up_m, down_m = repeaters[part.feeder]
            here = origin.get(upstream, 0.0) + up_m - down_m
        origin[part.name] = here
        out.append(here)
    return out


def _widest_gap_middle(xs: list[float]) -> float:
    """The middle of the widest stretch between neighbours of `xs` (a row's ends and its branches' junctions)."""
    ordered = sorted(xs)
    a, b = max(zip(ordered, ordered[1:], strict=False), key=lambda pair: pair[1] - pair[0])
    return (a + b) / 2


def network_drawing(
    parts: Sequence[PlanPart],
    verdicts: Sequence[Mapping[str, str]],
    part_verdicts: Sequence[str],
    anchors: Sequence[str],
    repeaters: Mapping[str, tuple[str, float, float, bool]],
    units: UnitSystem,
    branch_verdicts: Sequence[Mapping[str, str]] = (),
) -> NetworkDrawing:
    """Lay out every part. verdicts[k] maps part k's node names to their worst verdict, branch_verdicts[k] its
    branches' names to theirs; repeaters maps a repeater's name to (upstream segment, upstream position, downstream
    position, isolated)."""
    starts = _origins_m(parts, {k: v[:3] for k, v in repeaters.items()})
    lo = min(starts)
    ends = [s + p.plan.trunk_length_m for s, p in zip(starts, parts, strict=True)]
    span = max(ends) - lo
    scale = (WIDTH_PX - LEFT_PX - RIGHT_PX) / span

    def x(along_m: float) -> float:
        return LEFT_PX + (along_m - lo) * scale

    longest_branch_m = max((b.length_m for p in parts for b in p.plan.branches), default=0.0)
    branch_scale = min(scale, BRANCH_MAX_PX / longest_branch_m) if longest_branch_m else scale
    rows = []
    row_of: dict[str, tuple[float, float]] = {}  # part name -> (its origin, its y)
    y = FIRST_ROW_Y_PX
    for k, part in enumerate(parts):
        row_of[part.name] = (starts[k], y)
        plan = part.plan
        marks = [
            Mark(
                x(starts[k] + plan.driver.position_m),
                plan.driver.name,
                _short(plan.driver.name),
                verdicts[k].get(plan.driver.name, "holds"),
                "driver",
            )
        ]
        junction = {b.name: b.junction_position_m for b in plan.branches}
        for node in plan.nodes:
            kind = "port" if node.name in repeaters else "node"
            on_branch = node.branch in junction
            marks.append(
                Mark(
                    x(starts[k] + (junction[node.branch or ""] if on_branch else node.position_m)),
                    node.name,
                    _short(node.name),
                    verdicts[k].get(node.name, "holds"),
                    kind,
                    node.position_m * branch_scale if on_branch else 0.0,
                )
            )
        own = branch_verdicts[k] if k < len(branch_verdicts) else {}
        branches = tuple(
            BranchLine(
                b.name,
                x(starts[k] + b.junction_position_m),
                b.length_m * branch_scale,
                own.get(b.name, "holds"),
                f"Branch {b.name}: {length_text(b.length_m, units)} from {length_text(b.junction_position_m, units)}",
            )
            for b in plan.branches
        )
        rows.append(
            Row(
                label=_short(part.name) if part.kind == "segment" else part.label.removeprefix("the "),
                y=y,
                x0=x(starts[k]),
                x1=x(ends[k]),
                length_text=length_text(plan.trunk_length_m, units),
                verdict=part_verdicts[k],
                anchor=anchors[k],
                marks=tuple(marks),
                branches=branches,
                length_x=_widest_gap_middle([x(starts[k]), x(ends[k]), *(b.x for b in branches)]),
            )
        )
        y += ROW_PX + max((b.length_px for b in branches), default=0.0)
    links = []
    for part in parts:
        if part.feeder is None or part.feeder not in repeaters:
            continue
        upstream, up_m, down_m, isolated = repeaters[part.feeder]
        up_origin, up_y = row_of[upstream]
        down_origin, down_y = row_of[part.name]
        links.append(
            Link(
                name=part.feeder,
                x_up=x(up_origin + up_m),
                y_up=up_y,
                x_down=x(down_origin + down_m),
                y_down=down_y,
                isolated=isolated,
                title=f"Repeater {part.feeder}{' (isolated)' if isolated else ''}: {upstream} → {part.name}",
            )
        )
    step = _nice_step(length_in(span, units))
    ticks = []
    mark = 0.0
    while mark <= length_in(span, units) + 1e-9:
        along = mark / length_in(1.0, units)
        ticks.append(Tick(x(lo + along), f"{mark:g}"))
        mark += step
    joined = "repeaters drawn from the port on the segment toward the master to the port they drive"
    caption = (
        f"Every part to one scale ({length_unit(units)} of cable run from the master's trunk start); {joined}; an "
        "isolated repeater is drawn with a gap."
        if links
        else f"Both pairs to one scale ({length_unit(units)} along the trunk)."
    )
    if longest_branch_m:
        caption += (
            " Branches hang below their junctions to the same scale."
            if branch_scale == scale
            else f" Branches hang below their junctions to a scale of their own, {branch_scale / scale:.3g}× the "
            "runs', so the longest fits."
        )
    return NetworkDrawing(
        width=WIDTH_PX,
        height=y,
        ruler_y=RULER_Y_PX,
        x0=LEFT_PX,
        x1=WIDTH_PX - RIGHT_PX,
        ticks=tuple(ticks),
        rows=tuple(rows),
        links=tuple(links),
        caption=caption,
    )
