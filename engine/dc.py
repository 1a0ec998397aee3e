"""The bus's DC network, shared by every DC rule: the unit-load budget, the driven levels and the failsafe bias.

Model (differential mode, DC). The pair is one conductor path whose series resistance is the loop of both
wires, 2 * R' per metre. Every element hangs from a point of the trunk, at the end of its stub when it has one:
the driver is a Thevenin source (open-circuit voltage behind its source resistance), a receiver is its input
resistance as the load budget counts it (12 kOhm per unit load of its device; engine.devices), a parallel
terminator is its resistance (an RC terminator is open at DC) and each failsafe bias network is a Thevenin
source of its own supply voltage behind pull-up + pull-down. Node
voltages come from one nodal solve G v = i over the trunk points and stub ends (a DC ladder).

The rules on top of it (engine.rules.loads, engine.rules.voltage, engine.rules.bias) all import this module
and none of them imports another, so the network is described once.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.devices import ResolvedDevice
from pairline.engine.plan import BiasSpec

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
    """Input resistance of every receiver on the pair (budget view): nodes and, on RS-485, the driver's own."""
    return [e.resistance_ohm for e in listener_elements(bus)]


def listener_devices(bus: Bus) -> list[ResolvedDevice]:
    """The device of every listener, in listener_elements order."""

    def devices() -> tuple[ResolvedDevice, ...]:
        names = [n.name for n in bus.plan.nodes]
        if bus.plan.standard == "rs485":
            names.append(bus.plan.driver.name)
        return tuple(bus.devices[name] for name in names)

    return list(bus.memo.get(("listener_devices", bus.plan.standard), devices))


def network_supply_v(bus: Bus, bias: BiasSpec) -> float:
    """A bias network's supply: its own supply_v, else the plan's supply voltage."""
    return bias.supply_v if bias.supply_v is not None else bus.plan.supply_v


def bias_supply_v(bus: Bus) -> float:
    """The supply of the plan's first bias network (the plan's supply voltage when it has none)."""
    return network_supply_v(bus, bus.plan.bias[0]) if bus.plan.bias else bus.plan.supply_v


def bias_name(bus: Bus, index: int) -> str:
    """ "the bias network" on a plan with one, "bias network 2 (at 600 m)" on a plan with several."""
    if len(bus.plan.bias) == 1:
        return "the bias network"
    return f"bias network {index + 1} (at {bus.plan.bias[index].position_m:g} m)"


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
    where_m = np.array([(e.position_m, e.stub_m) for e in elements]).reshape(-1, 2)
    positions = np.unique(np.r_[0.0, trunk_length_m, where_m[:, 0]])
    n = positions.size
    at = np.searchsorted(positions, where_m[:, 0])
    stub_ohm = 2.0 * resistance_ohm_per_m * where_m[:, 1]  # each stub's loop_resistance_ohm
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
    """Every plan node as a receiver load (a node that may drive listens like a receiver while it does not)."""
    return list(_receivers(bus))


def _receivers(bus: Bus) -> tuple[DcElement, ...]:
    def receivers() -> tuple[DcElement, ...]:
        return tuple(
            DcElement(n.name, n.position_m, n.stub_length_m, bus.devices[n.name].budget_input_ohm)
            for n in bus.plan.nodes
        )

    return bus.memo.get("receiver_elements", receivers)


def listener_elements(bus: Bus) -> list[DcElement]:
    """Every receiver listening while the bus idles: the nodes and, on RS-485, the primary driver's own receiver
    (on RS-422 the single driver has none)."""
    return list(_listeners(bus))


def _listeners(bus: Bus) -> tuple[DcElement, ...]:
    def listeners() -> tuple[DcElement, ...]:
        d = bus.plan.driver
        own = (DcElement(d.name, d.position_m, d.stub_length_m, bus.driver_device.budget_input_ohm),)
        return _receivers(bus) + (own if bus.plan.standard == "rs485" else ())

    return bus.memo.get(("listener_elements", bus.plan.standard), listeners)


def terminator_elements(bus: Bus) -> list[DcElement]:
    """Parallel terminators (RC ones are open at DC)."""
    return [
        DcElement(f"terminator at {t.position_m:g} m", t.position_m, 0.0, t.resistance_ohm)
        for t in bus.plan.terminations
        if t.kind == "parallel"
    ]


def bias_elements(bus: Bus) -> list[DcElement]:
    """Every bias network: a source of its supply behind pull-up + pull-down."""
    return [
        DcElement(bias_name(bus, i), b.position_m, 0.0, b.pull_up_ohm + b.pull_down_ohm, network_supply_v(bus, b))
        for i, b in enumerate(bus.plan.bias)
    ]


def fixed_load_elements(bus: Bus) -> list[DcElement]:
    """Parallel terminators and every bias network with its supply (bias networks last)."""
    return [*terminator_elements(bus), *bias_elements(bus)]


def idle_levels_v(bus: Bus) -> tuple[tuple[str, ...], np.ndarray]:
    """Idle V_AB at every listener (listener_elements) with every driver off: the bias networks the only sources."""
    listeners = _listeners(bus)
    loads = tuple(fixed_load_elements(bus))

    def solve() -> tuple[tuple[str, ...], np.ndarray]:
        elements = [*listeners, *loads]
        sources_v = np.array([[e.source_v] for e in elements])
        v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)
        return tuple(r.name for r in listeners), _read_only(v[: len(listeners), 0])

    key = ("idle_levels_v", bus.plan.standard, loads, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    return bus.memo.get(key, solve)


def bias_view(bus: Bus, position_m: float) -> tuple[float, np.ndarray]:
    """(R_in, t): the idle bus's DC resistance seen from a bias point, and the ratio V_listener / V_bias-point of
    every listener (listener_elements order), with the plan's bias networks left out. Both come from one ladder
    solve with a 1 V source there, so a bias of supply V_S behind 2 R_B at that point idles listener k at
    V_k = V_S t_k R_in / (2 R_B + R_in) (superposition: the rest of the network is passive)."""
    listeners = _listeners(bus)
    terminators = tuple(terminator_elements(bus))

    def solve() -> tuple[float, np.ndarray]:
        probe = DcElement("probe", position_m, 0.0, _PROBE_OHM, 1.0)
        elements = [*listeners, *terminators, probe]
        sources_v = np.array([[e.source_v] for e in elements])
        v = solve_dc_v(elements, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m, sources_v)[:, 0]
        v_point = float(v[-1])
        current_a = (1.0 - v_point) / _PROBE_OHM
        r_in = v_point / current_a if current_a > 0.0 else math.inf
        return r_in, _read_only(np.asarray(v[: len(listeners)] / v_point, dtype=float))

    key = (
        "bias_view",
        bus.plan.standard,
        terminators,
        position_m,
        bus.plan.trunk_length_m,
        bus.cable.resistance_ohm_per_m,
    )
    return bus.memo.get(key, solve)


def _read_only(values: np.ndarray) -> np.ndarray:
    """A solve's result as kept in the layout memo: shared by its callers, so no caller may change it."""
    values.flags.writeable = False
    return values
