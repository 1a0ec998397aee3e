"""The ground wiring as a DC network: where each node's interface ground sits, the current the signal-ground
conductor carries, and which nodes share an earth.

Model. Every node (the primary driver included) has a local earth, ground_offset_v above the driver's (the
driver's earth is the reference, 0 V). A node's interface ground (the reference of its transceiver) is
- its local earth, when the interface is not isolated: its logic ground is earthed where it stands, so a
  signal-ground conductor joined to it through a series resistor carries loop current but does not move it
  (each receiver still sees the whole difference between earths as common mode);
- the conductor's potential at its tap, when the interface is isolated (an isolated transceiver, or a supply
  not tied to earth) and the plan runs a signal-ground conductor: no current flows into it;
- floating with the bus, when it is isolated and there is no conductor: as a receiver it follows the talker's
  common mode; as a talker its output settles where the earthed receivers' common-mode inputs (6 kOhm per UL,
  engine.devices) pull it, their weighted mean.
The conductor is a ladder along the trunk (its resistance per metre, or one conductor of the pair's) with each
earthed node hanging from it through its series resistor (the usual 100 Ohm; TI SLLA272, B&B RS-422/485
application note) and its stub's length of conductor, solved by engine.dc's chain solver. Its current is
I = dV / (2 R_series + R_conductor) between two earths (common practice).
"""

import math
from dataclasses import dataclass

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.dc import DcElement, solve_dc_v

EARTH_GROUP_V = 1.0  # nodes whose earths differ by less than this share one earth (common practice)


@dataclass(frozen=True, slots=True)
class GroundState:
    names: tuple[str, ...]  # the primary driver, then every node in plan order
    position_m: np.ndarray  # (n,)
    earth_v: np.ndarray  # (n,) local earth above the driver's
    isolated: np.ndarray  # (n,) bool: the interface does not sit on its local earth
    reference_v: np.ndarray  # (n,) interface ground; NaN for an isolated interface floating with the bus
    common_mode_siemens: np.ndarray  # (n,) both lines to the interface ground, 1 / (6 kOhm / UL)
    series_current_a: np.ndarray  # (n,) current in each node's series resistor to the conductor (0 without one)
    conductor: bool
    series_ohm: float

    def talker_reference_v(self, t: int) -> float:
        """Where talker t's output common mode is referred: its interface ground, or for a floating one the
        common-mode-weighted mean of the earthed interfaces' grounds (0 V when none is earthed)."""
        if not math.isnan(self.reference_v[t]):
            return float(self.reference_v[t])
        earthed = ~np.isnan(self.reference_v)
        earthed[t] = False
        if not earthed.any():
            return 0.0
        weights = self.common_mode_siemens[earthed]
        return float(np.sum(weights * self.reference_v[earthed]) / np.sum(weights))

    def offsets_v(self, talkers: list[int]) -> np.ndarray:
        """(n_talkers, n) the ground of each listener's interface above each talker's; a floating listener
        follows the bus (0 V)."""
        ref_t = np.array([self.talker_reference_v(t) for t in talkers])
        listener = np.where(np.isnan(self.reference_v)[None, :], ref_t[:, None], self.reference_v[None, :])
        return np.asarray(listener - ref_t[:, None], dtype=float)

    @property
    def series_power_w(self) -> np.ndarray:
        """(n,) power in each series resistor: I^2 R."""
        return np.asarray(self.series_current_a**2 * self.series_ohm, dtype=float)


def ground_state(bus: Bus) -> GroundState:
    """The ground network of the plan (see the module docstring)."""
    plan = bus.plan
    g = plan.grounding
    parts = [(plan.driver.name, plan.driver.position_m, plan.driver.stub_length_m, 0.0)]
    parts += [(n.name, n.position_m, n.stub_length_m, n.ground_offset_v) for n in plan.nodes]
    names = tuple(p[0] for p in parts)
    earth = np.array([p[3] for p in parts], dtype=float)
    isolated = np.array([bus.devices[name].isolated for name in names])
    cm_siemens = np.array([1.0 / bus.devices[name].common_mode_input_ohm for name in names])
    current = np.zeros(len(parts))
    reference = np.where(isolated, np.nan, earth)
    conductor = g.signal_ground == "conductor"
    if conductor:
        r_per_m = g.ground_conductor_ohm_per_m
        r_per_m = bus.cable.resistance_ohm_per_m if r_per_m is None else r_per_m
        elements = [
            DcElement(name, pos, stub, math.inf if iso else g.ground_series_ohm, 0.0 if iso else e)
            for (name, pos, stub, e), iso in zip(parts, isolated, strict=True)
        ]
        sources = np.array([[el.source_v] for el in elements])
        # solve_dc_v joins trunk points by 2 R' L (a pair's loop): half the conductor's R' gives one conductor.
        v = solve_dc_v(elements, plan.trunk_length_m, 0.5 * r_per_m, sources)[:, 0]
        current = np.where(isolated, 0.0, (v - earth) / max(g.ground_series_ohm, 1e-6))
        reference = np.where(isolated, v, earth)
    return GroundState(
        names=names,
        position_m=np.array([p[1] for p in parts], dtype=float),
        earth_v=earth,
        isolated=isolated,
        reference_v=reference,
        common_mode_siemens=cm_siemens,
        series_current_a=current,
        conductor=conductor,
        series_ohm=g.ground_series_ohm,
    )


def earth_groups(state: GroundState) -> list[list[int]]:
    """The earthed interfaces (indices into state.names) grouped by earth: sorted by earth potential, a new group
    wherever neighbours differ by EARTH_GROUP_V or more. Isolated interfaces belong to none."""
    order = [i for i in np.argsort(state.earth_v, kind="stable") if not state.isolated[i]]
    groups: list[list[int]] = []
    for i in order:
        if groups and state.earth_v[i] - state.earth_v[groups[-1][-1]] < EARTH_GROUP_V:
            groups[-1].append(int(i))
        else:
            groups.append([int(i)])
    return groups


def home_group(groups: list[list[int]]) -> list[int]:
    """The earth most interfaces share (the driver's on a tie): the side of the boundary that stays earthed."""
    return max(groups, key=lambda g: (len(g), 0 in g)) if groups else []
