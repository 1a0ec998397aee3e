"""The bus's DC network, shared by every DC rule: the unit-load budget, the driven levels and the failsafe bias.

Model (differential mode, DC). The pair is one conductor path whose series resistance is the loop of both
wires, 2 * R' per metre. Every element hangs from a point of the trunk, at the end of its stub when it has one:
the driver is a Thevenin source (open-circuit voltage behind its source resistance), a receiver is its input
resistance (12 kOhm per unit load), a parallel terminator is its resistance (an RC terminator is open at DC)
and the failsafe bias network is a Thevenin source of its supply voltage behind pull-up + pull-down. Node
voltages come from one nodal solve G v = i over the trunk points and stub ends (a DC ladder).

The rules on top of it (engine.rules.loads, engine.rules.voltage, engine.rules.bias) all import this module
and none of them imports another, so the network is described once.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.plan import input_resistance_ohm

_MIN_BRANCH_OHM = 1e-6  # stands in for a zero-resistance wire or source so the nodal matrix stays regular
_PROBE_OHM = 1e-3  # a near-ideal 1 V probe source for the view from a bias point


@dataclass(frozen=True, slots=True)
class DcElement:
    """One branch from the pair to the return conductor, at a trunk point or at the end of a stub."""

    name: str
    position_m: float
    stub_m: float
    resistance_ohm: float  # math.inf for an open branch
    source_v: float = 0.0  # Thevenin voltage in series with resistance_ohm


def loop_resistance_ohm(length_m: float, resistance_ohm_per_m: float) -> float:
    """Series resistance of a pair run: both conductors, R_loop = 2 * R' * L."""
    return 2.0 * resistance_ohm_per_m * length_m


def receiver_loads_ohm(bus: Bus) -> list[float]:
    """Input resistance of every receiver on the pair: nodes and, on RS-485, the driver's own receiver."""
    loads = [input_resistance_ohm(n.unit_loads) for n in bus.plan.nodes]
    if bus.plan.standard == "rs485":
        loads.append(input_resistance_ohm(bus.driver.unit_loads))
    return loads


def bias_supply_v(bus: Bus) -> float:
    """The bias network's supply: its own supply_v, else the plan's supply voltage."""
    b = bus.plan.bias
    return b.supply_v if b is not None and b.supply_v is not None else bus.plan.supply_v


def solve_dc_v(
    elements: list[DcElement], trunk_length_m: float, resistance_ohm_per_m: float, sources_v: np.ndarray
) -> np.ndarray:
    """Voltage across the pair at each element's own terminal, for several source settings at once.

    sources_v  # (n_elements, n_cases): the Thevenin voltage of every element in each case
    returns    # (n_elements, n_cases) in volts
    """
    resistance_ohm = np.broadcast_to([e.resistance_ohm for e in elements], (sources_v.shape[1], len(elements)))
    v = solve_dc_cases_v(elements, resistance_ohm, sources_v.T, trunk_length_m, resistance_ohm_per_m)
    return np.ascontiguousarray(v.T)


def solve_dc_cases_v(
    elements: list[DcElement],
    resistance_ohm: np.ndarray,
    sources_v: np.ndarray,
    trunk_length_m: float,
    resistance_ohm_per_m: float,
) -> np.ndarray:
    """Voltage at each element's own terminal in several cases that may differ in element resistances too.

    resistance_ohm, sources_v  # (n_cases, n_elements): each element's Thevenin resistance and voltage per case
    returns                    # (n_cases, n_elements) in volts

    Nodal analysis on the trunk points (every element position plus both trunk ends), joined by sections of
    loop resistance 2 R' L. A stub is folded into its element (stub loop resistance in series with the
    element's Thevenin resistance), which leaves a chain: a tridiagonal system, solved by the Thomas
    algorithm in O(n), batched over the cases. The stub end's voltage then follows from the element's current.
    """
    n_cases = resistance_ohm.shape[0]
    positions = np.unique(np.array([0.0, trunk_length_m] + [e.position_m for e in elements]))
    n = positions.size
    at = np.searchsorted(positions, [e.position_m for e in elements])
    stub_ohm = np.array([loop_resistance_ohm(e.stub_m, resistance_ohm_per_m) for e in elements])
    branch_ohm = np.maximum(resistance_ohm, _MIN_BRANCH_OHM) + stub_ohm
    branch_siemens = np.where(np.isinf(branch_ohm), 0.0, 1.0 / branch_ohm)  # (n_cases, n_elements)
    # Internally trunk points come first, (n, n_cases), so each sweep step reads one contiguous row.
    diag = np.zeros((n, n_cases))
    rhs = np.zeros((n, n_cases))
    np.add.at(diag, at, branch_siemens.T)
    np.add.at(rhs, at, (branch_siemens * sources_v).T)
    link_siemens = 1.0 / np.maximum(2.0 * resistance_ohm_per_m * np.diff(positions), _MIN_BRANCH_OHM)  # (n - 1,)
    diag += 1e-15  # a tiny leak to the return conductor keeps a bus with every load open solvable
    diag[:-1] += link_siemens[:, None]
    diag[1:] += link_siemens[:, None]
    v_trunk = _chain_solve_v(link_siemens, diag, rhs).T  # (n_cases, n)
    v_tap = v_trunk[:, at]  # (n_cases, n_elements)
    current_a = (v_tap - sources_v) * branch_siemens  # into each element from the trunk
    return np.asarray(v_tap - current_a * stub_ohm, dtype=float)


_DENSE_ENTRIES = 4_000_000  # up to this many matrix entries one LAPACK call beats the Python-level sweep


def _chain_solve_v(link_siemens: np.ndarray, diag: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve the chain's tridiagonal system for every case. diag, rhs  # (n, n_cases)

    Small chains go to LAPACK as dense matrices (one matrix for every case when the cases share it, else a
    batch); long chains with many differing cases use the Thomas sweep, O(n) per case."""
    n, n_cases = diag.shape
    shared = bool(np.all(diag == diag[:, :1]))
    if n * n * (1 if shared else n_cases) > _DENSE_ENTRIES:
        return _thomas_v(link_siemens, diag, rhs)
    off = np.zeros((n, n))
    idx = np.arange(n - 1)
    off[idx, idx + 1] = -link_siemens
    off[idx + 1, idx] = -link_siemens
    if shared:
        return np.asarray(np.linalg.solve(off + np.diag(diag[:, 0]), rhs), dtype=float)
    matrices = off[None, :, :] + diag.T[:, :, None] * np.eye(n)[None, :, :]  # (n_cases, n, n)
    return np.asarray(np.linalg.solve(matrices, rhs.T[:, :, None])[:, :, 0].T, dtype=float)


def _thomas_v(link_siemens: np.ndarray, diag: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve the chain's tridiagonal system (off-diagonals -link_siemens) for every case: forward sweep,
    back substitution. diag, rhs  # (n, n_cases)"""
    n = diag.shape[0]
    c_prime = np.zeros(diag.shape)
    d_prime = np.zeros(rhs.shape)
    if n > 1:
        c_prime[0] = -link_siemens[0] / diag[0]
    d_prime[0] = rhs[0] / diag[0]
    for k in range(1, n):
        denom = diag[k] + link_siemens[k - 1] * c_prime[k - 1]
        if k < n - 1:
            c_prime[k] = -link_siemens[k] / denom
        d_prime[k] = (rhs[k] + link_siemens[k - 1] * d_prime[k - 1]) / denom
    v = np.zeros(rhs.shape)
    v[-1] = d_prime[-1]
    for k in range(n - 2, -1, -1):
        v[k] = d_prime[k] - c_prime[k] * v[k + 1]
    return v


def receiver_elements(bus: Bus) -> list[DcElement]:
    """Every plan node as a receiver load (a transceiver node that is not driving listens like a receiver)."""
    return [
        DcElement(n.name, n.position_m, n.stub_length_m, input_resistance_ohm(n.unit_loads)) for n in bus.plan.nodes
    ]


def listener_elements(bus: Bus) -> list[DcElement]:
    """Every receiver listening while the bus idles: the nodes and, on RS-485, the primary driver's own receiver
    (on RS-422 the single driver has none)."""
    listeners = receiver_elements(bus)
    d = bus.plan.driver
    if bus.plan.standard == "rs485":
        listeners.append(DcElement(d.name, d.position_m, d.stub_length_m, input_resistance_ohm(bus.driver.unit_loads)))
    return listeners


def fixed_load_elements(bus: Bus) -> list[DcElement]:
    """Parallel terminators (RC ones are open at DC) and the bias network with its supply."""
    loads = [
        DcElement(f"terminator at {t.position_m:g} m", t.position_m, 0.0, t.resistance_ohm)
        for t in bus.plan.terminations
        if t.kind == "parallel"
    ]
    if bus.plan.bias is not None:
        b = bus.plan.bias
        loads.append(DcElement("bias network", b.position_m, 0.0, b.pull_up_ohm + b.pull_down_ohm, bias_supply_v(bus)))
    return loads


def idle_levels_v(bus: Bus) -> tuple[tuple[str, ...], np.ndarray]:
    """Idle V_AB at every listener (listener_elements) with every driver off: the bias network the only source."""
    listeners = listener_elements(bus)
    elements = [*listeners, *fixed_load_elements(bus)]
    sources_v = np.array([[e.source_v] for e in elements])
    v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)
    return tuple(r.name for r in listeners), v[: len(listeners), 0]


def bias_view(bus: Bus, position_m: float) -> tuple[float, float]:
    """(R_in, t_min): the idle bus's DC resistance seen from a bias point, and the lowest ratio
    V_listener / V_bias-point over the listeners, with any bias network of the plan left out. Both come from one
    ladder solve with a 1 V source there, so a bias of supply V_S behind 2 R_B at that point idles listener k at
    V_k = V_S t_k R_in / (2 R_B + R_in) (superposition: the rest of the network is passive)."""
    listeners = listener_elements(bus)
    passive = [e for e in fixed_load_elements(bus) if e.source_v == 0.0]
    probe = DcElement("probe", position_m, 0.0, _PROBE_OHM, 1.0)
    elements = [*listeners, *passive, probe]
    sources_v = np.array([[e.source_v] for e in elements])
    v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)[:, 0]
    v_point = float(v[-1])
    current_a = (1.0 - v_point) / _PROBE_OHM
    r_in = v_point / current_a if current_a > 0.0 else math.inf
    t_min = float(np.min(v[: len(listeners)]) / v_point) if listeners else 1.0
    return r_in, t_min
