"""DC differential level at every receiver through the cable's loop resistance (rule "signal.dc_level").

The DC network is engine.dc's ladder. When the driver drives, the bias network pushes the receivers toward its
idle level; in one of the two driven states it works against the driver. By superposition the weaker state at
each receiver has |V_AB| = V_driver - |V_bias| (the driver's share with the bias supply off, minus the bias share
with the driver's source off). That weaker state is what the rule checks against the receiver threshold.

On RS-485 every transceiver node may talk too; each receiver's finding is its weakest level over all talkers
(a transceiver node is assumed to drive like the primary driver's class; see talker_levels).

Verdict (engine.rules.margins): BREAKS below the 200 mV receiver threshold; TIGHT when the worst corner falls
below it: the driver's swing 5 % low (its supply), terminators 5 % low, the bias network 5 % strong on a supply
5 % high, and the loop resistance of a run 10 % longer than drawn at 50 Celsius.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.dc import DcElement, fixed_load_elements, loop_resistance_ohm, receiver_elements, solve_dc_cases_v
from pairline.engine.findings import Finding, Verdict
from pairline.engine.plan import input_resistance_ohm
from pairline.engine.rules.margins import band_verdict, corner_bus

RULE_ID = "signal.dc_level"
RECEIVER_THRESHOLD_V = 0.200  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity
SOURCE = (
    "TIA/EIA-485-A and TIA/EIA-422-B receiver sensitivity +/-200 mV; loop resistance of 24 AWG copper "
    "84.2 Ω/km per conductor (ASTM B258); tight band from the tolerances of engine.rules.margins"
)


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


def dc_corner_bus(bus: Bus) -> Bus:
    """The bus at the corner that lowers every driven level (see the module docstring)."""
    return corner_bus(bus, terminators=-1, bias_resistors=-1, bias_supply=1, driver_output=-1, cable_resistance=1)


def _weakest(levels: TalkerLevels) -> tuple[np.ndarray, np.ndarray]:
    """(weakest level over the talkers, index of that talker) per receiver; a node never hears itself."""
    weak_v = np.where(np.isnan(levels.weak_state_v), np.inf, levels.weak_state_v)  # (n_talkers, n_receivers)
    worst_talker = np.argmin(weak_v, axis=0)  # (n_receivers,)
    return weak_v[worst_talker, np.arange(weak_v.shape[1])], worst_talker


def check_receiver_voltage(bus: Bus) -> list[Finding]:
    """One finding per receiver: DC |V_AB| in the weaker driven state vs the 200 mV threshold, tight band from
    the worst corner of the tolerances (engine.rules.margins)."""
    try:
        levels = talker_levels(bus)
        corner = talker_levels(dc_corner_bus(bus))
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
    weakest_v, worst_talker = _weakest(levels)
    corner_v, _ = _weakest(corner)
    several = len(levels.talker_names) > 1
    findings = []
    for i, name in enumerate(levels.receiver_names):
        t = int(worst_talker[i])
        v_rx = float(weakest_v[i])
        v_corner = float(corner_v[i])
        v_drv = float(levels.driver_share_v[t, i])
        v_bias = float(levels.bias_share_v[t, i])
        verdict = band_verdict(v_rx >= RECEIVER_THRESHOLD_V, v_corner >= RECEIVER_THRESHOLD_V)
        ratio = v_drv / v_oc
        detail = (
            (f"Weakest when '{levels.talker_names[t]}' talks: " if several else "")
            + f"driver share {v_drv:.3f} V ({ratio:.3f} of its {v_oc:g} V open-circuit, "
            f"{20 * math.log10(max(ratio, 1e-12)):.1f} dB)"
        )
        if bus.plan.bias is not None:
            detail += f"; the bias network shifts it by {v_bias:+.3f} V, so the weaker state has {v_rx:.3f} V"
        detail += f"; at the worst corner of the tolerances {v_corner:.3f} V"
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
                "that may talk; tight when the worst corner (driver swing and terminators 5 % low, bias 5 % "
                "strong, the run 10 % longer and 50 °C warm) falls below 200 mV",
                SOURCE,
                fix="" if verdict is Verdict.HOLDS else _fix(bus, name, v_rx, v_corner, v_bias),
                detail=detail + ".",
                limit_kind="min",
            )
        )
    return findings


def _fix(bus: Bus, name: str, v_rx: float, v_corner: float, v_bias: float) -> str:
    r_loop = loop_resistance_ohm(bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    level = f"{v_rx * 1e3:.0f} mV" + (f", {v_corner * 1e3:.0f} mV at the worst corner" if v_rx >= 0.2 else "")
    parts = [
        f"Raise the level at '{name}' ({level}) above {RECEIVER_THRESHOLD_V * 1e3:.0f} mV at the worst corner: use "
        f"a heavier-gauge pair (22 AWG has 0.63 times the resistance of 24 AWG; the trunk's loop is now "
        f"{r_loop:.0f} Ω), shorten the run, or split it with a repeater"
    ]
    if abs(v_bias) > 0.25 * max(v_rx, 1e-3):
        parts.append("and weaken the bias network (larger pull-up and pull-down) so it fights the driver less")
    terminators = [t for t in bus.plan.terminations if t.kind == "parallel"]
    if len(terminators) > 2 or any(t.resistance_ohm < 0.9 * bus.cable.z0_ohm for t in terminators):
        parts.append("and keep only the two end terminators, each equal to the cable's impedance")
    return ", ".join(parts) + "."
