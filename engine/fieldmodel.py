"""The plan's prediction where a scope was clipped on, for installations that differ from the plan.

An installation is the plan with a few physical quantities changed (`Installed`): the cable's Z0, every
distance along the trunk stretched by one factor, the terminator at either end of the trunk (any conductance,
0 for none), and one stub the plan does not have. `installed_plan` writes that installation as a plan, so the
engine's own frequency-domain solve (engine.solve) gives its transfer from the driver's open-circuit voltage
to the probe: a node's receiver input, the driver's own terminal, or a point on the trunk (where the probe is
added as a 1 MOhm load, a differential probe's typical input).

Edge response on one uniform grid (dt, N samples): the damped Fourier inversion of engine.waveform's first
level, x(k dt) = exp(sigma k dt) irfft(H(s) E(s) W) / dt at s_k = sigma + j 2 pi k / (N dt), sigma N dt =
ln(1e8), E(s) the driver's linear ramp, W a Gaussian low-pass (sigma_f = half the Nyquist frequency); the first
N/2 samples are accurate to about 1e-4 of the swing. Source: L. M. Wedepohl, "Power system transients: errors
incurred in the numerical inversion of the Laplace transform", Proc. 26th Midwest Symposium on Circuits and
Systems (1983). H does not depend on the edge time, so a fit may change the edge at the cost of one FFT.

What was sent is a run of driver levels +/-V_oc (a single edge is "01"): the line rests at the first level,
and each change of level at time t_k adds 2 (b_k - b_(k-1)) times the edge response from t_k on
(superposition; the bus is linear). Past the grid's end the edge response is taken as settled at H(0).
"""

import math
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np
from pairline.engine.bus import build_bus
from pairline.engine.devices import WAVEFORM_UNIT_LOAD_OHM
from pairline.engine.plan import (
    BusInputError,
    BusPlan,
    DeviceSpec,
    NodeSpec,
    Problem,
    TerminationSpec,
    resolve_cable,
)
from pairline.engine.solve import (
    build_topology,
    driver_pin_probe,
    node_probe,
    probe_points,
    probe_spectra,
    solve_network,
)
from pairline.engine.waveform import default_pattern, edge_duration_s, step_responses

PROBE_NAME = "scope probe"
PROBE_UNIT_LOADS = WAVEFORM_UNIT_LOAD_OHM / 1e6  # a 1 MOhm probe across the pair, in unit loads (engine.devices)
STUB_NAME = "unplanned stub"
NO_TERMINATOR_SIEMENS = 1e-6  # below this (above 1 MOhm) an end counts as unterminated
DAMPING = math.log(1e8)  # sigma * N * dt
LOWPASS_FRACTION = 0.5  # Gaussian sigma_f as a fraction of the Nyquist frequency
PATTERN_BITS = 127  # bits simulated to choose the plan's default pattern, as the plan page does
SAMPLES_PER_EDGE = 12  # grid spacing: the edge's 0-100 % duration (plus any averaging window) over this

Sent = Literal["edge", "pattern", "bits"]
SENT: tuple[Sent, ...] = ("edge", "pattern", "bits")


@dataclass(frozen=True, slots=True)
class FieldSetup:
    """Where the capture was taken and what the driver sent."""

    at: str  # a node's name, the driver's name, or PROBE_NAME for a point on the trunk
    at_position_m: float | None  # the trunk point, when at is PROBE_NAME
    sent: Sent
    bits: str  # driver levels, 0s and 1s, one per bit time ("01" for a single rising edge)
    bit_time_s: float

    def transitions(self) -> tuple[float, np.ndarray, np.ndarray]:
        """(first level in units of V_oc, change times (n,), level changes (n,) in units of V_oc)."""
        b = np.array([1.0 if c == "1" else 0.0 for c in self.bits])
        change = np.flatnonzero(np.diff(b)) + 1
        times = (change - 1 if self.sent == "edge" else change) * self.bit_time_s
        return 2.0 * b[0] - 1.0, times, 2.0 * (b[change] - b[change - 1])


def field_setup(
    plan: BusPlan,
    at: str | None = None,
    at_position_m: float | None = None,
    sent: str = "edge",
    bits: str | None = None,
) -> FieldSetup:
    """Check where and what against the plan (BusInputError naming the field otherwise).

    at None with no position: the driver's terminal. sent "pattern": the plan's test pattern, else the pattern
    the plan page simulates; "bits": the typed bits at the plan's bit rate; "edge": one rising edge.
    """
    if not plan.is_one_bus:
        raise BusInputError(
            [
                Problem(
                    "plan",
                    "Plan shape",
                    {"segments": len(plan.segments), "four_wire": plan.four_wire is not None},
                    {"rule": "a capture is compared with one bus"},
                    "A scope capture is compared with one bus; this plan has several parts (segments joined by "
                    "repeaters, or a four-wire pair set). Save the segment or pair the capture was taken on as a "
                    "plan of its own and check the capture against that.",
                )
            ]
        )
    if plan.branches:
        raise BusInputError(
            [
                Problem(
                    "branches",
                    "Plan shape",
                    len(plan.branches),
                    {"rule": "a capture is compared with a trunk without branches"},
                    "A scope capture is compared with a trunk and its stubs; this plan has branches, whose "
                    "differences the fit does not model yet. Compare the capture with the plan's trunk alone, "
                    "each branch's nodes moved onto it as stubs of the branch's run.",
                )
            ]
        )
    problems: list[Problem] = []
    names = [plan.driver.name] + [n.name for n in plan.nodes]
    if at_position_m is not None:
        if not (math.isfinite(at_position_m) and 0.0 <= at_position_m <= plan.trunk_length_m):
            problems.append(
                Problem(
                    "at_position_m",
                    "Probe position on the trunk",
                    at_position_m,
                    {"min": 0.0, "max": plan.trunk_length_m, "unit": "m"},
                    f"The probe position is {at_position_m:g} m; allowed 0 to {plan.trunk_length_m:g} m (the trunk).",
                )
            )
        where = PROBE_NAME
    else:
        where = at if at else plan.driver.name
        if where not in names:
            shown = ", ".join(names[:12]) + (", ..." if len(names) > 12 else "")
            problems.append(
                Problem(
                    "at",
                    "Probe at",
                    where[:60],
                    {"choices": names},
                    f"'{where[:60]}' is not the driver or a node of this plan; the probe can be at {shown}, or at "
                    "a position on the trunk.",
                )
            )
    if sent not in SENT:
        problems.append(
            Problem(
                "sent",
                "What was sent",
                str(sent)[:40],
                {"choices": list(SENT)},
                f"'{str(sent)[:40]}' is not known; choose edge, pattern (the plan's) or bits (typed).",
            )
        )
    pattern = "01"
    if sent == "bits":
        typed = (bits or "").replace(" ", "")
        if not (2 <= len(typed) <= 4096) or set(typed) - {"0", "1"} or len(set(typed)) < 2:
            problems.append(
                Problem(
                    "bits",
                    "Bits sent",
                    (bits or "")[:60],
                    {"pattern": "0s and 1s, 2 to 4096 of them, with at least one change"},
                    "The bits sent must be 0s and 1s (2 to 4096, with at least one change of level).",
                )
            )
        pattern = typed
    if problems:
        raise BusInputError(problems)
    bit_time_s = 1.0 / plan.bit_rate_bps
    if sent == "pattern":
        pattern = plan.test_pattern or _default_pattern(plan, bit_time_s)
    return FieldSetup(where, at_position_m, sent, pattern, bit_time_s)  # type: ignore[arg-type]


def _default_pattern(plan: BusPlan, bit_time_s: float) -> str:
    bus = build_bus(plan)
    return default_pattern(step_responses(bus, max_time_s=PATTERN_BITS * bit_time_s), bit_time_s)


@dataclass(frozen=True, slots=True)
class Installed:
    """Quantities of an installation that a field check may find different from its plan."""

    z0_ohm: float
    length_scale: float = 1.0  # every trunk distance times this
    start_siemens: float | None = None  # terminator conductance at 0 m (0: none); None = as planned
    end_siemens: float | None = None  # ... at the trunk's end
    stub_position_m: float | None = None  # an extra stub, along the installed trunk
    stub_length_m: float = 0.0


def end_terminator_siemens(plan: BusPlan, at_end: bool) -> float | None:
    """Conductance of the parallel terminators at one end of the trunk; None when an RC terminator sits there."""
    where = plan.trunk_length_m if at_end else 0.0
    here = [t for t in plan.terminations if t.position_m == where]
    if any(t.kind != "parallel" for t in here):
        return None
    return float(sum(1.0 / t.resistance_ohm for t in here))


def planned_installation(plan: BusPlan, z0_ohm: float) -> Installed:
    """The plan as installed exactly: its own cable Z0, lengths and end terminators, no extra stub."""
    return Installed(z0_ohm, 1.0, end_terminator_siemens(plan, False), end_terminator_siemens(plan, True))


def installed_plan(plan: BusPlan, inst: Installed, probe_at_m: float | None = None) -> BusPlan:
    """The installation written as a plan (not re-validated: the engine takes it as it is). probe_at_m: add the
    scope probe's load at that planned trunk position."""
    k = inst.length_scale
    trunk_m = plan.trunk_length_m * k
    terms = [t.model_copy(update={"position_m": t.position_m * k}) for t in plan.terminations]
    for planned_m, siemens in ((0.0, inst.start_siemens), (plan.trunk_length_m, inst.end_siemens)):
        if siemens is None:
            continue
        terms = [t for t in terms if t.position_m != planned_m * k]
        if siemens > NO_TERMINATOR_SIEMENS:
            terms.append(TerminationSpec.model_construct(position_m=planned_m * k, resistance_ohm=1.0 / siemens))
    nodes = [n.model_copy(update={"position_m": n.position_m * k}) for n in plan.nodes]
    if inst.stub_position_m is not None:
        nodes.append(
            NodeSpec.model_construct(
                name=STUB_NAME,
                position_m=min(max(inst.stub_position_m, 0.0), trunk_m),
                stub_length_m=max(inst.stub_length_m, 0.0),
                device=DeviceSpec.model_construct(class_key=None),  # the standard's device: 1 UL, 20 pF
            )
        )
    if probe_at_m is not None:
        nodes.append(
            NodeSpec.model_construct(
                name=PROBE_NAME,
                position_m=probe_at_m * k,
                device=DeviceSpec.model_construct(class_key=None, unit_loads=PROBE_UNIT_LOADS, input_capacitance_f=0.0),
            )
        )
    update: dict[str, object] = {
        "trunk_length_m": trunk_m,
        "driver": plan.driver.model_copy(update={"position_m": plan.driver.position_m * k}),
        "nodes": nodes,
        "terminations": terms,
    }
    if inst.z0_ohm != resolve_cable(plan.cable).z0_ohm:
        update["cable"] = plan.cable.model_copy(update={"z0_ohm": inst.z0_ohm})
    update["bias"] = [b.model_copy(update={"position_m": b.position_m * k}) for b in plan.bias]
    return plan.model_copy(update=update)


def probe_transfer(plan: BusPlan, inst: Installed, setup: FieldSetup, s: np.ndarray) -> np.ndarray:
    """V_probe / V_open_circuit of the installation at Laplace points s, (n_s,)."""
    bus = build_bus(installed_plan(plan, inst, setup.at_position_m))
    topo = build_topology(bus)
    driver = (bus.plan.driver.name,)
    net = solve_network(bus, s, topo, driver)
    probe = driver_pin_probe() if setup.at == bus.plan.driver.name else node_probe(setup.at)
    return np.asarray(probe_spectra(net, driver, probe_points(bus, topo, [probe]))[0, 0, 0])


@dataclass(frozen=True, slots=True)
class ModelGrid:
    """Laplace points and weights of one uniform grid; the edge response is read on its first n/2 samples."""

    dt_s: float
    n: int
    s: np.ndarray  # (n // 2 + 1,) complex
    weight: np.ndarray  # (n // 2 + 1,) Gaussian low-pass
    gain: np.ndarray  # (n // 2,) exp(sigma t) / dt at t = k dt

    @property
    def span_s(self) -> float:
        return self.dt_s * (self.n // 2)


def model_grid(span_s: float, dt_s: float) -> ModelGrid:
    """A grid whose accurate first half covers span_s at spacing dt_s; n is a power of two times 1, 3 or 5/4."""
    need = 2 * max(64, math.ceil(span_s / dt_s) + 1)
    n = min(m * 2 ** math.ceil(math.log2(need / m)) for m in (1, 3, 5))
    window_s = n * dt_s
    f_hz = np.arange(n // 2 + 1) / window_s
    sigma = DAMPING / window_s
    weight = np.exp(-0.5 * (f_hz / (LOWPASS_FRACTION * 0.5 / dt_s)) ** 2)
    gain = np.exp(sigma * dt_s * np.arange(n // 2)) / dt_s
    return ModelGrid(dt_s, n, sigma + 2j * np.pi * f_hz, weight, gain)


def edge_response(grid: ModelGrid, transfer: np.ndarray, rise_time_s: float) -> np.ndarray:
    """Response at the probe to a 0 -> 1 V ramp of the driver's open-circuit voltage, (n // 2,) on the grid.

    The ramp's 10-90 % time is rise_time_s; its Laplace transform (1 - exp(-s T_e)) / (s^2 T_e), T_e = t_r / 0.8.
    """
    t_edge_s = edge_duration_s(rise_time_s)
    s = grid.s
    ramp = -np.expm1(-s * t_edge_s) / (s * s * t_edge_s)
    x = np.fft.irfft(transfer * ramp * grid.weight, n=grid.n)
    return np.asarray(x[: grid.n // 2] * grid.gain)


def plan_edge(
    plan: BusPlan, setup: FieldSetup, inst: Installed, span_s: float, rise_time_s: float
) -> tuple[np.ndarray, np.ndarray, float]:
    """(time_s, edge response per volt of V_oc, its settled value H(0)) of an installation at the probe."""
    grid = model_grid(span_s, edge_duration_s(rise_time_s) / SAMPLES_PER_EDGE)
    transfer = probe_transfer(plan, inst, setup, np.r_[grid.s, 0.0])
    edge = edge_response(grid, transfer[:-1], rise_time_s)
    return grid.dt_s * np.arange(edge.size), edge, float(transfer[-1].real)


def sent_waveform(
    grid: ModelGrid, edge_v: np.ndarray, settled: float, setup: FieldSetup, at_s: np.ndarray
) -> np.ndarray:
    """What was sent, seen at the probe at ascending times at_s (model time: bit 0 starts at 0), per volt of V_oc.

    edge_v: the edge response on the grid; settled: its value for good (H(0)). Each level change is
    interpolated only over the grid's span after it; later samples take its settled share through one running
    sum, so a long pattern costs the samples plus one grid span per change.
    """
    first, times, steps = setup.transitions()
    t_grid = grid.dt_s * np.arange(edge_v.size)
    out = np.full(at_s.shape, first * settled)
    settled_from = np.zeros(at_s.size + 1)
    begin = np.searchsorted(at_s, times, side="left")
    end = np.searchsorted(at_s, times + t_grid[-1], side="right")
    for t_k, step, lo, hi in zip(times, steps, begin, end, strict=True):
        out[lo:hi] += step * np.interp(at_s[lo:hi] - t_k, t_grid, edge_v)
        settled_from[hi] += step * settled
    return np.asarray(out + np.cumsum(settled_from[:-1]))


def sent_duration_s(setup: FieldSetup) -> float:
    """From the first edge to the last level change."""
    _, times, _ = setup.transitions()
    return float(times[-1] - times[0]) if times.size else 0.0


def with_stub(inst: Installed, position_m: float, length_m: float) -> Installed:
    return replace(inst, stub_position_m=position_m, stub_length_m=length_m)


__all__ = [
    "FieldSetup",
    "Installed",
    "ModelGrid",
    "PROBE_NAME",
    "STUB_NAME",
    "edge_response",
    "end_terminator_siemens",
    "field_setup",
    "installed_plan",
    "model_grid",
    "plan_edge",
    "planned_installation",
    "probe_transfer",
    "sent_duration_s",
    "sent_waveform",
]
