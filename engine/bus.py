"""The validated plan with its cable and every node's device resolved: the one input every rule and the solver
take."""

import dataclasses
import math
from collections.abc import Callable, Hashable, Mapping
from dataclasses import dataclass, field
from typing import Any, TypeVar

from pairline.engine.devices import ResolvedDevice, ResolvedDriver, driver_of, resolve_devices
from pairline.engine.plan import BranchSpec, BusPlan, NodeSpec, ResolvedCable, resolve_cable

T = TypeVar("T")


class LayoutMemo:
    """Values derived from one layout (the nodes, the primary driver and every node's device), each computed once
    and shared by every view of that layout: with_plan's other terminators or bias, talker_bus's other talkers,
    and the tolerance corners that keep the devices. A check weighs many such views (the advice's designs, the
    corners of each rule), and most of what they derive is the same. A key names everything else its value
    depends on (the standard, the terminators, the cable); the memo lives as long as the buses that share it."""

    __slots__ = ("_values",)

    def __init__(self) -> None:
        self._values: dict[Hashable, Any] = {}

    def get(self, key: Hashable, make: Callable[[], T]) -> T:
        """The value under key, made by make() the first time."""
        try:
            return self._values[key]  # type: ignore[no-any-return]
        except KeyError:
            value = make()
            self._values[key] = value
            return value


@dataclass(frozen=True, slots=True)
class BranchLayout:
    """Where the branches of a trunk really run. The plan a Bus carries shows every node on a branch as what it is
    electrically to the rules: a node at the branch's junction whose stub is its whole run from the trunk (the way
    along the branch plus its own stub). The solver (engine.solve) lays out the real tree from this layout: each
    branch a line of the trunk's cable from its junction, each such node on it at its distance along."""

    branches: tuple[BranchSpec, ...]
    along_m: Mapping[str, tuple[str, float]]  # node name -> (its branch's name, its distance along the branch)

    def place(self, node: NodeSpec) -> tuple[BranchSpec, float, float] | None:
        """(branch, distance along it, own stub) of a node of the bus's plan that hangs on a branch, or None for a
        trunk node. A node a what-if moved off its junction is on the trunk; one whose run a what-if shortened
        below its distance along the branch sits at the end of that run, with no stub of its own."""
        if node.name not in self.along_m:
            return None
        name, along = self.along_m[node.name]
        branch = next(b for b in self.branches if b.name == name)
        if node.position_m != branch.junction_position_m:
            return None
        along = min(along, node.stub_length_m)
        return branch, along, node.stub_length_m - along


NO_BRANCHES = BranchLayout((), {})


def on_trunk(plan: BusPlan) -> tuple[BusPlan, BranchLayout]:
    """The plan as the rules see it (BranchLayout) and the layout of its branches."""
    if not plan.branches:
        return plan, NO_BRANCHES
    junction = {b.name: b.junction_position_m for b in plan.branches}
    along: dict[str, tuple[str, float]] = {}
    nodes = []
    for n in plan.nodes:
        if n.branch is None:
            nodes.append(n)
            continue
        along[n.name] = (n.branch, n.position_m)
        run = n.position_m + n.stub_length_m
        nodes.append(n.model_copy(update={"branch": None, "position_m": junction[n.branch], "stub_length_m": run}))
    flat = plan.model_copy(update={"nodes": nodes, "branches": []})
    return flat, BranchLayout(tuple(plan.branches), along)


@dataclass(frozen=True, slots=True)
class Bus:
    plan: BusPlan  # branch nodes as their runs from the trunk (BranchLayout)
    cable: ResolvedCable
    driver: ResolvedDriver  # the talker this view is driven by: the primary driver unless talker_bus chose another
    devices: Mapping[str, ResolvedDevice]  # every node's device by name, the primary driver's included
    layout: BranchLayout = NO_BRANCHES  # the branches as wired
    memo: LayoutMemo = field(default_factory=LayoutMemo, compare=False, repr=False)  # shared by this layout's views
    view: "ViewKey | None" = field(default=None, init=False, compare=False, repr=False)  # view_key, once made

    @property
    def nodes(self) -> list[NodeSpec]:
        return list(self.plan.nodes)

    @property
    def drivers_possible(self) -> list[str]:
        """Names of every node that may drive: the primary driver, then the RS-485 nodes that may drive."""
        return self.plan.talkers()

    def device(self, name: str) -> ResolvedDevice:
        return self.devices[name]

    @property
    def driver_device(self) -> ResolvedDevice:
        """The primary driver's device (its receiver listens on RS-485 while the bus idles)."""
        return self.devices[self.plan.driver.name]

    @property
    def fastest_rise_time_s(self) -> float:
        """The fastest edge of any node that may drive: what stubs and the electrical length are held against."""
        return min(self._rises(), default=self.driver.rise_time_s)

    @property
    def slowest_rise_time_s(self) -> float:
        """The slowest edge of any node that may drive: what the bit-fraction budget is held against."""
        return max(self._rises(), default=self.driver.rise_time_s)

    def _rises(self) -> tuple[float, ...]:
        def rises() -> tuple[float, ...]:
            every = [self.devices[name].rise_time_s for name in self.drivers_possible]
            return tuple(r for r in every if math.isfinite(r))

        return self.memo.get(("rises", self.plan.standard), rises)


class ViewKey:
    """A view's key in the LayoutMemo, its hash taken once: the parts hold the plan's nested models, whose hash
    is worked out afresh on every dictionary look-up."""

    __slots__ = ("_hash", "parts")

    def __init__(self, parts: tuple[object, ...]) -> None:
        self.parts = parts
        self._hash = hash(parts)

    def __hash__(self) -> int:
        return self._hash

    def __eq__(self, other: object) -> bool:
        return self is other or (isinstance(other, ViewKey) and self._hash == other._hash and self.parts == other.parts)


def view_key(bus: Bus) -> ViewKey:
    """What tells apart the views of one layout (LayoutMemo): everything of the plan but its nodes (the layout's
    own), the cable and the driver; hashable. Made once per view."""
    key = bus.view
    if key is None:
        plan = tuple((name, tuple(v) if isinstance(v, list) else v) for name, v in bus.plan if name != "nodes")
        key = ViewKey((plan, bus.cable, bus.driver))
        object.__setattr__(bus, "view", key)  # a frozen view keeps what it was made with; its key follows from that
    return key


def build_bus(plan: BusPlan, layout: BranchLayout | None = None) -> Bus:
    """The bus of a plan; a plan with branches is seen on its trunk (on_trunk). layout: the branches of the bus
    this plan was derived from (a what-if of its nodes), when the plan itself states none."""
    flat, own = on_trunk(plan)
    devices = resolve_devices(flat)
    return Bus(
        plan=flat,
        cable=resolve_cable(flat.cable),
        driver=driver_of(devices[flat.driver.name]),
        devices=devices,
        layout=own if layout is None or plan.branches else layout,
    )


def with_plan(bus: Bus, plan: BusPlan) -> Bus:
    """The bus with another plan (terminators, bias, nodes changed): devices re-resolved only when the nodes, the
    driver or the default class changed, and the cable kept."""
    same = (
        plan.nodes is bus.plan.nodes
        and plan.driver == bus.plan.driver
        and plan.default_device == bus.plan.default_device
    )
    if same:
        return dataclasses.replace(bus, plan=plan)
    devices = resolve_devices(plan)
    return Bus(
        plan=plan, cable=bus.cable, driver=driver_of(devices[plan.driver.name]), devices=devices, layout=bus.layout
    )


def talker_bus(bus: Bus, name: str) -> Bus:
    """The bus as driven by one node that may drive: its device's output, edge and common mode."""
    return dataclasses.replace(bus, driver=driver_of(bus.devices[name]))


def talker_groups(bus: Bus, names: "list[str] | tuple[str, ...]") -> list[tuple[Bus, tuple[str, ...]]]:
    """The talkers grouped by their driver's figures, each group with the bus as that group drives it: talkers
    of one class share a simulation."""
    groups: dict[tuple[float, float, float], list[str]] = {}
    for name in names:
        d = bus.devices[name]
        groups.setdefault((d.rise_time_s, d.open_circuit_v, d.source_ohm), []).append(name)
    return [(talker_bus(bus, members[0]), tuple(members)) for members in groups.values()]
