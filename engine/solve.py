"""Whole-bus frequency response: trunk, stubs, loads and a Thevenin driver, solved at all frequencies at once.

Model (differential mode, see engine/line.py for the cable):
- The trunk runs from 0 to trunk_length_m. Every position where something attaches (node, driver,
  terminator, bias, the two ends, any probed trunk point) is a junction; between neighbouring junctions lies a
  trunk segment.
- A branch of the plan (engine.bus.BranchLayout) is a line of the same cable from a trunk junction to its open
  far end; the points its nodes hang on are junctions along it. The whole is a tree: trunk, lines, stubs.
- Each node hangs on its own stub of the same cable as the trunk, ending in its receiver input: its device's
  differential input resistance, 24 kOhm per unit load across the pair (engine.devices), in parallel with the
  device's input capacitance. A stub of length 0 puts the load on the trunk.
- Terminators sit on the trunk: parallel R, or R in series with C ("rc"). Each failsafe bias network is
  its DC-equivalent resistance across the pair, pull_up_ohm + pull_down_ohm (the supply is an AC short).
- The driving node is a Thevenin source (open_circuit_v, source_ohm of bus.driver) at the end of its stub. Its
  own receiver input is left out while it drives: its input resistance is negligible beside the source
  resistance, and the part's pin capacitance is already inside the class's measured rise time. Every driver
  named in one solve drives with bus.driver's figures: callers with talkers of several devices solve each
  group on its own view (engine.bus.talker_groups). Nodes not driving load the bus as receivers; the primary
  driver, when another node drives, loads the bus with its own device's receiver.

Probes read the bus at a receiver input (a plan node, at the end of its stub), at any trunk position, or at the
driving node's own pins (the source end of its stub, where a scope at the driver's connector sits).

Method, linear in the number of junctions K for every Laplace point s at once:
1. Stub input admittances Y_in = (tanh/Z0 + Y_L) / (1 + Z0 tanh Y_L) give the shunt admittance at each junction.
2. Two sweeps along the trunk give, at each junction, the admittance looking left (YL) and right (YR)
   into the rest of the trunk (input admittance of a loaded line, recursively).
3. From the driver's junction, voltages propagate outward segment by segment:
   V_next / V_here = sech / (1 + Z0 tanh Y_next), Y_next = everything beyond (Pozar, table 4.1 ABCD).
   These ratios do not depend on where the driver sits (the sweeps exclude each junction's own shunt), so
   every driver reuses the same sweeps: a cumulative product outward from its junction, O(K) per driver.
   Lines first: a sweep from each line's far end gives the admittance into it at its trunk junction, a shunt
   there like a stub's, and the voltage ratio outward along it. A line with a driver on it also gets the sweep
   inward, from the rest of the tree (trunk, other lines) seen at its junction: voltages then run along the line
   to the trunk, along the trunk both ways, and out along every other line.
4. The driver's stub with its Thevenin source closes the chain:
   V_J / V_oc = sech / ((1 + Z0 tanh Y_J) + R_s (tanh/Z0 + Y_J)); the source end sits at
   V_e / V_oc = (1 + Z0 tanh Y_J) / (same denominator).
All arithmetic uses tanh, sech and tanh(x)/x forms that stay finite at DC and on very lossy lines.

Delay-normalised transfers: every sech(gamma l) is carried as sech(gamma l) exp(s l / v), so a probe's transfer
comes out multiplied by exp(s tau), tau its geometric path delay from the driver (driver stub, trunk, probe
stub at the cable's speed v). Under a damped transform (large Re s) the plain transfer of a long path would
underflow; the normalised one stays of order one, and the time-domain solver reads each probe in its own frame
starting at tau. At a large real s the normalised transfer tends to the amplitude of the wave front that
arrives at tau: every later reflection carries exp(-s (tau_i - tau)) and dies out (settled_and_front).

Variants (tolerance analysis): the cable and every load may carry a leading axis of n_v variants of the same
layout; everything then runs batched over it (NetworkVariants).
"""

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike
from pairline.engine.bus import Bus
from pairline.engine.line import series_impedance_ohm_per_m, shunt_admittance_siemens_per_m
from pairline.engine.plan import BusInputError, Problem, ResolvedCable
from pairline.engine.units import propagation_velocity_m_per_s

DRIVER_PIN = "driver pin"  # label of the probe at the driving node's own terminals


@dataclass(frozen=True, slots=True)
class BusResponse:
    """Transfer from each driver's open-circuit voltage to each receiver input.

    transfer: (n_drivers, n_freq, n_receivers) complex, V_receiver / V_open_circuit; receivers in plan node order.
    """

    frequency_hz: np.ndarray  # (n_freq,)
    driver_names: tuple[str, ...]
    receiver_names: tuple[str, ...]
    transfer: np.ndarray  # (n_drivers, n_freq, n_receivers)
    junction_position_m: np.ndarray  # (K,) trunk positions of the junctions
    junction_transfer: np.ndarray | None = None  # (n_drivers, n_freq, K) when asked for


@dataclass(frozen=True, slots=True)
class Probe:
    """A point where the bus is read: a plan node's receiver input, a trunk position, or the driver's pins.

    kind: "node" (the node's receiver input at the end of its stub; its own pins while it drives),
    "junction" (the trunk at position_m) or "driver_pin" (the driving node's terminals, at the source end of
    its stub). name: the label shown for it.
    """

    kind: str
    name: str
    node: str | None = None
    position_m: float | None = None


def node_probe(name: str) -> Probe:
    return Probe("node", name, node=name)


def junction_probe(position_m: float) -> Probe:
    return Probe("junction", f"trunk at {position_m:g} m", position_m=float(position_m))


def driver_pin_probe() -> Probe:
    return Probe("driver_pin", DRIVER_PIN)


@dataclass(frozen=True, slots=True)
class Topology:
    """The bus as junctions, trunk segments, lines (the plan's branches, each a run of cable from a trunk junction)
    and branches (each a stub ending in a load).

    Junctions 0 .. K_t - 1 lie on the trunk, in order; each line's junctions follow, outward from its trunk
    junction, the last at the line's far end."""

    junction_position_m: np.ndarray  # (K_t,) trunk junctions
    segment_length_m: np.ndarray  # (K_t - 1,)
    line_junction: np.ndarray  # (n_lines,) the trunk junction each line leaves from
    line_start: np.ndarray  # (n_lines + 1,) each line's first junction; line i holds [line_start[i], line_start[i + 1])
    line_along_m: np.ndarray  # (K - K_t,) each line junction's distance along its line
    line_edge_m: np.ndarray  # (K - K_t,) each line junction's distance from the one before it (or the trunk)
    branch_junction: np.ndarray  # (n_b,) int
    branch_stub_m: np.ndarray  # (n_b,)
    branch_conductance_siemens: np.ndarray  # (n_b,) resistive part of the load (receivers, bias, parallel R)
    branch_capacitance_f: np.ndarray  # (n_b,) shunt capacitance of the load (receivers)
    branch_series_rc_ohm: np.ndarray  # (n_b,) R of an "rc" terminator, 0 otherwise
    branch_series_rc_f: np.ndarray  # (n_b,) C of an "rc" terminator, 0 otherwise
    receiver_branch: np.ndarray  # (n_receivers,) branch index of each plan node
    receiver_names: tuple[str, ...]
    driver_branch: dict[str, int]  # name -> branch index of every node that may drive
    termination_branch: np.ndarray  # (n_terminations,) branch index of each plan terminator
    bias_branches: tuple[int, ...]  # branch index of each bias network, in plan order

    @property
    def n_junctions(self) -> int:
        return int(self.junction_position_m.size + self.line_along_m.size)

    def line_of(self, junction: int) -> int:
        """The line a junction lies on, -1 for the trunk."""
        return (
            int(np.searchsorted(self.line_start, junction, side="right")) - 1
            if junction >= self.junction_position_m.size
            else -1
        )

    def distance_m(self, junction: int) -> np.ndarray:
        """Cable length from one junction to every junction, (K,), along the tree."""
        k_t = self.junction_position_m.size
        line = np.searchsorted(self.line_start, np.arange(k_t, self.n_junctions), side="right") - 1
        trunk_x = np.concatenate([self.junction_position_m, self.junction_position_m[self.line_junction[line]]])
        along = np.concatenate([np.zeros(k_t), self.line_along_m])
        own = np.concatenate([np.full(k_t, -1), line])
        here = own[junction]
        out = along[junction] + np.abs(trunk_x - trunk_x[junction]) + along
        if here >= 0:
            same = own == here
            out[same] = np.abs(along[same] - along[junction])
        return np.asarray(out)


def build_topology(bus: Bus, probe_positions_m: Sequence[float] = ()) -> Topology:
    """Junctions, segments, lines and branches of the bus (branch 0 is the primary driver's own receiver).

    probe_positions_m: further trunk positions to make junctions of (probes there; nothing attached). The plan's
    branches become lines (engine.bus.BranchLayout), their nodes' stubs hang on them.
    """
    plan = bus.plan
    stub: list[float] = []
    pos: list[float] = []
    on_line: dict[int, tuple[int, float]] = {}  # stub branch -> (line, distance along it)
    lines = bus.layout.branches
    cond: list[float] = []
    cap: list[float] = []
    rc_r: list[float] = []
    rc_c: list[float] = []

    def add(position_m: float, stub_m: float, g: float, c: float, r_rc: float = 0.0, c_rc: float = 0.0) -> int:
        pos.append(position_m)
        stub.append(stub_m)
        cond.append(g)
        cap.append(c)
        rc_r.append(r_rc)
        rc_c.append(c_rc)
        return len(pos) - 1

    drv = plan.driver
    own = bus.driver_device
    driver_branch = {
        drv.name: add(drv.position_m, drv.stub_length_m, 1.0 / own.differential_input_ohm, own.input_capacitance_f)
    }
    receiver_branch = []
    for node in plan.nodes:
        device = bus.devices[node.name]
        where = bus.layout.place(node)
        own_stub = node.stub_length_m if where is None else where[2]
        b = add(node.position_m, own_stub, 1.0 / device.differential_input_ohm, device.input_capacitance_f)
        if where is not None:
            on_line[b] = (lines.index(where[0]), where[1])
        receiver_branch.append(b)
        if node.may_drive and plan.standard == "rs485":
            driver_branch[node.name] = b
    terminations = []
    for term in plan.terminations:
        if term.kind == "rc" and term.capacitance_f is not None:
            terminations.append(add(term.position_m, 0.0, 0.0, 0.0, term.resistance_ohm, term.capacitance_f))
        else:
            terminations.append(add(term.position_m, 0.0, 1.0 / term.resistance_ohm, 0.0))
    bias = tuple(add(b.position_m, 0.0, 1.0 / (b.pull_up_ohm + b.pull_down_ohm), 0.0) for b in plan.bias)

    positions = np.asarray(pos)
    extra = np.asarray(list(probe_positions_m), dtype=float)
    on_trunk = np.array([b not in on_line for b in range(len(pos))], dtype=bool)
    line_x = [line.junction_position_m for line in lines]
    junctions = np.unique(np.concatenate([positions[on_trunk], extra, line_x, [0.0, plan.trunk_length_m]]))
    branch_junction = np.searchsorted(junctions, positions)
    # each line: its junctions outward (every node's distance along it and its far end; 0 is the trunk junction)
    line_start, line_along, line_edge = [junctions.size], [], []
    for i, line in enumerate(lines):
        stops = np.unique([line.length_m, *(a for b, (j, a) in on_line.items() if j == i)])
        stops = stops[stops > 0.0]
        for b, (j, a) in on_line.items():
            if j == i:
                branch_junction[b] = (
                    np.searchsorted(junctions, line.junction_position_m)
                    if a <= 0.0
                    else line_start[-1] + np.searchsorted(stops, a)
                )
        line_along += list(stops)
        line_edge += list(np.diff(stops, prepend=0.0))
        line_start.append(line_start[-1] + stops.size)
    return Topology(
        junction_position_m=junctions,
        segment_length_m=np.diff(junctions),
        line_junction=np.searchsorted(junctions, np.asarray(line_x, dtype=float)).astype(int),
        line_start=np.asarray(line_start, dtype=int),
        line_along_m=np.asarray(line_along, dtype=float),
        line_edge_m=np.asarray(line_edge, dtype=float),
        branch_junction=branch_junction,
        branch_stub_m=np.asarray(stub),
        branch_conductance_siemens=np.asarray(cond),
        branch_capacitance_f=np.asarray(cap),
        branch_series_rc_ohm=np.asarray(rc_r),
        branch_series_rc_f=np.asarray(rc_c),
        receiver_branch=np.asarray(receiver_branch, dtype=int),
        receiver_names=tuple(n.name for n in plan.nodes),
        driver_branch=driver_branch,
        termination_branch=np.asarray(terminations, dtype=int),
        bias_branches=bias,
    )


def resolve_driver_names(bus: Bus, driver_names: "tuple[str, ...] | list[str] | None") -> tuple[str, ...]:
    """The drivers asked for (None = the primary driver only); unknown or non-driving names raise BusInputError."""
    allowed = bus.drivers_possible if bus.plan.standard == "rs485" else [bus.plan.driver.name]
    if driver_names is None:
        return (bus.plan.driver.name,)
    names = tuple(driver_names)
    bad = [n for n in names if n not in allowed]
    if bad or not names:
        raise BusInputError(
            [
                Problem(
                    "driver_name",
                    "Driving node",
                    bad[0] if bad else None,
                    {"choices": allowed},
                    f"'{bad[0] if bad else ''}' cannot drive this bus; the driver and RS-485 transceiver nodes "
                    f"can: {', '.join(allowed)}.",
                )
            ]
        )
    return names


@dataclass(frozen=True, slots=True)
class ProbePoints:
    """Probes resolved against a topology: each reads a plan node (receiver index), a junction, or the pins."""

    probes: tuple[Probe, ...]
    receiver: np.ndarray  # (n_p,) plan node index, -1 when not a node probe
    junction: np.ndarray  # (n_p,) junction index, -1 when not a junction probe


def probe_points(bus: Bus, topo: Topology, probes: Sequence[Probe]) -> ProbePoints:
    """Where each probe reads; a node that is not on the bus or a position off the trunk raises BusInputError."""
    names = topo.receiver_names
    rx, junction = [], []
    for i, p in enumerate(probes):
        if p.kind == "node":
            if p.node not in names:
                raise BusInputError(
                    [
                        Problem(
                            f"probes.{i}.node",
                            "Probed node",
                            p.node,
                            {"choices": list(names)},
                            f"'{p.node}' is not a node of this bus; nodes are {', '.join(names)}.",
                        )
                    ]
                )
            rx.append(names.index(p.node))
            junction.append(-1)
        elif p.kind == "junction":
            x = float(p.position_m if p.position_m is not None else -1.0)
            k = int(np.searchsorted(topo.junction_position_m, x))
            off_trunk = not 0.0 <= x <= bus.plan.trunk_length_m
            if off_trunk or k >= topo.junction_position_m.size or topo.junction_position_m[k] != x:
                raise BusInputError(
                    [
                        Problem(
                            f"probes.{i}.position_m",
                            "Probed trunk position",
                            p.position_m,
                            {"min": 0.0, "max": bus.plan.trunk_length_m, "unit": "m"},
                            f"A trunk probe must sit on the trunk, 0 to {bus.plan.trunk_length_m:g} m; "
                            f"got {p.position_m}.",
                        )
                    ]
                )
            rx.append(-1)
            junction.append(k)
        else:
            rx.append(-1)
            junction.append(-1)
    return ProbePoints(tuple(probes), np.asarray(rx, dtype=int), np.asarray(junction, dtype=int))


@dataclass(frozen=True, slots=True)
class NetworkVariants:
    """n_v variants of one layout (tolerance analysis): a cable per variant and every load per variant."""

    cables: tuple[ResolvedCable, ...]  # (n_v,)
    conductance_siemens: np.ndarray  # (n_v, n_b)
    capacitance_f: np.ndarray  # (n_v, n_b)
    series_rc_ohm: np.ndarray  # (n_v, n_b)
    series_rc_f: np.ndarray  # (n_v, n_b)
    source_ohm: np.ndarray  # (n_v,)


def nominal_variant(bus: Bus, topo: Topology) -> NetworkVariants:
    """The plan itself as a single variant."""
    return NetworkVariants(
        cables=(bus.cable,),
        conductance_siemens=topo.branch_conductance_siemens[None, :],
        capacitance_f=topo.branch_capacitance_f[None, :],
        series_rc_ohm=topo.branch_series_rc_ohm[None, :],
        series_rc_f=topo.branch_series_rc_f[None, :],
        source_ohm=np.array([bus.driver.source_ohm]),
    )


def _load_admittance(g: np.ndarray, c: np.ndarray, rc_ohm: np.ndarray, rc_f: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Admittance of loads, (n_v, n_loads, n_s): G + s C, plus s C_t / (1 + s R_t C_t) for RC terminators."""
    s_row = s[None, None, :]
    y = g[..., None] + c[..., None] * s_row
    if np.any(rc_f > 0):
        rc = rc_f[..., None]
        with np.errstate(invalid="ignore", divide="ignore"):
            series = s_row * rc / (1.0 + s_row * rc_ohm[..., None] * rc)
        y += np.where(rc > 0, series, 0.0)
    return np.asarray(y)


@dataclass(frozen=True, slots=True)
class _Sections:
    """Delay-normalised terms of line sections, (n_v, n_lengths, n_s) each."""

    sech_advanced: np.ndarray  # sech(gamma l) exp(s l / v)
    z_tanh_ohm: np.ndarray  # Z0 tanh(gamma l)
    y_tanh_siemens: np.ndarray  # tanh(gamma l) / Z0


def _sections(
    z: np.ndarray, y: np.ndarray, s: np.ndarray, speed: np.ndarray, length_m: np.ndarray, cable_of: np.ndarray
) -> _Sections:
    """Terms of each variant, (n_v, n_len, n_s), from those of each distinct cable: z, y (n_c, n_s) per-metre Z',
    Y'; speed (n_c,) m/s; lengths (n_len,); cable_of (n_v,) each variant's cable. With e = exp(-2 gamma l):
    tanh = (1 - e) / (1 + e) and sech(gamma l) exp(s l / v) = 2 exp(-(gamma - s / v) l) / (1 + e): two complex
    exponentials per value, neither of which grows large (|e| <= 1, and the excess over the delay is the section's
    attenuation)."""
    length = length_m[None, :, None]
    gamma = np.sqrt(z * y)[:, None, :]
    x = gamma * length
    em = np.expm1(-2.0 * x)  # e - 1, exact near 0
    one_plus_e = em + 2.0
    tc = np.ones_like(em)
    np.divide(-em / one_plus_e, x, out=tc, where=x != 0)  # tanh(x) / x, 1 at x = 0
    excess = (gamma - s[None, None, :] / speed[:, None, None]) * length  # attenuation and dispersion beyond the delay
    terms = (2.0 * np.exp(-excess) / one_plus_e, z[:, None, :] * length * tc, y[:, None, :] * length * tc)
    if cable_of.size != z.shape[0] or np.any(cable_of != np.arange(cable_of.size)):
        terms = tuple(t[cable_of] for t in terms)
    return _Sections(*terms)


@dataclass(frozen=True, slots=True)
class Branching:
    """What a solve needs of the layout whatever its Laplace points: branches alike in every variant (same stub
    length and load) grouped into kinds, the distinct stub and trunk-segment lengths, and which junctions carry
    more than one branch. Made once (branching) for the several solves of one edge response."""

    first: np.ndarray  # (n_kinds,) a branch of each kind
    kind_of: np.ndarray  # (n_b,) each branch's kind
    stub_len_m: np.ndarray  # (n_stub_lengths,) distinct stub lengths
    stub_kind: np.ndarray  # (n_kinds,) each kind's stub length, as an index into stub_len_m
    shunt_junction: np.ndarray  # (n_b,) the junction of each branch, branches ordered by junction
    shunt_kind: np.ndarray  # (n_b,) the kind of each branch in that order
    starts: np.ndarray  # positions in that order where a new junction begins
    further: np.ndarray  # the other positions: further branches on a junction already counted
    seg_len_m: np.ndarray  # (n_segment_lengths,) distinct lengths of trunk segments and line edges
    seg_of: np.ndarray  # (K_t - 1,) each trunk segment's length, as an index into seg_len_m
    line_seg_of: np.ndarray  # (K - K_t,) each line edge's length (into its junction), as an index into seg_len_m


def branching(topo: Topology, var: NetworkVariants) -> Branching:
    """The layout's Branching for these variants' loads (the cables do not enter it)."""
    loads = [var.conductance_siemens, var.capacitance_f, var.series_rc_ohm, var.series_rc_f]
    params = np.column_stack([np.round(topo.branch_stub_m, 9)] + [a.T for a in loads])
    _, first, kind_of = np.unique(params, axis=0, return_index=True, return_inverse=True)
    kind_of = kind_of.ravel()
    stub_len, stub_kind = np.unique(np.round(topo.branch_stub_m[first], 9), return_inverse=True)
    order = np.argsort(topo.branch_junction, kind="stable")
    bj = topo.branch_junction[order]
    starts = np.flatnonzero(np.r_[True, bj[1:] != bj[:-1]])
    edges = np.round(np.concatenate([topo.segment_length_m, topo.line_edge_m]), 9)
    seg_len, every_seg = np.unique(edges, return_inverse=True)
    n_trunk = topo.segment_length_m.size
    return Branching(
        first=first,
        kind_of=kind_of,
        stub_len_m=stub_len,
        stub_kind=stub_kind,
        shunt_junction=bj,
        shunt_kind=kind_of[order],
        starts=starts,
        further=np.setdiff1d(np.arange(order.size), starts),
        seg_len_m=seg_len,
        seg_of=every_seg[:n_trunk],
        line_seg_of=every_seg[n_trunk:],
    )


@dataclass(frozen=True, slots=True)
class Network:
    """The passive bus (every node a load) solved at Laplace points s: what any driver needs.

    Junction-major layout, (K, n_v, n_s): the sweeps walk contiguous rows. Stub terms are kept per distinct
    kind of branch (stub_of maps a branch to its row). Every sech carries exp(s l / v) (module docstring).
    """

    topology: Topology
    s: np.ndarray  # (n_s,)
    speed_m_per_s: np.ndarray  # (n_v,)
    source_ohm: np.ndarray  # (n_v,)
    stub_of: np.ndarray  # (n_b,) row of each branch's kind (stub length and load) in the stub tables
    stub_sech: np.ndarray  # (n_kinds, n_v, n_s) sech(gamma l) exp(s l / v)
    stub_z_tanh_ohm: np.ndarray  # (n_kinds, n_v, n_s) Z0 tanh(gamma l)
    stub_y_tanh_siemens: np.ndarray  # (n_kinds, n_v, n_s) tanh(gamma l) / Z0
    branch_y: np.ndarray  # (n_kinds, n_v, n_s) admittance into each kind of branch when passive
    y_shunt: np.ndarray  # (K, n_v, n_s)
    y_left: np.ndarray  # (K_t, n_v, n_s) looking left into the trunk, own shunt excluded; rows the drivers need
    y_right: np.ndarray  # (K_t, n_v, n_s)
    ratio_right: np.ndarray  # (K - 1, n_v, n_s) V_{k+1} / V_k exp(s l_k / v), driver on the left of segment k
    ratio_left: np.ndarray  # (K - 1, n_v, n_s) V_k / V_{k+1} exp(s l_k / v), driver on the right
    rx_stub: np.ndarray  # (n_kinds, n_v, n_s) V_load / V_junction exp(s l_stub / v)
    # lines, row g - K_t for line junction g; "down" looks away from the trunk, "up" toward it
    y_down: np.ndarray  # (K - K_t, n_v, n_s) admittance beyond g, away from the trunk, own shunt excluded
    ratio_down: np.ndarray  # (K - K_t, n_v, n_s) V_g / V_(the junction before g) exp(s l / v)
    y_up: np.ndarray  # (K - K_t, n_v, n_s) looking from g toward the trunk (lines with a driver on them only)
    ratio_up: np.ndarray  # (K - K_t, n_v, n_s) V_(the junction before g) / V_g exp(s l / v), likewise
    line_y: np.ndarray  # (n_lines, n_v, n_s) admittance into each line at its trunk junction


def solve_network(
    bus: Bus,
    s: ArrayLike,
    topo: Topology | None = None,
    driver_names: "tuple[str, ...] | None" = None,
    variants: NetworkVariants | None = None,
    kinds: Branching | None = None,
) -> Network:
    """Steps 1-3 of the module docstring: branch admittances, both sweeps, outward voltage ratios.

    driver_names: the drivers the network will be asked about (None: every node that may drive); the sweeps
    only cover what they need. variants: n_v variants of cable and loads (None: the plan itself, n_v = 1).
    kinds: branching(topo, variants), when the caller solves the same layout more than once.
    """
    topo = build_topology(bus) if topo is None else topo
    var = nominal_variant(bus, topo) if variants is None else variants
    kinds = branching(topo, var) if kinds is None else kinds
    s_arr = np.atleast_1d(np.asarray(s, dtype=complex))
    n_s = s_arr.size
    # the cable's own terms once per distinct cable: variants that differ in their loads alone share them
    cables = list(dict.fromkeys(var.cables))
    cable_of = np.array([cables.index(c) for c in var.cables])  # (n_v,)
    z = np.stack([series_impedance_ohm_per_m(c, s_arr) for c in cables])  # (n_c, n_s)
    y = np.stack([shunt_admittance_siemens_per_m(c, s_arr) for c in cables])
    speed_c = np.array([propagation_velocity_m_per_s(c.velocity_factor) for c in cables])
    speed = speed_c[cable_of]
    n_v = speed.size
    k_count = topo.n_junctions
    k_trunk = topo.junction_position_m.size

    # 1. branches: identical ones (same stub length and load in every variant) share one computation
    loads = [var.conductance_siemens, var.capacitance_f, var.series_rc_ohm, var.series_rc_f]
    stub_kind = kinds.stub_kind
    stubs = _sections(z, y, s_arr, speed_c, kinds.stub_len_m, cable_of)
    g_k, c_k, rc_ohm_k, rc_f_k = (a[:, kinds.first] for a in loads)
    y_load = _load_admittance(g_k, c_k, rc_ohm_k, rc_f_k, s_arr)  # (n_v, n_kinds, n_s)
    zt_k = stubs.z_tanh_ohm[:, stub_kind]
    yt_k = stubs.y_tanh_siemens[:, stub_kind]
    inv_k = 1.0 / (1.0 + zt_k * y_load)
    branch_y = np.ascontiguousarray(np.moveaxis((yt_k + y_load) * inv_k, 1, 0))  # (n_kinds, n_v, n_s)
    rx_stub = np.ascontiguousarray(np.moveaxis(stubs.sech_advanced[:, stub_kind] * inv_k, 1, 0))
    y_shunt = np.zeros((k_count, n_v, n_s), dtype=complex)
    bj, starts = kinds.shunt_junction, kinds.starts
    y_shunt[bj[starts]] = branch_y[kinds.shunt_kind[starts]]
    for e in kinds.further:  # further branches sharing a junction
        y_shunt[bj[e]] += branch_y[kinds.shunt_kind[e]]

    # 2-3. sweeps along the lines, then along the trunk, with the voltage ratio across every section on the way
    seg_of = kinds.seg_of
    seg = _sections(z, y, s_arr, speed_c, kinds.seg_len_m, cable_of)
    sech = np.ascontiguousarray(np.moveaxis(seg.sech_advanced, 1, 0))  # (n_len, n_v, n_s)
    zt = np.ascontiguousarray(np.moveaxis(seg.z_tanh_ohm, 1, 0))
    yt = np.ascontiguousarray(np.moveaxis(seg.y_tanh_siemens, 1, 0))
    n_line_k = k_count - k_trunk
    y_down = np.zeros((n_line_k, n_v, n_s), dtype=complex)
    ratio_down = np.empty((n_line_k, n_v, n_s), dtype=complex)
    y_up = np.zeros((n_line_k, n_v, n_s), dtype=complex)
    ratio_up = np.ones((n_line_k, n_v, n_s), dtype=complex)
    line_y = np.empty((topo.line_junction.size, n_v, n_s), dtype=complex)

    def into(u: int, beyond: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Admittance into a section of length index u loaded by `beyond`, and V_far / V_near exp(s l / v)."""
        inv = 1.0 / (1.0 + zt[u] * beyond)
        return (yt[u] + beyond) * inv, sech[u] * inv

    line_seg = kinds.line_seg_of
    for i in range(topo.line_junction.size):  # outward from each line's far end
        first, stop = topo.line_start[i] - k_trunk, topo.line_start[i + 1] - k_trunk
        for g in range(stop - 1, first - 1, -1):
            admittance, ratio_down[g] = into(line_seg[g], y_shunt[k_trunk + g] + y_down[g])
            if g > first:
                y_down[g - 1] = admittance
            else:
                line_y[i] = admittance
        y_shunt[topo.line_junction[i]] += line_y[i]
    # rows the drivers need are filled by the sweeps below (the others are never read); the ends see nothing
    y_left = np.empty((k_trunk, n_v, n_s), dtype=complex)
    y_right = np.empty((k_trunk, n_v, n_s), dtype=complex)
    y_left[0] = 0.0
    y_right[-1] = 0.0
    ratio_left = np.empty((k_trunk - 1, n_v, n_s), dtype=complex)
    ratio_right = np.empty((k_trunk - 1, n_v, n_s), dtype=complex)
    beyond = np.empty((n_v, n_s), dtype=complex)
    inv = np.empty((n_v, n_s), dtype=complex)
    # only the parts the drivers need: left of the rightmost driver, right of the leftmost (a driver on a line
    # needs the trunk on both sides of its line's junction)
    names = tuple(topo.driver_branch) if driver_names is None else driver_names
    driver_junctions = topo.branch_junction[[topo.driver_branch[name] for name in names]]
    line_of = [topo.line_of(int(j)) for j in driver_junctions]
    driver_lines = sorted(set(line_of) - {-1})
    driver_junctions = np.array(
        [j if i < 0 else topo.line_junction[i] for j, i in zip(driver_junctions, line_of, strict=True)]
    )
    for k in range(int(driver_junctions.max())):
        u = seg_of[k]
        np.add(y_shunt[k], y_left[k], out=beyond)
        np.multiply(zt[u], beyond, out=inv)
        inv += 1.0
        np.reciprocal(inv, out=inv)
        beyond += yt[u]
        np.multiply(beyond, inv, out=y_left[k + 1])
        np.multiply(sech[u], inv, out=ratio_left[k])  # V_k / V_{k+1}
    for k in range(k_trunk - 2, int(driver_junctions.min()) - 1, -1):
        u = seg_of[k]
        np.add(y_shunt[k + 1], y_right[k + 1], out=beyond)
        np.multiply(zt[u], beyond, out=inv)
        inv += 1.0
        np.reciprocal(inv, out=inv)
        beyond += yt[u]
        np.multiply(beyond, inv, out=y_right[k])
        np.multiply(sech[u], inv, out=ratio_right[k])  # V_{k+1} / V_k
    for i in driver_lines:  # toward the trunk along each line a driver is on
        first, stop = topo.line_start[i] - k_trunk, topo.line_start[i + 1] - k_trunk
        j = topo.line_junction[i]
        behind = y_shunt[j] - line_y[i] + y_left[j] + y_right[j]
        for g in range(first, stop):
            y_up[g], ratio_up[g] = into(line_seg[g], behind)
            behind = y_shunt[k_trunk + g] + y_up[g]
    return Network(
        topology=topo,
        s=s_arr,
        speed_m_per_s=speed,
        source_ohm=np.asarray(var.source_ohm, dtype=float),
        stub_of=kinds.kind_of,
        stub_sech=np.ascontiguousarray(np.moveaxis(stubs.sech_advanced[:, stub_kind], 1, 0)),
        stub_z_tanh_ohm=np.ascontiguousarray(np.moveaxis(zt_k, 1, 0)),
        stub_y_tanh_siemens=np.ascontiguousarray(np.moveaxis(yt_k, 1, 0)),
        branch_y=branch_y,
        y_shunt=y_shunt,
        y_left=y_left,
        y_right=y_right,
        ratio_right=ratio_right,
        ratio_left=ratio_left,
        rx_stub=rx_stub,
        y_down=y_down,
        ratio_down=ratio_down,
        y_up=y_up,
        ratio_up=ratio_up,
        line_y=line_y,
    )


def _junction_voltages(net: Network, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Step 4 for one driver: V_junction / V_oc exp(s tau_J) at every junction, (K, n_v, n_s), and V / V_oc at
    the driver's own terminal, (n_v, n_s)."""
    topo = net.topology
    b = topo.driver_branch[name]
    j = int(topo.branch_junction[b])
    u = net.stub_of[b]
    k_trunk = topo.junction_position_m.size
    own_line = topo.line_of(j)
    if own_line < 0:
        y_j = net.y_shunt[j] - net.branch_y[u] + net.y_left[j] + net.y_right[j]
    else:
        y_j = net.y_shunt[j] - net.branch_y[u] + net.y_up[j - k_trunk] + net.y_down[j - k_trunk]
    near = 1.0 + net.stub_z_tanh_ohm[u] * y_j
    denom = near + net.source_ohm[:, None] * (net.stub_y_tanh_siemens[u] + y_j)
    v_j = net.stub_sech[u] / denom
    v_junction = np.empty_like(net.y_shunt)
    v_junction[j] = v_j
    v_trunk = v_junction[:k_trunk]
    if own_line >= 0:  # along the driver's line: outward to its end, inward to its trunk junction
        first, stop = topo.line_start[own_line], topo.line_start[own_line + 1]
        _outward(net.ratio_down[j + 1 - k_trunk : stop - k_trunk], v_j, v_junction[j + 1 : stop])
        inward = np.empty((j + 1 - first, *v_j.shape), dtype=complex)
        _outward(net.ratio_up[first - k_trunk : j + 1 - k_trunk][::-1], v_j, inward)
        v_junction[first:j] = inward[:-1][::-1]
        j = int(topo.line_junction[own_line])
        v_junction[j] = inward[-1]
    v_j = v_junction[j]
    _outward(net.ratio_right[j:], v_j, v_trunk[j + 1 :])
    if j > 0:
        _outward(net.ratio_left[j - 1 :: -1], v_j, v_trunk[j - 1 :: -1])
    for i in range(topo.line_junction.size):
        if i != own_line:
            first, stop = topo.line_start[i], topo.line_start[i + 1]
            _outward(
                net.ratio_down[first - k_trunk : stop - k_trunk],
                v_junction[topo.line_junction[i]],
                v_junction[first:stop],
            )
    return v_junction, np.asarray(near / denom)


def _outward(ratios: np.ndarray, v_start: np.ndarray, out: np.ndarray) -> None:
    """Voltages along a run of sections outward from a junction at v_start: out[i] = v_start prod(ratios[:i + 1]).
    One product per section over whole (n_v, n_s) blocks: numpy's cumprod along the first axis walks the memory
    across those blocks, several times slower on long Laplace grids."""
    previous = v_start
    for i in range(ratios.shape[0]):
        np.multiply(previous, ratios[i], out=out[i])
        previous = out[i]


def probe_delays_s(net: Network, driver_names: tuple[str, ...], points: ProbePoints) -> np.ndarray:
    """Geometric path delay from each driver to each probe, (n_v, n_drivers, n_p): the driver's stub, the cable
    between the junctions (along the trunk and the lines) and the probe's stub, at the cable's speed; 0 at the
    driver's own pins."""
    topo = net.topology
    node, at_junction = points.receiver >= 0, points.junction >= 0
    rx_branch = topo.receiver_branch[points.receiver[node]]
    out = np.zeros((len(driver_names), len(points.probes)))
    for i, name in enumerate(driver_names):
        b = topo.driver_branch[name]
        to_junction = topo.branch_stub_m[b] + topo.distance_m(int(topo.branch_junction[b]))  # (K,)
        to_node = to_junction[topo.branch_junction[rx_branch]] + topo.branch_stub_m[rx_branch]
        out[i, node] = np.where(rx_branch == b, 0.0, to_node)
        out[i, at_junction] = to_junction[points.junction[at_junction]]
    return np.asarray(out[None, :, :] / net.speed_m_per_s[:, None, None])


def probe_spectra(
    net: Network, driver_names: tuple[str, ...], points: ProbePoints, *, advanced: bool = False
) -> np.ndarray:
    """V_probe / V_open_circuit for each driver, (n_v, n_drivers, n_p, n_s), Laplace points last.

    advanced: leave each probe's transfer multiplied by exp(s tau), tau = probe_delays_s (module docstring).
    """
    topo = net.topology
    n_v, n_s = net.y_shunt.shape[1:]
    node = points.receiver >= 0
    at_junction = points.junction >= 0
    rx_branch = topo.receiver_branch[points.receiver[node]]
    rx_junction = topo.branch_junction[rx_branch]
    rx_stub = net.rx_stub[net.stub_of[rx_branch]]  # (n_nodes, n_v, n_s)
    out = np.empty((len(driver_names), len(points.probes), n_v, n_s), dtype=complex)
    for i, name in enumerate(driver_names):
        v_junction, v_terminal = _junction_voltages(net, name)
        rows = out[i]
        if node.all():
            np.take(v_junction, rx_junction, axis=0, out=rows)
            rows *= rx_stub
        else:
            rows[node] = v_junction[rx_junction] * rx_stub
            rows[at_junction] = v_junction[points.junction[at_junction]]
        own = np.flatnonzero(node)[rx_branch == topo.driver_branch[name]]
        rows[own] = v_terminal
        rows[~node & ~at_junction] = v_terminal
    out = np.moveaxis(out, 2, 0)  # (n_v, n_drivers, n_p, n_s)
    if not advanced:
        out *= np.exp(-net.s[None, None, None, :] * probe_delays_s(net, driver_names, points)[..., None])
    return out


@dataclass(frozen=True, slots=True)
class SettledAndFront:
    """What an edge response needs besides its transform, per volt of open-circuit drive, (n_v, n_drivers, n_p)."""

    settled: np.ndarray  # V_probe / V_oc once settled (the DC solve, s = 0)
    delay_s: np.ndarray  # geometric path delay (probe_delays_s)
    front: np.ndarray  # amplitude of the wave front (module docstring)


def settled_and_front(
    bus: Bus,
    topo: Topology,
    driver_names: tuple[str, ...],
    points: ProbePoints,
    s_real: float,
    variants: NetworkVariants | None = None,
    kinds: Branching | None = None,
) -> SettledAndFront:
    """The settled level, the path delay and the front amplitude of each probe, from one solve at s = 0 and at one
    large real Laplace point s_real.

    Front: the delay-normalised transfer at s_real (module docstring). A front that the cable or a capacitance has
    rounded within about 1 / s_real reads as the part of it that is still sharp then. The cable's dielectric loss
    is left out of that solve: its constant-phase model lets the highest frequencies run slightly ahead of v,
    which at a real s would read as gain rather than as the small advance it is; its loss at that scale,
    omega tan(delta) / (2 v), is under 1e-4 Np/m for the library cables, so a front loses nothing measurable to
    it over a bus. At s = 0 the model's dielectric admittance is 0 with or without it, so the settled level is the
    plan's own."""
    var = nominal_variant(bus, topo) if variants is None else variants
    cables = tuple(replace(c, dielectric_loss_tangent=0.0) for c in var.cables)
    net = solve_network(bus, np.array([0.0, s_real]), topo, driver_names, replace(var, cables=cables), kinds)
    spectra = probe_spectra(net, driver_names, points, advanced=True).real  # exp(0 tau) = 1 at s = 0
    return SettledAndFront(spectra[..., 0], probe_delays_s(net, driver_names, points), spectra[..., 1])


def _receiver_points(topo: Topology) -> ProbePoints:
    n = len(topo.receiver_names)
    probes = tuple(node_probe(name) for name in topo.receiver_names)
    return ProbePoints(probes, np.arange(n), np.full(n, -1))


def transfer_at(bus: Bus, s: ArrayLike, driver_names: tuple[str, ...], topo: Topology | None = None) -> np.ndarray:
    """V_receiver / V_open_circuit at Laplace points s, (n_drivers, n_s, n_receivers). See the module docstring."""
    topo = build_topology(bus) if topo is None else topo
    net = solve_network(bus, s, topo, driver_names)
    return np.swapaxes(probe_spectra(net, driver_names, _receiver_points(topo))[0], 1, 2)


def solve_bus(
    bus: Bus,
    frequency_hz: ArrayLike,
    driver_names: "tuple[str, ...] | list[str] | None" = None,
    *,
    with_junctions: bool = False,
) -> BusResponse:
    """Frequency response V_receiver / V_open_circuit from each driver to every receiver (plan node order).

    driver_names None = the primary driver only; otherwise any of the driver's name and the RS-485
    "transceiver" nodes (assumptions in the module docstring). with_junctions: also V / V_oc at every trunk
    junction. Cost O(n_freq * n_junctions) for the network plus O(n_drivers * n_freq * (n_junctions +
    n_receivers)) for the outputs. f = 0 is allowed and gives the exact DC solve.
    """
    names = resolve_driver_names(bus, driver_names)
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    bad = ~np.isfinite(f) | (f < 0)
    if f.ndim != 1 or np.any(bad):
        value = float(f[bad][0]) if np.any(bad) else None
        raise BusInputError(
            [
                Problem(
                    "frequency_hz",
                    "Frequency",
                    value,
                    {"min": 0.0, "unit": "Hz"},
                    f"Frequencies must be a list of finite values of 0 Hz or more; got {value}.",
                )
            ]
        )
    topo = build_topology(bus)
    net = solve_network(bus, 2j * np.pi * f, topo, names)
    junctions = None
    if with_junctions:
        k = topo.junction_position_m.size
        points = ProbePoints(tuple(junction_probe(x) for x in topo.junction_position_m), np.full(k, -1), np.arange(k))
        junctions = np.swapaxes(probe_spectra(net, names, points)[0], 1, 2)
    return BusResponse(
        frequency_hz=f,
        driver_names=names,
        receiver_names=topo.receiver_names,
        transfer=np.swapaxes(probe_spectra(net, names, _receiver_points(topo))[0], 1, 2),
        junction_position_m=topo.junction_position_m,
        junction_transfer=junctions,
    )


def dc_transfer(bus: Bus, driver_names: "tuple[str, ...] | list[str] | None" = None) -> np.ndarray:
    """DC V_receiver / V_open_circuit, (n_drivers, n_receivers), real: the settled level after an edge."""
    names = resolve_driver_names(bus, driver_names)
    return transfer_at(bus, np.zeros(1), names)[:, 0, :].real


def with_cable(cable: ResolvedCable, z0_ohm: float, velocity_factor: float) -> ResolvedCable:
    """The cable with another Z0 and velocity factor (C' follows as 1 / (Z0 v))."""
    c_per_m = 1.0 / (z0_ohm * propagation_velocity_m_per_s(velocity_factor))
    return replace(cable, z0_ohm=z0_ohm, velocity_factor=velocity_factor, capacitance_f_per_m=c_per_m)
