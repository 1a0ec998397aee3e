"""The bus plan, format version 3: one bus as in version 2, and optionally more of it as it is really wired.

- Segments joined by repeaters. The plan's own trunk (its nodes, terminators, bias and ground wiring) is the
  master's segment, named by segment_name; `segments` lists further trunks, each with its own cable, nodes,
  terminators, bias and ground wiring. A repeater joins two segments: its upstream port hangs on the segment
  toward the master (a node there, which on RS-485 also drives the replies back), its downstream port drives
  the other segment (that segment's driver). The segments form a tree rooted at the master's segment.
- Branches. A trunk (the plan's own or a further segment's) may carry branches: a run of its cable from a junction
  on it, with nodes along it (a node names its branch; its position is then measured along the branch). A plan
  with branches is still one bus per trunk; the simulation solves the tree as wired.
- A four-wire (full-duplex) pair set. The master (the plan's driver) drives the transmit pair to every slave's
  receiver; the slaves that may drive reply on the return pair to the master's receiver. The plan's terminators
  and bias are the transmit pair's; `four_wire` holds the return pair's.

A plan that uses none of these is exactly a version-2 plan; version-2 and version-1 documents load as such
(engine.plan.legacy). engine.segments derives the stand-alone bus of each segment or pair.
"""

from typing import Literal

from pairline.engine.plan.model import (
    MAX_BIAS_NETWORKS,
    MAX_NODES,
    MAX_STUB_M,
    MAX_TRUNK_M,
    MIN_TRUNK_M,
    PLAN_FORMAT_VERSION,
    BiasSpec,
    CableSpec,
    DeviceRef,
    GroundingSpec,
    Name,
    NodeSpec,
    OneBus,
    TerminationSpec,
    _f,
    _Strict,
)
from pydantic import Field

MAX_SEGMENTS = 16
MAX_REPEATERS = MAX_SEGMENTS - 1
MAX_BRANCHES = 32  # per trunk
MIN_BRANCH_M = 0.1
MAIN_SEGMENT = "main"
# A repeater's delay when the plan states none: one receiver's and one driver's propagation delay in series, about
# 320 ns and 65 ns at their worst in a common 5 V transceiver's switching table (from memory), rounded up.
REPEATER_DELAY_S = 400e-9
REPEATER_DELAY_SOURCE = (
    "a receiver's and a driver's worst-case propagation delay in series, about 320 ns + 65 ns in a common 5 V "
    "transceiver's switching table (from memory), rounded up to 400 ns"
)


class BranchSpec(_Strict):
    """A branch off a trunk: a run of the trunk's cable from a junction on it (a T, a spur into a side room;
    several from one junction make a star), with nodes along it. It carries no terminator or bias: those sit on
    the trunk."""

    name: Name = Field(title="Branch name")
    junction_position_m: float = _f("Branch junction", "m", ge=0.0, le=MAX_TRUNK_M, description="on the trunk")
    length_m: float = _f("Branch length", "m", ge=MIN_BRANCH_M, le=MAX_TRUNK_M, description="junction to its far end")


class SegmentSpec(_Strict):
    """A further trunk, joined to the others by a repeater: its own cable, nodes, terminators, bias and grounds."""

    name: Name = Field(title="Segment name")
    trunk_length_m: float = _f("Segment trunk length", "m", ge=MIN_TRUNK_M, le=MAX_TRUNK_M)
    cable: CableSpec | None = Field(None, title="Segment cable", description="none: the plan's cable")
    nodes: list[NodeSpec] = Field(default_factory=list, max_length=MAX_NODES, title="Nodes")
    branches: list[BranchSpec] = Field(default_factory=list, max_length=MAX_BRANCHES, title="Branches")
    terminations: list[TerminationSpec] = Field(default_factory=list, max_length=16, title="Terminations")
    bias: list[BiasSpec] = Field(default_factory=list, max_length=MAX_BIAS_NETWORKS, title="Failsafe bias networks")
    grounding: GroundingSpec = Field(default_factory=GroundingSpec, title="Ground and shield wiring")


class RepeaterSpec(_Strict):
    """A repeater between two segments: a port on each (its device's unit loads and driver on each side)."""

    name: Name = Field(title="Repeater name")
    upstream_segment: Name = Field(title="Upstream segment", description="the segment on the master's side")
    upstream_position_m: float = _f("Upstream position", "m", ge=0.0, le=MAX_TRUNK_M)
    upstream_stub_m: float = _f("Upstream stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    downstream_segment: Name = Field(title="Downstream segment", description="the segment this repeater drives")
    downstream_position_m: float = _f("Downstream position", "m", ge=0.0, le=MAX_TRUNK_M, default=0.0)
    downstream_stub_m: float = _f("Downstream stub length", "m", ge=0.0, le=MAX_STUB_M, default=0.0)
    device: DeviceRef = Field(
        None,
        title="Repeater device",
        description="both ports' transceiver; an isolated device puts its barrier between the ports",
    )
    delay_s: float = _f(
        "Repeater delay", "s", ge=0.0, le=1e-3, default=REPEATER_DELAY_S, description="input edge to output edge"
    )
    ground_offset_v: float = _f(
        "Repeater ground offset",
        "V",
        ge=-10_000.0,
        le=10_000.0,
        default=0.0,
        description="the upstream port's ground relative to the master's ground",
    )
    downstream_ground_offset_v: float | None = _f(
        "Downstream port ground offset",
        "V",
        ge=-10_000.0,
        le=10_000.0,
        default=None,
        description="an isolated repeater only: its downstream port's ground relative to the master's; "
        "none: the repeater's own ground",
    )


class FourWireSpec(_Strict):
    """The return pair of a four-wire (full-duplex) bus: the slaves' drivers to the master's receiver."""

    master: Name | None = Field(None, title="Master", description="the plan's driver, which drives the transmit pair")
    return_terminations: list[TerminationSpec] = Field(
        default_factory=list, max_length=16, title="Return-pair terminations"
    )
    return_bias: list[BiasSpec] = Field(
        default_factory=list, max_length=MAX_BIAS_NETWORKS, title="Return-pair failsafe bias networks"
    )


class BusPlan(OneBus):
    format_version: Literal[3] = Field(PLAN_FORMAT_VERSION, title="Format version")
    segment_name: Name = Field(MAIN_SEGMENT, title="Segment name", description="the master's segment (this trunk)")
    branches: list[BranchSpec] = Field(default_factory=list, max_length=MAX_BRANCHES, title="Branches")
    segments: list[SegmentSpec] = Field(default_factory=list, max_length=MAX_SEGMENTS - 1, title="Further segments")
    repeaters: list[RepeaterSpec] = Field(default_factory=list, max_length=MAX_REPEATERS, title="Repeaters")
    four_wire: FourWireSpec | None = Field(None, title="Four-wire return pair")
    response_budget_s: float | None = _f(
        "Response budget",
        "s",
        ge=1e-6,
        le=60.0,
        default=None,
        description="the longest round trip the protocol allows (its reply time-out less the slowest reply); "
        "none: held against one bit",
    )

    @property
    def is_one_bus(self) -> bool:
        """True when the plan is one bus (what a version-2 plan is): no further segment, no second pair."""
        return not self.segments and not self.repeaters and self.four_wire is None
