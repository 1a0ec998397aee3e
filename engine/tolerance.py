"""Worst case over component tolerances: corners and a seeded Monte Carlo, every variant of the bus solved in one
batch (engine.solve.NetworkVariants, engine.transient.variant_step_responses).

Parameters, each a range from the library classes (engine.library; the plan's `tolerances` may set any of them):
- the cable's Z0 and velocity factor, +/- the cable class's z0_tolerance and velocity_factor_tolerance;
- every terminator and each bias resistor, +/- RESISTOR_TOLERANCE (E24 parts);
- the driver's 10-90 % edge, from the driver class's fastest to its slowest (TransceiverClass.rise_time_range_s);
- every node's input capacitance x INPUT_CAPACITANCE_RANGE and unit loads x UNIT_LOAD_RANGE (of its rating).

Corners: every parameter alone at either end of its range (one at a time); then, for each receiver, the corner
that puts every parameter at the end which lowered that receiver's margin; all of them simulated. A receiver's
worst corner is the one of these with its lowest margin (then the smallest eye).
Monte Carlo: N variants, each parameter of each component (each terminator, each bias resistor, each node's
capacitance and load) drawn uniformly within its range from numpy's default_rng(seed); the cable and the driver's
edge are one draw per variant. Reported per receiver: the 1st percentile of margin and eye height over them.
Dominant tolerance of a receiver: the parameter whose one-at-a-time ends move its margin furthest down.

Every variant is simulated on the grid chosen for the nominal bus driven by the class's fastest edge (the
sharpest variant), so each keeps the accuracy of engine.transient.
"""

from dataclasses import dataclass, replace

import numpy as np
from pairline.engine.bus import Bus
from pairline.engine.library import (
    CABLES,
    FAST_EDGE_RANGE,
    FAST_EDGE_SOURCE,
    INPUT_CAPACITANCE_RANGE,
    INPUT_CAPACITANCE_SOURCE,
    RESISTOR_TOLERANCE,
    RESISTOR_TOLERANCE_SOURCE,
    TRANSCEIVERS,
    UNIT_LOAD_RANGE,
    UNIT_LOAD_SOURCE,
    CableClass,
)
from pairline.engine.metrics import RECEIVER_THRESHOLD_V, ReceiverMetrics, SamplingWindow, pattern_metrics, plan_window
from pairline.engine.solve import NetworkVariants, Topology, build_topology, with_cable
from pairline.engine.transient import StepResponses, step_responses, variant_step_responses
from pairline.engine.waveform import default_pattern, local_patterns, pattern_duration_s, pattern_offsets_s

VARIANTS_PER_BATCH = 32  # variants whose spectra are held at once
ROWS_PER_PASS = 512  # variant x receiver rows whose pattern waveforms are held at once
GENERIC_CABLE = CableClass("custom", "", 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, "")  # its default tolerances


@dataclass(frozen=True, slots=True)
class ToleranceRange:
    """One parameter's range as factors on its nominal value, and where the range comes from."""

    key: str  # "z0", "velocity_factor", "terminator", "bias", "rise_time", "input_capacitance", "unit_loads"
    label: str
    low: float
    high: float
    source: str


@dataclass(frozen=True, slots=True)
class ReceiverTolerance:
    """One receiver over the tolerances: nominal, worst corner, and the Monte Carlo's 1st percentile."""

    receiver: str
    nominal: ReceiverMetrics
    worst: ReceiverMetrics  # at the worst corner
    worst_corner: str  # the corner's parameter ends, as text
    p1_margin_v: float | None  # None without Monte Carlo variants
    p1_eye_height_v: float | None
    dominant: str  # label of the parameter that moves its margin most
    dominant_shift_v: float  # how far that parameter's worse end lowers the margin (<= 0)


@dataclass(frozen=True, slots=True)
class ToleranceReport:
    ranges: tuple[ToleranceRange, ...]
    receivers: tuple[ReceiverTolerance, ...]  # plan node order
    corners: int  # corner cases simulated
    variants: int  # Monte Carlo variants simulated
    seed: int
    pattern: str
    window: SamplingWindow
    corner_margin_v: np.ndarray  # (n_corners + 1, n_receivers), the nominal first
    monte_carlo_margin_v: np.ndarray | None  # (n_variants, n_receivers)
    monte_carlo_eye_height_v: np.ndarray | None  # (n_variants, n_receivers)


def tolerance_ranges(bus: Bus) -> tuple[ToleranceRange, ...]:
    """Every parameter's range: the plan's `tolerances` where set, else the library class's (module docstring)."""
    spec = bus.plan.tolerances
    key = bus.plan.cable.class_key
    cable_class = CABLES.get(key) if key else None
    cable = cable_class or GENERIC_CABLE
    from_class = cable_class is not None and spec.z0_tolerance is None
    z0 = cable.z0_tolerance if spec.z0_tolerance is None else spec.z0_tolerance
    vf = cable.velocity_factor_tolerance if spec.velocity_factor_tolerance is None else spec.velocity_factor_tolerance
    r_term = RESISTOR_TOLERANCE if spec.terminator_tolerance is None else spec.terminator_tolerance
    r_bias = RESISTOR_TOLERANCE if spec.bias_tolerance is None else spec.bias_tolerance
    rise = bus.driver.rise_time_s
    driver_key = bus.plan.driver.transceiver
    driver_class = TRANSCEIVERS.get(driver_key) if driver_key and bus.plan.driver.rise_time_s is None else None
    lo_s, hi_s = (
        driver_class.rise_time_range_s() if driver_class else (FAST_EDGE_RANGE[0] * rise, FAST_EDGE_RANGE[1] * rise)
    )
    edge_source = driver_class.edge_range_source if driver_class else FAST_EDGE_SOURCE
    if spec.rise_time_min_s is not None:
        lo_s, edge_source = spec.rise_time_min_s, "set in the plan"
    if spec.rise_time_max_s is not None:
        hi_s, edge_source = spec.rise_time_max_s, "set in the plan"
    c_lo, c_hi = INPUT_CAPACITANCE_RANGE
    if spec.input_capacitance_tolerance is not None:
        c_lo, c_hi = 1.0 - spec.input_capacitance_tolerance, 1.0 + spec.input_capacitance_tolerance
    ul_lo = UNIT_LOAD_RANGE[0] if spec.unit_loads_min_ratio is None else spec.unit_loads_min_ratio
    plan_says = "set in the plan"
    return (
        ToleranceRange("z0", "cable Z0", 1.0 - z0, 1.0 + z0, cable.tolerance_source if from_class else plan_says),
        ToleranceRange(
            "velocity_factor",
            "velocity factor",
            1.0 - vf,
            1.0 + vf,
            cable.tolerance_source if spec.velocity_factor_tolerance is None else plan_says,
        ),
        ToleranceRange(
            "terminator",
            "terminators",
            1.0 - r_term,
            1.0 + r_term,
            RESISTOR_TOLERANCE_SOURCE if spec.terminator_tolerance is None else plan_says,
        ),
        ToleranceRange(
            "bias",
            "bias resistors",
            1.0 - r_bias,
            1.0 + r_bias,
            RESISTOR_TOLERANCE_SOURCE if spec.bias_tolerance is None else plan_says,
        ),
        ToleranceRange("rise_time", "driver edge", lo_s / rise, hi_s / rise, edge_source),
        ToleranceRange(
            "input_capacitance",
            "receiver capacitance",
            c_lo,
            c_hi,
            INPUT_CAPACITANCE_SOURCE if spec.input_capacitance_tolerance is None else plan_says,
        ),
        ToleranceRange(
            "unit_loads",
            "receiver loads",
            ul_lo,
            UNIT_LOAD_RANGE[1],
            UNIT_LOAD_SOURCE if spec.unit_loads_min_ratio is None else plan_says,
        ),
    )


@dataclass(frozen=True, slots=True)
class _Factors:
    """Per-variant factors, every array (n_v,) or (n_v, n_components)."""

    z0: np.ndarray  # (n_v,)
    velocity_factor: np.ndarray  # (n_v,)
    rise_time: np.ndarray  # (n_v,)
    terminator: np.ndarray  # (n_v, n_terminations)
    bias: np.ndarray  # (n_v, 2) pull-up, pull-down
    input_capacitance: np.ndarray  # (n_v, n_nodes)
    unit_loads: np.ndarray  # (n_v, n_nodes)


def _corner_factors(ranges: tuple[ToleranceRange, ...], ends: np.ndarray, n_terms: int, n_nodes: int) -> _Factors:
    """Corners from ends (n_v, n_params) in {-1, 0, +1}: low end, nominal, high end of each parameter."""
    f = {}
    for i, r in enumerate(ranges):
        f[r.key] = np.where(ends[:, i] < 0, r.low, np.where(ends[:, i] > 0, r.high, 1.0))
    n_v = ends.shape[0]
    return _Factors(
        z0=f["z0"],
        velocity_factor=f["velocity_factor"],
        rise_time=f["rise_time"],
        terminator=np.repeat(f["terminator"][:, None], n_terms, 1).reshape(n_v, n_terms),
        bias=np.repeat(f["bias"][:, None], 2, 1),
        input_capacitance=np.repeat(f["input_capacitance"][:, None], n_nodes, 1),
        unit_loads=np.repeat(f["unit_loads"][:, None], n_nodes, 1),
    )


def _random_factors(ranges: tuple[ToleranceRange, ...], n: int, n_terms: int, n_nodes: int, seed: int) -> _Factors:
    rng = np.random.default_rng(seed)
    by = {r.key: r for r in ranges}

    def draw(key: str, *shape: int) -> np.ndarray:
        r = by[key]
        return np.asarray(rng.uniform(r.low, r.high, size=(n, *shape)))

    return _Factors(
        z0=draw("z0"),
        velocity_factor=draw("velocity_factor"),
        rise_time=draw("rise_time"),
        terminator=draw("terminator", n_terms),
        bias=draw("bias", 2),
        input_capacitance=draw("input_capacitance", n_nodes),
        unit_loads=draw("unit_loads", n_nodes),
    )


def _networks(bus: Bus, topo: Topology, f: _Factors) -> tuple[NetworkVariants, np.ndarray]:
    """The distinct networks of the variants (those differing only in the driver's edge share one), and which
    network each variant uses."""
    plan = bus.plan
    n_v = f.z0.size
    g = np.repeat(topo.branch_conductance_siemens[None], n_v, 0)
    c = np.repeat(topo.branch_capacitance_f[None], n_v, 0)
    rc_r = np.repeat(topo.branch_series_rc_ohm[None], n_v, 0)
    rx = topo.receiver_branch
    g[:, rx] *= f.unit_loads
    c[:, rx] *= f.input_capacitance
    for k, (b, term) in enumerate(zip(topo.termination_branch, plan.terminations, strict=True)):
        if term.kind == "rc" and term.capacitance_f is not None:
            rc_r[:, b] = term.resistance_ohm * f.terminator[:, k]
        else:
            g[:, b] = 1.0 / (term.resistance_ohm * f.terminator[:, k])
    if plan.bias is not None:
        g[:, topo.bias_branch] = 1.0 / (plan.bias.pull_up_ohm * f.bias[:, 0] + plan.bias.pull_down_ohm * f.bias[:, 1])
    keys = np.column_stack([f.z0, f.velocity_factor, g, c, rc_r])
    _, first, network_of = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    cable = bus.cable
    cables = tuple(
        with_cable(cable, cable.z0_ohm * f.z0[i], cable.velocity_factor * f.velocity_factor[i]) for i in first
    )
    variants = NetworkVariants(
        cables=cables,
        conductance_siemens=g[first],
        capacitance_f=c[first],
        series_rc_ohm=rc_r[first],
        series_rc_f=np.repeat(topo.branch_series_rc_f[None], first.size, 0),
        source_ohm=np.full(first.size, bus.driver.source_ohm),
    )
    return variants, network_of.ravel()


def _simulate(
    bus: Bus, grid: StepResponses, topo: Topology, f: _Factors, bits: str, offsets_s: np.ndarray, window: SamplingWindow
) -> list[list[ReceiverMetrics]]:
    """Metrics of every receiver for each variant, (n_v, n_receivers): VARIANTS_PER_BATCH variants are solved at
    once, and their receivers judged together on the offsets the grid run refined."""
    names = [n.name for n in bus.plan.nodes]
    t_bit = 1.0 / bus.plan.bit_rate_bps
    out: list[list[ReceiverMetrics]] = []
    for v0 in range(0, f.z0.size, VARIANTS_PER_BATCH):
        part = slice(v0, v0 + VARIANTS_PER_BATCH)
        chunk = _Factors(*(np.asarray(getattr(f, k))[part] for k in _Factors.__slots__))
        variants, network_of = _networks(bus, topo, chunk)
        step = variant_step_responses(bus, grid, variants, network_of, bus.driver.rise_time_s * chunk.rise_time)
        rows: list[ReceiverMetrics] = []
        for r0 in range(0, len(step.receiver_names), ROWS_PER_PASS):
            index = np.arange(r0, min(r0 + ROWS_PER_PASS, len(step.receiver_names)))
            local = local_patterns(step, bits, t_bit, rows=index, offsets_s=offsets_s)
            rows.extend(pattern_metrics(local, RECEIVER_THRESHOLD_V, window))
        for v in range(chunk.z0.size):
            out.append(
                [
                    replace(m, receiver=n)
                    for m, n in zip(rows[v * len(names) : (v + 1) * len(names)], names, strict=True)
                ]
            )
    return out


def _text(ranges: tuple[ToleranceRange, ...], ends: np.ndarray, rise_s: float) -> str:
    parts = []
    for r, e in zip(ranges, ends, strict=True):
        if e == 0:
            continue
        factor = r.high if e > 0 else r.low
        if r.key == "rise_time":
            parts.append(f"{r.label} {factor * rise_s * 1e9:.3g} ns")
        else:
            parts.append(f"{r.label} {100.0 * (factor - 1.0):+.0f} %")
    return ", ".join(parts) or "nominal"


def _rank(m: ReceiverMetrics) -> tuple[float, float]:
    return (m.margin_v, m.eye_height_v)


def analyse_tolerances(
    bus: Bus,
    *,
    pattern: str | None = None,
    variants: int | None = None,
    seed: int | None = None,
    window: SamplingWindow | None = None,
) -> ToleranceReport:
    """Corners and Monte Carlo of the primary driver's bit pattern at every receiver (module docstring).

    pattern None: the plan's test pattern, else the default PRBS of the nominal bus. variants / seed None: the
    plan's tolerances.monte_carlo_variants / seed. window None: the plan's sampling window.
    """
    plan = bus.plan
    ranges = tolerance_ranges(bus)
    sampling = plan_window(bus) if window is None else window
    n_mc = plan.tolerances.monte_carlo_variants if variants is None else variants
    rng_seed = plan.tolerances.seed if seed is None else seed
    by = {r.key: r for r in ranges}
    fastest = bus.driver.rise_time_s * min(1.0, by["rise_time"].low)
    grid_bus = replace(bus, driver=replace(bus.driver, rise_time_s=fastest))
    grid = step_responses(grid_bus, max_time_s=pattern_duration_s(bus, pattern or plan.test_pattern))
    bits = pattern or plan.test_pattern or default_pattern(grid, 1.0 / plan.bit_rate_bps)
    offsets = pattern_offsets_s(grid, bits, 1.0 / plan.bit_rate_bps)
    topo = build_topology(bus)
    n_terms, n_nodes = len(plan.terminations), len(plan.nodes)

    # nominal and one at a time
    k = len(ranges)
    one_at_a_time = np.zeros((1 + 2 * k, k))
    for i in range(k):
        one_at_a_time[1 + 2 * i, i], one_at_a_time[2 + 2 * i, i] = -1.0, 1.0
    first = _simulate(
        bus, grid, topo, _corner_factors(ranges, one_at_a_time, n_terms, n_nodes), bits, offsets, sampling
    )
    nominal = first[0]
    margins = np.array([[m.margin_v for m in case] for case in first])  # (1 + 2k, n_rx)
    low_end, high_end = margins[1::2], margins[2::2]  # (k, n_rx)
    # each receiver's worst corner: every parameter at the end that lowered its margin
    corner_ends = np.where(low_end < high_end, -1.0, 1.0).T  # (n_rx, k)
    vertices, vertex_of = np.unique(corner_ends, axis=0, return_inverse=True)
    second = _simulate(bus, grid, topo, _corner_factors(ranges, vertices, n_terms, n_nodes), bits, offsets, sampling)
    cases = first + second
    case_ends = np.vstack([one_at_a_time, vertices])

    p1_margin = p1_eye = mc_margin = mc_eye = None
    if n_mc > 0:
        randoms = _random_factors(ranges, n_mc, n_terms, n_nodes, rng_seed)
        drawn = _simulate(bus, grid, topo, randoms, bits, offsets, sampling)
        mc_margin = np.array([[m.margin_v for m in case] for case in drawn])
        mc_eye = np.array([[m.eye_height_v for m in case] for case in drawn])
        p1_margin = np.percentile(mc_margin, 1.0, axis=0)
        p1_eye = np.percentile(mc_eye, 1.0, axis=0)

    receivers = []
    for r, node in enumerate(plan.nodes):
        ranks = [_rank(case[r]) for case in cases]
        worst_case = min(range(len(ranks)), key=ranks.__getitem__)
        shifts = np.minimum(low_end[:, r], high_end[:, r]) - margins[0, r]
        dominant = int(np.argmin(shifts))
        receivers.append(
            ReceiverTolerance(
                receiver=node.name,
                nominal=nominal[r],
                worst=cases[worst_case][r],
                worst_corner=_text(ranges, case_ends[worst_case], bus.driver.rise_time_s),
                p1_margin_v=None if p1_margin is None else float(p1_margin[r]),
                p1_eye_height_v=None if p1_eye is None else float(p1_eye[r]),
                dominant=ranges[dominant].label,
                dominant_shift_v=float(min(shifts[dominant], 0.0)),
            )
        )
    return ToleranceReport(
        ranges=ranges,
        receivers=tuple(receivers),
        corners=len(cases) - 1,
        variants=n_mc,
        seed=rng_seed,
        pattern=bits,
        window=sampling,
        corner_margin_v=np.array([[m.margin_v for m in case] for case in cases]),
        monte_carlo_margin_v=mc_margin,
        monte_carlo_eye_height_v=mc_eye,
    )
