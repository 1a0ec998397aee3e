"""Whole-bus frequency response: trunk, stubs, loads and a Thevenin driver, solved at all frequencies at once.

Model (differential mode, see engine/line.py for the cable):
- The trunk runs from 0 to trunk_length_m. Every position where something attaches (node, driver,
  terminator, bias, the two ends) is a junction; between neighbouring junctions lies a trunk segment.
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

Method, linear in the number of junctions K for every frequency at once:
1. Stub input admittances Y_in = (tanh/Z0 + Y_L) / (1 + Z0 tanh Y_L) give the shunt admittance at each junction.
2. Two sweeps along the trunk give, at each junction, the admittance looking left (YL) and right (YR)
   into the rest of the trunk (input admittance of a loaded line, recursively).
3. From the driver's junction, voltages propagate outward segment by segment:
   V_next / V_here = sech / (1 + Z0 tanh Y_next), Y_next = everything beyond (Pozar, table 4.1 ABCD).
   These ratios do not depend on where the driver sits (the sweeps exclude each junction's own shunt), so
   every driver reuses the same sweeps: a cumulative product outward from its junction, O(K) per driver.
4. The driver's stub with its Thevenin source closes the chain:
   V_J / V_oc = sech / ((1 + Z0 tanh Y_J) + R_s (tanh/Z0 + Y_J)); the source end sits at
   V_e / V_oc = (1 + Z0 tanh Y_J) / (same denominator).
All arithmetic uses tanh, sech and tanh(x)/x forms that stay finite at DC and on very lossy lines.
"""

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from pairline.engine.bus import Bus
from pairline.engine.line import (
    SectionTerms,
    section_terms,
    series_impedance_ohm_per_m,
    shunt_admittance_siemens_per_m,
)
from pairline.engine.plan import BusInputError, Problem


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
    own = bus.driver_device
    driver_branch = {
        drv.name: add(drv.position_m, drv.stub_length_m, 1.0 / own.differential_input_ohm, own.input_capacitance_f)
    }
    receiver_branch = []
    for node in plan.nodes:
        device = bus.devices[node.name]
        b = add(node.position_m, node.stub_length_m, 1.0 / device.differential_input_ohm, device.input_capacitance_f)
        receiver_branch.append(b)
        if node.may_drive and plan.standard == "rs485":
            driver_branch[node.name] = b
    for term in plan.terminations:
        if term.kind == "rc" and term.capacitance_f is not None:
            add(term.position_m, 0.0, 0.0, 0.0, term.resistance_ohm, term.capacitance_f)
        else:
            add(term.position_m, 0.0, 1.0 / term.resistance_ohm, 0.0)
    for bias in plan.bias:
        add(bias.position_m, 0.0, 1.0 / (bias.pull_up_ohm + bias.pull_down_ohm), 0.0)

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


def _load_admittance(
    g_siemens: np.ndarray, c_f: np.ndarray, rc_ohm: np.ndarray, rc_f: np.ndarray, s: np.ndarray
) -> np.ndarray:
    """Admittance of loads, (n_loads, n_s): G + s C, plus s C_t / (1 + s R_t C_t) for RC terminators."""
    s_row = s[None, :]
    y = g_siemens[:, None] + c_f[:, None] * s_row
    rc = rc_f > 0
    if np.any(rc):
        c_t = rc_f[rc][:, None]
        y[rc] += s_row * c_t / (1.0 + s_row * rc_ohm[rc][:, None] * c_t)
    return np.asarray(y)


@dataclass(frozen=True, slots=True)
class Network:
    """The passive bus (every node a load) solved at Laplace points s: what any driver needs.

    Junction-major layout, (n_junctions, n_s): the sweeps walk contiguous rows. Stub terms are kept per
    distinct kind of branch (stub_of maps a branch to its row).
    """

    topology: Topology
    source_ohm: float
    stub_of: np.ndarray  # (n_b,) row of each branch's kind (stub length and load) in the stub tables
    stub_sech: np.ndarray  # (n_kinds, n_s) sech(gamma l)
    stub_z_tanh_ohm: np.ndarray  # (n_kinds, n_s) Z0 tanh(gamma l)
    stub_y_tanh_siemens: np.ndarray  # (n_kinds, n_s) tanh(gamma l) / Z0
    driver_y_branch: dict[str, np.ndarray]  # name -> (n_s,) admittance into the driver's branch when passive
    y_shunt: np.ndarray  # (K, n_s)
    y_left: np.ndarray  # (K, n_s) looking left into the trunk, own shunt excluded
    y_right: np.ndarray  # (K, n_s)
    ratio_right: np.ndarray  # (K - 1, n_s) V_{k+1} / V_k with the driver on the left of segment k
    ratio_left: np.ndarray  # (K - 1, n_s) V_k / V_{k+1} with the driver on the right
    rx_stub: np.ndarray  # (n_receivers, n_s) V_receiver / V_junction


def _rows(terms: SectionTerms) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(n_s, n) section terms as contiguous (n, n_s) rows: sech, log sech, Z0 tanh, tanh / Z0."""
    return (
        np.ascontiguousarray(terms.sech_term.T),
        np.ascontiguousarray(terms.log_sech_term.T),
        np.ascontiguousarray(terms.z_tanh_ohm.T),
        np.ascontiguousarray(terms.y_tanh_siemens.T),
    )


def solve_network(
    bus: Bus, s: ArrayLike, topo: Topology | None = None, driver_names: "tuple[str, ...] | None" = None
) -> Network:
    """Steps 1-3 of the module docstring: branch admittances, both sweeps, outward voltage ratios.

    driver_names: the drivers the network will be asked about (None: every node that may drive).
    """
    topo = build_topology(bus) if topo is None else topo
    s_arr = np.atleast_1d(np.asarray(s, dtype=complex))
    n_s = s_arr.size
    z = series_impedance_ohm_per_m(bus.cable, s_arr)
    y = shunt_admittance_siemens_per_m(bus.cable, s_arr)
    k_count = topo.junction_position_m.size

    # 1. branches: identical ones (same stub length and load, as on most real buses) share one computation;
    # then the shunt admittance per junction
    params = np.column_stack(
        [
            np.round(topo.branch_stub_m, 9),
            topo.branch_conductance_siemens,
            topo.branch_capacitance_f,
            topo.branch_series_rc_ohm,
            topo.branch_series_rc_f,
        ]
    )
    kinds, kind_of = np.unique(params, axis=0, return_inverse=True)
    kind_of = kind_of.ravel()
    sech_k, _, zt_k, yt_k = _rows(section_terms(z, y, kinds[:, 0]))
    y_load_k = _load_admittance(kinds[:, 1], kinds[:, 2], kinds[:, 3], kinds[:, 4], s_arr)
    y_branch_k = (yt_k + y_load_k) / (1.0 + zt_k * y_load_k)  # (n_kinds, n_s) into each kind of branch
    rx_stub_k = sech_k / (1.0 + zt_k * y_load_k)  # (n_kinds, n_s) V_load / V_junction
    order = np.argsort(topo.branch_junction, kind="stable")
    bj = topo.branch_junction[order]
    starts = np.flatnonzero(np.r_[True, bj[1:] != bj[:-1]])
    y_shunt = np.zeros((k_count, n_s), dtype=complex)
    y_shunt[bj[starts]] = y_branch_k[kind_of[order[starts]]]
    for e in np.setdiff1d(np.arange(order.size), starts):  # further branches sharing a junction
        y_shunt[bj[e]] += y_branch_k[kind_of[order[e]]]
    names = tuple(topo.driver_branch) if driver_names is None else driver_names
    driver_y = {name: y_branch_k[kind_of[topo.driver_branch[name]]] for name in names}
    rx_stub = rx_stub_k[kind_of[topo.receiver_branch]]

    # 2-3. sweeps along the trunk, with the voltage ratio across every segment on the way
    seg_len, seg_of = np.unique(np.round(topo.segment_length_m, 9), return_inverse=True)
    sech, _, zt, yt = _rows(section_terms(z, y, seg_len))
    y_left = np.zeros((k_count, n_s), dtype=complex)
    y_right = np.zeros((k_count, n_s), dtype=complex)
    ratio_left = np.empty((k_count - 1, n_s), dtype=complex)
    ratio_right = np.empty((k_count - 1, n_s), dtype=complex)
    beyond = np.empty(n_s, dtype=complex)
    inv = np.empty(n_s, dtype=complex)
    # only the parts the drivers need: left of the rightmost driver, right of the leftmost
    driver_junctions = topo.branch_junction[[topo.driver_branch[name] for name in names]]
    for k in range(int(driver_junctions.max())):
        u = seg_of[k]
        np.add(y_shunt[k], y_left[k], out=beyond)
        np.multiply(zt[u], beyond, out=inv)
        inv += 1.0
        np.reciprocal(inv, out=inv)
        beyond += yt[u]
        np.multiply(beyond, inv, out=y_left[k + 1])
        np.multiply(sech[u], inv, out=ratio_left[k])  # V_k / V_{k+1}
    for k in range(k_count - 2, int(driver_junctions.min()) - 1, -1):
        u = seg_of[k]
        np.add(y_shunt[k + 1], y_right[k + 1], out=beyond)
        np.multiply(zt[u], beyond, out=inv)
        inv += 1.0
        np.reciprocal(inv, out=inv)
        beyond += yt[u]
        np.multiply(beyond, inv, out=y_right[k])
        np.multiply(sech[u], inv, out=ratio_right[k])  # V_{k+1} / V_k
    return Network(
        topology=topo,
        source_ohm=bus.driver.source_ohm,
        stub_of=kind_of,
        stub_sech=sech_k,
        stub_z_tanh_ohm=zt_k,
        stub_y_tanh_siemens=yt_k,
        driver_y_branch=driver_y,
        y_shunt=y_shunt,
        y_left=y_left,
        y_right=y_right,
        ratio_right=ratio_right,
        ratio_left=ratio_left,
        rx_stub=rx_stub,
    )


def _junction_voltages(net: Network, name: str) -> tuple[np.ndarray, np.ndarray]:
    """Step 4 for one driver: V_junction / V_oc at every junction, (K, n_s), and at the driver's own terminal."""
    topo = net.topology
    b = topo.driver_branch[name]
    j = topo.branch_junction[b]
    u = net.stub_of[b]
    y_j = net.y_shunt[j] - net.driver_y_branch[name] + net.y_left[j] + net.y_right[j]
    near = 1.0 + net.stub_z_tanh_ohm[u] * y_j
    denom = near + net.source_ohm * (net.stub_y_tanh_siemens[u] + y_j)
    v_j = net.stub_sech[u] / denom
    v_junction = np.empty_like(net.y_shunt)
    v_junction[j] = v_j
    if j + 1 < v_junction.shape[0]:
        np.cumprod(net.ratio_right[j:], axis=0, out=v_junction[j + 1 :])
        v_junction[j + 1 :] *= v_j
    if j > 0:
        np.cumprod(net.ratio_left[j - 1 :: -1], axis=0, out=v_junction[j - 1 :: -1])
        v_junction[:j] *= v_j
    return v_junction, np.asarray(near / denom)


def receiver_spectra(net: Network, driver_names: tuple[str, ...], receivers: np.ndarray | None = None) -> np.ndarray:
    """Step 4: V_receiver / V_open_circuit for each driver, (n_drivers, n_receivers, n_s), frequency last.

    receivers: indices (plan node order) of the receivers wanted; None = all.
    """
    topo = net.topology
    pick = np.arange(topo.receiver_branch.size) if receivers is None else np.asarray(receivers, dtype=int)
    rx_branch = topo.receiver_branch[pick]
    rx_junction = topo.branch_junction[rx_branch]
    rx_stub = net.rx_stub if receivers is None else net.rx_stub[pick]
    out = np.empty((len(driver_names), rx_branch.size, net.y_shunt.shape[1]), dtype=complex)
    for i, name in enumerate(driver_names):
        v_junction, v_terminal = _junction_voltages(net, name)
        np.multiply(v_junction[rx_junction], rx_stub, out=out[i])
        own = rx_branch == topo.driver_branch[name]
        if np.any(own):
            out[i][own] = v_terminal
    return out


def driver_terminal_spectra(net: Network, driver_names: tuple[str, ...]) -> np.ndarray:
    """V / V_open_circuit at each driver's own terminal (the end of its stub, behind the source), (n_drivers, n_s)."""
    return np.stack([_junction_voltages(net, name)[1] for name in driver_names])


def junction_spectra(net: Network, driver_names: tuple[str, ...]) -> np.ndarray:
    """V_junction / V_open_circuit at every trunk junction for each driver, (n_drivers, K, n_s)."""
    return np.stack([_junction_voltages(net, name)[0] for name in driver_names])


def transfer_at(bus: Bus, s: ArrayLike, driver_names: tuple[str, ...], topo: Topology | None = None) -> np.ndarray:
    """V_receiver / V_open_circuit at Laplace points s, (n_drivers, n_s, n_receivers). See the module docstring."""
    return np.swapaxes(receiver_spectra(solve_network(bus, s, topo, driver_names), driver_names), 1, 2)


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
    return BusResponse(
        frequency_hz=f,
        driver_names=names,
        receiver_names=topo.receiver_names,
        transfer=np.swapaxes(receiver_spectra(net, names), 1, 2),
        junction_position_m=topo.junction_position_m,
        junction_transfer=np.swapaxes(junction_spectra(net, names), 1, 2) if with_junctions else None,
    )


def dc_transfer(bus: Bus, driver_names: "tuple[str, ...] | list[str] | None" = None) -> np.ndarray:
    """DC V_receiver / V_open_circuit, (n_drivers, n_receivers), real: the settled level after an edge."""
    names = resolve_driver_names(bus, driver_names)
    return transfer_at(bus, np.zeros(1), names)[:, 0, :].real
