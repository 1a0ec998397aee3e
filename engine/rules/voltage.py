"""DC differential level at every receiver through the cable's loop resistance (rule "signal.dc_level").

Model (differential mode, DC). The pair is one conductor path whose series resistance is the loop of both
wires, 2 * R' per metre. Every element hangs from a point of the trunk, at the end of its stub when it has one:
the driver is a Thevenin source (open-circuit voltage behind its source resistance), a receiver is its input
resistance (12 kOhm per unit load), a parallel terminator is its resistance (an RC terminator is open at DC)
and the failsafe bias network is a Thevenin source of its supply voltage behind pull-up + pull-down. Node
voltages come from one nodal solve G v = i over the trunk points and stub ends (a DC ladder).

When the driver drives, the bias network pushes the receivers toward its idle level; in one of the two
driven states it works against the driver. By superposition the weaker state at each receiver has
|V_AB| = V_driver - |V_bias| (the driver's share with the bias supply off, minus the bias share with the
driver's source off). That weaker state is what the rule checks against the receiver threshold.

On RS-485 every transceiver node may talk too; each receiver's finding is its weakest level over all talkers
(a transceiver node is assumed to drive like the primary driver's class; see talker_levels).
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import input_resistance_ohm
from pairline.engine.rules.loads import bias_supply_v

RULE_ID = "signal.dc_level"
RECEIVER_THRESHOLD_V = 0.200  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity
NOISE_MARGIN_V = 0.300  # Pairline's allowance for noise picked up on the pair, on top of the threshold
_MIN_BRANCH_OHM = 1e-6  # stands in for a zero-resistance wire or source so the nodal matrix stays regular
SOURCE = (
    "TIA/EIA-485-A and TIA/EIA-422-B receiver sensitivity +/-200 mV; loop resistance of 24 AWG copper "
    "84.2 Ω/km per conductor (ASTM B258); noise margin 300 mV: Pairline's own allowance"
)


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
    v_trunk = _thomas_v(link_siemens, diag, rhs).T  # (n_cases, n)
    v_tap = v_trunk[:, at]  # (n_cases, n_elements)
    current_a = (v_tap - sources_v) * branch_siemens  # into each element from the trunk
    return np.asarray(v_tap - current_a * stub_ohm, dtype=float)


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


@dataclass(frozen=True, slots=True)
class DrivenLevels:
    receiver_names: tuple[str, ...]
    driver_share_v: np.ndarray  # (n_receivers,) V_AB from the driver alone (bias supply off)
    bias_share_v: np.ndarray  # (n_receivers,) V_AB from the bias supply alone (driver source off)

    @property
    def weak_state_v(self) -> np.ndarray:
        """|V_AB| in the driven state that the bias works against: V_driver - |V_bias|."""
        return np.asarray(self.driver_share_v - np.abs(self.bias_share_v), dtype=float)


def driven_levels(bus: Bus) -> DrivenLevels:
    """DC differential voltage at every receiver while the primary driver drives (see module docstring)."""
    levels = talker_levels(bus)
    return DrivenLevels(levels.receiver_names, levels.driver_share_v[0], levels.bias_share_v[0])


@dataclass(frozen=True, slots=True)
class TalkerLevels:
    talker_names: tuple[str, ...]  # the primary driver, then (RS-485) every transceiver node
    receiver_names: tuple[str, ...]  # every plan node
    driver_share_v: np.ndarray  # (n_talkers, n_receivers); NaN where a node would hear itself
    bias_share_v: np.ndarray  # (n_talkers, n_receivers)

    @property
    def weak_state_v(self) -> np.ndarray:
        """(n_talkers, n_receivers) |V_AB| in the driven state the bias works against; NaN for a node itself."""
        return np.asarray(self.driver_share_v - np.abs(self.bias_share_v), dtype=float)


def talker_levels(bus: Bus) -> TalkerLevels:
    """DC levels at every node for each node that may drive.

    On RS-485 a transceiver node may drive; it is assumed to drive like the primary driver's class (same
    open-circuit voltage and source resistance) from the end of its stub, while the primary driver listens
    with its own receiver (driver.unit_loads). Two cases per talker: its source on (driver share) and the
    bias supply on (bias share).
    """
    d = bus.plan.driver
    receivers = receiver_elements(bus)
    loads = fixed_load_elements(bus)
    elements = [DcElement(d.name, d.position_m, d.stub_length_m, bus.driver.source_ohm), *receivers, *loads]
    talkers = [0] + [1 + i for i, n in enumerate(bus.plan.nodes) if n.role == "transceiver"]
    if bus.plan.standard != "rs485":
        talkers = [0]
    base_ohm = np.array([e.resistance_ohm for e in elements])
    listen_ohm = input_resistance_ohm(bus.driver.unit_loads)
    n_cases = 2 * len(talkers)
    resistance_ohm = np.tile(base_ohm, (n_cases, 1))
    sources_v = np.zeros((n_cases, len(elements)))
    for t, j in enumerate(talkers):
        rows = slice(2 * t, 2 * t + 2)
        if j != 0:
            resistance_ohm[rows, 0] = listen_ohm
            resistance_ohm[rows, j] = bus.driver.source_ohm
        sources_v[2 * t, j] = bus.driver.open_circuit_v
        if bus.plan.bias is not None:
            sources_v[2 * t + 1, -1] = loads[-1].source_v
    v = solve_dc_cases_v(elements, resistance_ohm, sources_v, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    rx = slice(1, 1 + len(receivers))
    driver_share = v[0::2, rx].copy()
    bias_share = v[1::2, rx].copy()
    for t, j in enumerate(talkers):
        if j != 0:
            driver_share[t, j - 1] = np.nan
            bias_share[t, j - 1] = np.nan
    return TalkerLevels(
        tuple(elements[j].name for j in talkers), tuple(r.name for r in receivers), driver_share, bias_share
    )


def check_receiver_voltage(bus: Bus) -> list[Finding]:
    """One finding per receiver: DC |V_AB| in the weaker driven state vs the 200 mV threshold plus margin."""
    try:
        levels = talker_levels(bus)
    except (FloatingPointError, ValueError) as exc:
        return [
            Finding(
                RULE_ID,
                "DC level at the receivers",
                Verdict.TIGHT,
                None,
                RECEIVER_THRESHOLD_V,
                "V",
                None,
                "DC nodal solve of the bus",
                SOURCE,
                fix="Check the plan's cable and load values; the DC solve could not be done.",
                detail=f"solve failed: {exc}",
                limit_kind="min",
            )
        ]
    v_oc = bus.driver.open_circuit_v
    tight_below_v = RECEIVER_THRESHOLD_V + NOISE_MARGIN_V
    weak_v = np.where(np.isnan(levels.weak_state_v), np.inf, levels.weak_state_v)  # a node never hears itself
    worst_talker = np.argmin(weak_v, axis=0)  # (n_receivers,)
    several = len(levels.talker_names) > 1
    findings = []
    for i, name in enumerate(levels.receiver_names):
        t = int(worst_talker[i])
        v_rx = float(weak_v[t, i])
        v_drv = float(levels.driver_share_v[t, i])
        v_bias = float(levels.bias_share_v[t, i])
        verdict = (
            Verdict.BREAKS if v_rx < RECEIVER_THRESHOLD_V else Verdict.TIGHT if v_rx < tight_below_v else Verdict.HOLDS
        )
        ratio = v_drv / v_oc
        detail = (
            (f"Weakest when '{levels.talker_names[t]}' talks: " if several else "")
            + f"driver share {v_drv:.3f} V ({ratio:.3f} of its {v_oc:g} V open-circuit, "
            f"{20 * math.log10(max(ratio, 1e-12)):.1f} dB)"
        )
        if bus.plan.bias is not None:
            detail += f"; the bias network shifts it by {v_bias:+.3f} V, so the weaker state has {v_rx:.3f} V"
        findings.append(
            Finding(
                RULE_ID,
                "DC level in the weaker driven state",
                verdict,
                v_rx,
                RECEIVER_THRESHOLD_V,
                "V",
                name,
                "|V_AB| in the weaker driven state through the cable's loop resistance >= 200 mV, for every node "
                f"that may talk; below {tight_below_v:.1f} V (threshold + {NOISE_MARGIN_V * 1e3:.0f} mV noise "
                "margin) is tight",
                SOURCE,
                fix="" if verdict is Verdict.HOLDS else _fix(bus, name, v_rx, v_bias),
                detail=detail + ".",
                limit_kind="min",
            )
        )
    return findings


def _fix(bus: Bus, name: str, v_rx: float, v_bias: float) -> str:
    r_loop = loop_resistance_ohm(bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    parts = [
        f"Raise the level at '{name}' ({v_rx * 1e3:.0f} mV) to at least "
        f"{(RECEIVER_THRESHOLD_V + NOISE_MARGIN_V) * 1e3:.0f} mV: use a heavier-gauge pair (22 AWG has 0.63 "
        f"times the resistance of 24 AWG; the trunk's loop is now {r_loop:.0f} Ω), shorten the run, or split "
        f"it with a repeater"
    ]
    if abs(v_bias) > 0.25 * max(v_rx, 1e-3):
        parts.append("and weaken the bias network (larger pull-up and pull-down) so it fights the driver less")
    terminators = [t for t in bus.plan.terminations if t.kind == "parallel"]
    if len(terminators) > 2 or any(t.resistance_ohm < 0.9 * bus.cable.z0_ohm for t in terminators):
        parts.append("and keep only the two end terminators, each equal to the cable's impedance")
    return ", ".join(parts) + "."
