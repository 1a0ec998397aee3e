"""Whole-bus frequency response: trunk, stubs, loads and a Thevenin driver, solved at all frequencies at once.

Model (differential mode, see engine/line.py for the cable):
- The trunk runs from 0 to trunk_length_m. Every position where something attaches (node, driver,
  terminator, bias, the two ends) is a junction; between neighbouring junctions lies a trunk segment.
- Each node hangs on its own stub of the same cable as the trunk, ending in its receiver input
  R_in = 12 kOhm / unit_loads in parallel with input_capacitance_f. A stub of length 0 puts the load on the trunk.
- Terminators sit on the trunk: parallel R, or R in series with C ("rc"). The failsafe bias network is
  its DC-equivalent resistance across the pair, pull_up_ohm + pull_down_ohm (the supply is an AC short).
- The driving node is a Thevenin source (open_circuit_v, source_ohm of the plan's driver class) at the end of
  its stub. Its own receiver input is left out while it drives: 12 kOhm / UL is negligible beside the source
  resistance, and the part's pin capacitance is already inside the class's measured rise time. Every RS-485
  "transceiver" node drives with the plan's driver class. Nodes not driving load the bus as receivers; the
  primary driver, when a transceiver drives, loads the bus with its receiver: 12 kOhm / driver.unit_loads in
  parallel with the plan's default node input capacitance (DRIVER_INPUT_CAPACITANCE_F).

Method, linear in the number of junctions K for every frequency at once:
1. Stub input admittances Y_in = (tanh/Z0 + Y_L) / (1 + Z0 tanh Y_L) give the shunt admittance at each junction.
2. Two sweeps along the trunk give, at each junction, the admittance looking left (YL) and right (YR)
   into the rest of the trunk (input admittance of a loaded line, recursively).
3. From the driver's junction, voltages propagate outward segment by segment:
   V_next / V_here = sech / (1 + Z0 tanh Y_next), Y_next = everything beyond (Pozar, table 4.1 ABCD).
   The products are kept as cumulative sums of logarithms, so any driver junction is a difference of two
   prefix sums: all drivers are evaluated in one batched pass, without re-sweeping.
4. The driver's stub with its Thevenin source closes the chain:
   V_J / V_oc = sech / ((1 + Z0 tanh Y_J) + R_s (tanh/Z0 + Y_J)); the source end sits at
   V_e / V_oc = (1 + Z0 tanh Y_J) / (same denominator).
All arithmetic uses tanh, sech and tanh(x)/x forms that stay finite at DC and on very lossy lines.
"""

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from engine.bus import Bus
from engine.line import (
    SectionTerms,
    input_admittance_siemens,
    section_terms,
    series_impedance_ohm_per_m,
    shunt_admittance_siemens_per_m,
    voltage_transfer,
)
from engine.plan import BusInputError, NodeSpec, Problem, input_resistance_ohm

DRIVER_INPUT_CAPACITANCE_F: float = float(NodeSpec.model_fields["input_capacitance_f"].default)


@dataclass(frozen=True, slots=True)
class BusResponse:
    """Transfer from each driver's open-circuit voltage to each receiver input.

    transfer: (n_drivers, n_freq, n_receivers) complex, V_receiver / V_open_circuit; receivers in plan node order.
    """

    frequency_hz: np.ndarray  # (n_freq,)
    driver_names: tuple[str, ...]
    receiver_names: tuple[str, ...]
    transfer: np.ndarray  # (n_drivers, n_freq, n_receivers)


@dataclass(frozen=True, slots=True)
class Topology:
    """The bus as junctions, trunk segments and branches (each a stub ending in a load)."""

    junction_position_m: np.ndarray  # (K,)
    segment_length_m: np.ndarray  # (K - 1,)
    branch_junction: np.ndarray  # (n_b,) int
    branch_stub_m: np.ndarray  # (n_b,)
    branch_conductance_siemens: np.ndarray  # (n_b,) resistive part of the load (receivers, bias, parallel R)
    branch_capacitance_f: np.ndarray  # (n_b,) shunt capacitance of the load (receivers)
    branch_series_rc_ohm: np.ndarray  # (n_b,) R of an "rc" terminator, 0 otherwise
    branch_series_rc_f: np.ndarray  # (n_b,) C of an "rc" terminator, 0 otherwise
    receiver_branch: np.ndarray  # (n_receivers,) branch index of each plan node
    receiver_names: tuple[str, ...]
    driver_branch: dict[str, int]  # name -> branch index of every node that may drive


def build_topology(bus: Bus) -> Topology:
    """Junctions, segments and branches of the bus (branch 0 is the primary driver's own receiver)."""
    plan = bus.plan
    stub: list[float] = []
    pos: list[float] = []
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
    driver_branch = {
        drv.name: add(
            drv.position_m,
            drv.stub_length_m,
            1.0 / input_resistance_ohm(bus.driver.unit_loads),
            DRIVER_INPUT_CAPACITANCE_F,
        )
    }
    receiver_branch = []
    for node in plan.nodes:
        b = add(
            node.position_m, node.stub_length_m, 1.0 / input_resistance_ohm(node.unit_loads), node.input_capacitance_f
        )
        receiver_branch.append(b)
        if node.role == "transceiver" and plan.standard == "rs485":
            driver_branch[node.name] = b
    for term in plan.terminations:
        if term.kind == "rc" and term.capacitance_f is not None:
            add(term.position_m, 0.0, 0.0, 0.0, term.resistance_ohm, term.capacitance_f)
        else:
            add(term.position_m, 0.0, 1.0 / term.resistance_ohm, 0.0)
    if plan.bias is not None:
        add(plan.bias.position_m, 0.0, 1.0 / (plan.bias.pull_up_ohm + plan.bias.pull_down_ohm), 0.0)

    positions = np.asarray(pos)
    junctions = np.unique(np.concatenate([positions, [0.0, plan.trunk_length_m]]))
    return Topology(
        junction_position_m=junctions,
        segment_length_m=np.diff(junctions),
        branch_junction=np.searchsorted(junctions, positions),
        branch_stub_m=np.asarray(stub),
        branch_conductance_siemens=np.asarray(cond),
        branch_capacitance_f=np.asarray(cap),
        branch_series_rc_ohm=np.asarray(rc_r),
        branch_series_rc_f=np.asarray(rc_c),
        receiver_branch=np.asarray(receiver_branch, dtype=int),
        receiver_names=tuple(n.name for n in plan.nodes),
        driver_branch=driver_branch,
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


def load_admittance_siemens(topo: Topology, s: np.ndarray) -> np.ndarray:
    """Admittance of each branch's load, (n_s, n_b): G + s C, plus s C_t / (1 + s R_t C_t) for RC terminators."""
    s_col = s[:, None]
    y = topo.branch_conductance_siemens[None, :] + s_col * topo.branch_capacitance_f[None, :]
    rc = topo.branch_series_rc_f > 0
    if np.any(rc):
        c_t = topo.branch_series_rc_f[rc]
        y[:, rc] += s_col * c_t / (1.0 + s_col * topo.branch_series_rc_ohm[rc] * c_t)
    return y


def _take(terms: SectionTerms, index: np.ndarray) -> SectionTerms:
    return SectionTerms(
        terms.sech_term[:, index],
        terms.log_sech_term[:, index],
        terms.z_tanh_ohm[:, index],
        terms.y_tanh_siemens[:, index],
    )


@dataclass(frozen=True, slots=True)
class Network:
    """The passive bus (every node a load) solved at Laplace points s: what any driver needs, (n_s, ...)."""

    topology: Topology
    source_ohm: float
    y_load: np.ndarray  # (n_s, n_b) load admittance of each branch
    y_branch: np.ndarray  # (n_s, n_b) admittance into each branch at its junction
    stubs: SectionTerms  # (n_s, n_b)
    y_shunt: np.ndarray  # (n_s, K)
    y_left: np.ndarray  # (n_s, K) looking left into the trunk, own shunt excluded
    y_right: np.ndarray  # (n_s, K)
    cum_right: np.ndarray  # (n_s, K) prefix sums of log(V_{k+1} / V_k)
    cum_left: np.ndarray  # (n_s, K) prefix sums of log(V_k / V_{k+1})
    rx_stub: np.ndarray  # (n_s, n_receivers) V_receiver / V_junction


def solve_network(bus: Bus, s: ArrayLike, topo: Topology | None = None) -> Network:
    """Steps 1-3 of the module docstring: branch admittances, both sweeps, outward voltage ratios."""
    topo = build_topology(bus) if topo is None else topo
    s_arr = np.atleast_1d(np.asarray(s, dtype=complex))
    n_s = s_arr.size
    z = series_impedance_ohm_per_m(bus.cable, s_arr)
    y = shunt_admittance_siemens_per_m(bus.cable, s_arr)
    k_count = topo.junction_position_m.size

    stubs = section_terms(z, y, topo.branch_stub_m)
    y_load = load_admittance_siemens(topo, s_arr)
    y_branch = input_admittance_siemens(stubs, y_load)  # (n_s, n_b)
    order = np.argsort(topo.branch_junction, kind="stable")
    bj = topo.branch_junction[order]
    starts = np.flatnonzero(np.r_[True, bj[1:] != bj[:-1]])
    y_shunt = np.zeros((n_s, k_count), dtype=complex)
    y_shunt[:, bj[starts]] = np.add.reduceat(y_branch[:, order], starts, axis=1)

    seg = section_terms(z, y, topo.segment_length_m)  # (n_s, K-1)
    y_left = np.zeros((n_s, k_count), dtype=complex)
    y_right = np.zeros((n_s, k_count), dtype=complex)
    zt, yt = seg.z_tanh_ohm, seg.y_tanh_siemens
    for k in range(k_count - 1):
        beyond = y_shunt[:, k] + y_left[:, k]
        y_left[:, k + 1] = (yt[:, k] + beyond) / (1.0 + zt[:, k] * beyond)
    for k in range(k_count - 2, -1, -1):
        beyond = y_shunt[:, k + 1] + y_right[:, k + 1]
        y_right[:, k] = (yt[:, k] + beyond) / (1.0 + zt[:, k] * beyond)

    log_right = seg.log_sech_term - np.log(1.0 + zt * (y_shunt[:, 1:] + y_right[:, 1:]))  # log V_{k+1}/V_k
    log_left = seg.log_sech_term - np.log(1.0 + zt * (y_shunt[:, :-1] + y_left[:, :-1]))  # log V_k/V_{k+1}
    zero = np.zeros((n_s, 1), dtype=complex)
    rx = topo.receiver_branch
    return Network(
        topology=topo,
        source_ohm=bus.driver.source_ohm,
        y_load=y_load,
        y_branch=y_branch,
        stubs=stubs,
        y_shunt=y_shunt,
        y_left=y_left,
        y_right=y_right,
        cum_right=np.concatenate([zero, np.cumsum(log_right, axis=1)], axis=1),
        cum_left=np.concatenate([zero, np.cumsum(log_left, axis=1)], axis=1),
        rx_stub=voltage_transfer(_take(stubs, rx), y_load[:, rx]),
    )


def driver_transfer(net: Network, driver_names: tuple[str, ...], rows: slice = slice(None)) -> np.ndarray:
    """Step 4: V_receiver / V_open_circuit for each driver, (n_drivers, n_rows, n_receivers).

    rows selects a range of the network's Laplace points, so long batches can be turned into waveforms piece
    by piece without holding every driver x point x receiver value at once.
    """
    topo = net.topology
    rx_branch = topo.receiver_branch
    rx_junction = topo.branch_junction[rx_branch]
    r_s = net.source_ohm
    cum_right, cum_left = net.cum_right[rows], net.cum_left[rows]
    rx_stub = net.rx_stub[rows]
    n_s = rx_stub.shape[0]
    out = np.empty((len(driver_names), n_s, rx_branch.size), dtype=complex)
    for i, name in enumerate(driver_names):
        b = topo.driver_branch[name]
        j = topo.branch_junction[b]
        y_j = net.y_shunt[rows, j] - net.y_branch[rows, b] + net.y_left[rows, j] + net.y_right[rows, j]
        near = 1.0 + net.stubs.z_tanh_ohm[rows, b] * y_j
        denom = near + r_s * (net.stubs.y_tanh_siemens[rows, b] + y_j)
        v_j = net.stubs.sech_term[rows, b] / denom
        exponent = np.where(
            rx_junction[None, :] >= j,
            cum_right[:, rx_junction] - cum_right[:, [j]],
            cum_left[:, [j]] - cum_left[:, rx_junction],
        )
        out[i] = v_j[:, None] * np.exp(exponent) * rx_stub
        own = np.flatnonzero(rx_branch == b)
        if own.size:
            out[i][:, own] = (near / denom)[:, None]
    return out


def transfer_at(bus: Bus, s: ArrayLike, driver_names: tuple[str, ...], topo: Topology | None = None) -> np.ndarray:
    """V_receiver / V_open_circuit at Laplace points s, (n_drivers, n_s, n_receivers). See the module docstring."""
    return driver_transfer(solve_network(bus, s, topo), driver_names)


def solve_bus(
    bus: Bus, frequency_hz: ArrayLike, driver_names: "tuple[str, ...] | list[str] | None" = None
) -> BusResponse:
    """Frequency response V_receiver / V_open_circuit from each driver to every receiver (plan node order).

    driver_names None = the primary driver only; otherwise any of the driver's name and the RS-485
    "transceiver" nodes (assumptions in the module docstring). Cost O(n_freq * n_junctions) plus
    O(n_drivers * n_freq * n_receivers) for the output. f = 0 is allowed and gives the exact DC solve.
    """
    names = resolve_driver_names(bus, driver_names)
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    topo = build_topology(bus)
    return BusResponse(
        frequency_hz=f,
        driver_names=names,
        receiver_names=topo.receiver_names,
        transfer=transfer_at(bus, 2j * np.pi * f, names, topo),
    )


def dc_transfer(bus: Bus, driver_names: "tuple[str, ...] | list[str] | None" = None) -> np.ndarray:
    """DC V_receiver / V_open_circuit, (n_drivers, n_receivers), real: the settled level after an edge."""
    names = resolve_driver_names(bus, driver_names)
    return transfer_at(bus, np.zeros(1), names)[:, 0, :].real
