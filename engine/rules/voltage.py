"""DC differential level at every receiver through the cable's loop resistance (rule "signal.dc_level").

The DC network is engine.dc's ladder. When a node drives, the bias networks push the receivers toward their idle
level; in one of the two driven states they work against the driver. By superposition, at each receiver
    high state  V_AB =  V_driver + V_bias,    held against the receiver's high threshold;
    low state   V_AB = -V_driver + V_bias,    held against its low threshold,
with V_driver the driver's share (bias supplies off) and V_bias the bias share (driver source off). For a plain
receiver (+/-200 mV) the low state is the weaker one, |V_AB| = V_driver - V_bias against 200 mV; a failsafe
receiver (window -200 .. -10 mV, say) is held to the same 200 mV in the low state and reads the high state
already at -10 mV. The rule checks the state with the smaller margin.

On RS-485 every node that may drive talks too; each receiver's finding is its weakest level over all talkers,
each talker driving with its own device's output (open-circuit voltage behind its source resistance) from the
end of its stub while the primary driver listens with its own receiver.

Verdict (engine.rules.margins): BREAKS below the threshold; TIGHT when the worst corner falls below it: every
driver's swing 5 % low (its supply), terminators 5 % low, the bias networks 5 % strong on supplies 5 % high,
and the loop resistance of a run 10 % longer than drawn at 50 Celsius.
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.dc import DcElement, fixed_load_elements, loop_resistance_ohm, receiver_elements, solve_dc_cases_v
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.margins import band_verdict, corner_bus

RULE_ID = "signal.dc_level"
RECEIVER_THRESHOLD_V = 0.200  # TIA/EIA-485-A and TIA/EIA-422-B receiver input sensitivity
SOURCE = (
    "TIA/EIA-485-A and TIA/EIA-422-B receiver sensitivity +/-200 mV (a failsafe receiver's own window); loop "
    "resistance of 24 AWG copper 84.2 Ω/km per conductor (ASTM B258); tight band from the tolerances of "
    "engine.rules.margins"
)


@dataclass(frozen=True, slots=True)
class DrivenLevels:
    receiver_names: tuple[str, ...]
    driver_share_v: np.ndarray  # (n_receivers,) V_AB from the driver alone (bias supplies off)
    bias_share_v: np.ndarray  # (n_receivers,) V_AB from the bias supplies alone (driver source off)

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
    talker_names: tuple[str, ...]  # the primary driver, then (RS-485) every node that may drive
    receiver_names: tuple[str, ...]  # every plan node
    driver_share_v: np.ndarray  # (n_talkers, n_receivers); NaN where a node would hear itself
    bias_share_v: np.ndarray  # (n_talkers, n_receivers)
    threshold_low_v: np.ndarray  # (n_receivers,) each receiver's low threshold
    threshold_high_v: np.ndarray  # (n_receivers,)

    @property
    def weak_state_v(self) -> np.ndarray:
        """(n_talkers, n_receivers) |V_AB| in the driven state the bias works against; NaN for a node itself."""
        return np.asarray(self.driver_share_v - np.abs(self.bias_share_v), dtype=float)

    def margins_v(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(margin, |V_AB|, threshold) of each talker's weaker state at each receiver, (n_talkers, n_receivers):
        the low state held against -threshold_low_v, the high state against threshold_high_v."""
        low_v = self.driver_share_v - self.bias_share_v
        high_v = self.driver_share_v + self.bias_share_v
        low_margin = low_v + self.threshold_low_v
        high_margin = high_v - self.threshold_high_v
        low_weaker = low_margin <= high_margin
        return (
            np.where(low_weaker, low_margin, high_margin),
            np.where(low_weaker, low_v, high_v),
            np.where(low_weaker, -self.threshold_low_v, self.threshold_high_v),
        )


def talker_levels(bus: Bus) -> TalkerLevels:
    """DC levels at every node for each node that may drive.

    Each talker drives with its own device's output (open-circuit voltage and source resistance) from the end of
    its stub, while the primary driver listens with its own receiver. Two cases per talker: its source on
    (driver share) and the bias supplies on (bias share). Solved once per layout, loads and cable (engine.bus.
    LayoutMemo).
    """
    loads = tuple(fixed_load_elements(bus))
    key = ("talker_levels", bus.plan.standard, loads, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    return bus.memo.get(key, lambda: _solve_talker_levels(bus, loads))


def _solve_talker_levels(bus: Bus, loads: tuple[DcElement, ...]) -> TalkerLevels:
    d = bus.plan.driver
    receivers = receiver_elements(bus)
    elements = [DcElement(d.name, d.position_m, d.stub_length_m, bus.driver_device.source_ohm), *receivers, *loads]
    talkers = [0] + [1 + i for i, n in enumerate(bus.plan.nodes) if n.may_drive]
    if bus.plan.standard != "rs485":
        talkers = [0]
    base_ohm = np.array([e.resistance_ohm for e in elements])
    listen_ohm = bus.driver_device.budget_input_ohm
    n_cases = 2 * len(talkers)
    resistance_ohm = np.tile(base_ohm, (n_cases, 1))
    sources_v = np.zeros((n_cases, len(elements)))
    bias_at = [k for k, e in enumerate(elements) if e.source_v != 0.0]
    for t, j in enumerate(talkers):
        rows = slice(2 * t, 2 * t + 2)
        device = bus.devices[elements[j].name]
        if j != 0:
            resistance_ohm[rows, 0] = listen_ohm
            resistance_ohm[rows, j] = device.source_ohm
        sources_v[2 * t, j] = device.open_circuit_v
        for k in bias_at:
            sources_v[2 * t + 1, k] = elements[k].source_v
    v = solve_dc_cases_v(elements, resistance_ohm, sources_v, bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    rx = slice(1, 1 + len(receivers))
    driver_share = v[0::2, rx].copy()
    bias_share = v[1::2, rx].copy()
    for t, j in enumerate(talkers):
        if j != 0:
            driver_share[t, j - 1] = np.nan
            bias_share[t, j - 1] = np.nan
    devices = [bus.devices[r.name] for r in receivers]
    for shares in (driver_share, bias_share):
        shares.flags.writeable = False  # kept in the layout memo, shared by every caller
    return TalkerLevels(
        tuple(elements[j].name for j in talkers),
        tuple(r.name for r in receivers),
        driver_share,
        bias_share,
        np.array([dev.threshold_low_v for dev in devices]),
        np.array([dev.threshold_high_v for dev in devices]),
    )


def dc_corner_bus(bus: Bus) -> Bus:
    """The bus at the corner that lowers every driven level (see the module docstring)."""
    return corner_bus(bus, terminators=-1, bias_resistors=-1, bias_supply=1, driver_output=-1, cable_resistance=1)


def _weakest(levels: TalkerLevels) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per receiver, over the talkers (a node never hears itself): the smallest margin, the |V_AB| of that state,
    the threshold it is held against, and the talker's index."""
    margin_v, level_v, limit_v = levels.margins_v()  # (n_talkers, n_receivers)
    margin_v = np.where(np.isnan(margin_v), np.inf, margin_v)
    worst_talker = np.argmin(margin_v, axis=0)  # (n_receivers,)
    cols = np.arange(margin_v.shape[1])
    return margin_v[worst_talker, cols], level_v[worst_talker, cols], limit_v[worst_talker, cols], worst_talker


def check_receiver_voltage(bus: Bus) -> list[Finding]:
    """One finding per receiver: DC |V_AB| in the weaker driven state vs the receiver's threshold for it, tight
    band from the worst corner of the tolerances (engine.rules.margins)."""
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
    margin_v, level_v, limit_v, worst_talker = _weakest(levels)
    corner_margin_v, corner_level_v, _, _ = _weakest(corner)
    several = len(levels.talker_names) > 1
    findings = []
    for i, name in enumerate(levels.receiver_names):
        t = int(worst_talker[i])
        talker = levels.talker_names[t]
        v_oc = bus.devices[talker].open_circuit_v
        v_rx = float(level_v[i])
        limit = float(limit_v[i])
        v_corner = float(corner_level_v[i])
        v_drv = float(levels.driver_share_v[t, i])
        v_bias = float(levels.bias_share_v[t, i])
        verdict = band_verdict(float(margin_v[i]) >= 0.0, float(corner_margin_v[i]) >= 0.0)
        ratio = v_drv / v_oc
        detail = (
            (f"Weakest when '{talker}' talks: " if several else "")
            + f"driver share {v_drv:.3f} V ({ratio:.3f} of its {v_oc:g} V open-circuit, "
            f"{20 * math.log10(max(ratio, 1e-12)):.1f} dB)"
        )
        if bus.plan.bias:
            detail += f"; the bias shifts it by {v_bias:+.3f} V, so the weaker state has {v_rx:.3f} V"
        detail += f"; at the worst corner of the tolerances {v_corner:.3f} V; held against {limit * 1e3:.0f} mV"
        if limit != RECEIVER_THRESHOLD_V:
            detail += f" ({bus.devices[name].failsafe_text})"
        findings.append(
            Finding(
                RULE_ID,
                "DC level in the weaker driven state",
                verdict,
                v_rx,
                limit,
                "V",
                name,
                "|V_AB| in the weaker driven state through the cable's loop resistance beyond the receiver's threshold "
                "for that state (200 mV for a plain receiver), for every node that may talk; tight when the worst "
                "corner (driver swing and terminators 5 % low, bias 5 % strong, the run 10 % longer and 50 °C warm) "
                "falls short of it",
                SOURCE,
                fix="" if verdict is Verdict.HOLDS else _fix(bus, name, v_rx, v_corner, v_bias, limit),
                detail=detail + ".",
                limit_kind="min",
            )
        )
    return findings


def _fix(bus: Bus, name: str, v_rx: float, v_corner: float, v_bias: float, limit_v: float) -> str:
    r_loop = loop_resistance_ohm(bus.plan.trunk_length_m, bus.cable.resistance_ohm_per_m)
    level = f"{v_rx * 1e3:.0f} mV" + (f", {v_corner * 1e3:.0f} mV at the worst corner" if v_rx >= limit_v else "")
    parts = [
        f"Raise the level at '{name}' ({level}) above {limit_v * 1e3:.0f} mV at the worst corner: use "
        f"a heavier-gauge pair (22 AWG has 0.63 times the resistance of 24 AWG; the trunk's loop is now "
        f"{r_loop:.0f} Ω), shorten the run, or split it with a repeater"
    ]
    if abs(v_bias) > 0.25 * max(v_rx, 1e-3):
        parts.append("and weaken the bias (larger pull-up and pull-down) so it fights the driver less")
    terminators = [t for t in bus.plan.terminations if t.kind == "parallel"]
    if len(terminators) > 2 or any(t.resistance_ohm < 0.9 * bus.cable.z0_ohm for t in terminators):
        parts.append("and keep only the two end terminators, each equal to the cable's impedance")
    return ", ".join(parts) + "."
