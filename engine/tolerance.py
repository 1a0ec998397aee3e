"""Worst case over component tolerances: corners and a seeded Monte Carlo, every variant of the bus solved in
batches (engine.solve.NetworkVariants, engine.transient.variant_step_responses).

Parameters, each a range from the library classes (engine.library; the plan's `tolerances` may set any of them):
- the cable's Z0 and velocity factor, +/- the cable class's z0_tolerance and velocity_factor_tolerance;
- every terminator and each bias resistor, +/- RESISTOR_TOLERANCE (E24 parts);
- the driver's 10-90 % edge, from its device class's fastest to its slowest (TransceiverClass.rise_time_range_s);
- every node's input capacitance x INPUT_CAPACITANCE_RANGE and unit loads x UNIT_LOAD_RANGE (of its device's
  rating).

Corners: every parameter alone at either end of its range (one at a time); then, for each receiver, the corner
that puts every parameter at the end which lowered that receiver's margin; all of them simulated. A receiver's
worst corner is the one of these with its lowest margin (then the smallest eye).
Monte Carlo: N variants, each parameter of each component (each terminator, each bias resistor, each node's
capacitance and load) drawn uniformly within its range from numpy's default_rng(seed); the cable and the driver's
edge are one draw per variant. Reported per receiver: the 1st percentile of margin and eye height over them.
Dominant tolerance of a receiver: the parameter whose one-at-a-time ends move its margin furthest down.

What a variant is judged by (SampledLevels): what tolerances move, the receiver's levels over the sampling window
of every bit of the pattern (engine.metrics: the lowest level, the bits below the threshold) and its inner eye at
the sampling instant. They are read from the variant's edge response at the window's own instants: the window's
ends and centre and, between them, every offset at which the pattern's waveform bends (engine.waveform's refined
offsets, so that linear interpolation between them stays within the waveforms' own accuracy); the pattern is
superposed there only (engine.waveform: v(t) = v_final (2 b_n - 1) + sum_m 2 (b_{n-m} - b_{n-m-1}) D(m T + u),
n = floor(t / T)).
The window sits where the nominal receiver's start edge puts it (engine.metrics' median 0 V crossing), moved by
half the change of the driver's 0-100 % edge: a ramp crosses 0 V at its middle.

Grids: every variant is simulated on the grid chosen for the nominal bus driven by an edge at least as sharp as its
own (its edge factor rounded down to a power of two, or the class's fastest), so each keeps the accuracy of
engine.transient while variants with the nominal edge or slower share the nominal grid. A variant with every part
nominal and a grid's own edge is that grid's run: its levels are read off it, not solved again.
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
from pairline.engine.metrics import (
    RECEIVER_THRESHOLD_V,
    ReceiverMetrics,
    SampledLevels,
    SamplingWindow,
    plan_window,
    receiver_metrics,
)
from pairline.engine.solve import NetworkVariants, Topology, build_topology, with_cable
from pairline.engine.transient import (
    ACCURACY,
    StepResponses,
    edge_duration_s,
    grid_index,
    step_responses,
    variant_step_responses,
)
from pairline.engine.units import si_format
from pairline.engine.waveform import (
    default_pattern,
    edge_matrix,
    pattern_duration_s,
    pattern_memory_bits,
    pattern_offsets_s,
)

VARIANTS_PER_BATCH = 32  # variants solved at once, at most
BATCH_VALUES = 4_000_000  # variant x probe x sample values of the edge responses held at once
SAMPLED_VALUES = 1_000_000  # receiver x bit x instant values of the window reading held at once
INSTANT_TOLERANCE = ACCURACY  # of each probe's peak-to-peak: interpolation between window instants
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
    worst: SampledLevels  # at the worst corner
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
    # The class's own edge range while the driver keeps its class's edge; an edge of the plan's own, the generic.
    driver_class = TRANSCEIVERS.get(bus.driver_device.key)
    if driver_class is not None and driver_class.rise_time_s != rise:
        driver_class = None
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
    bias: np.ndarray  # (n_v, 2 n_bias) pull-up, pull-down of each bias network
    input_capacitance: np.ndarray  # (n_v, n_nodes)
    unit_loads: np.ndarray  # (n_v, n_nodes)


def _corner_factors(
    ranges: tuple[ToleranceRange, ...], ends: np.ndarray, n_terms: int, n_nodes: int, n_bias: int
) -> _Factors:
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
        bias=np.repeat(f["bias"][:, None], 2 * n_bias, 1),
        input_capacitance=np.repeat(f["input_capacitance"][:, None], n_nodes, 1),
        unit_loads=np.repeat(f["unit_loads"][:, None], n_nodes, 1),
    )


def _random_factors(
    ranges: tuple[ToleranceRange, ...], n: int, n_terms: int, n_nodes: int, n_bias: int, seed: int
) -> _Factors:
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
        bias=draw("bias", 2 * n_bias),
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
    for k, (b, bias) in enumerate(zip(topo.bias_branches, plan.bias, strict=True)):
        g[:, b] = 1.0 / (bias.pull_up_ohm * f.bias[:, 2 * k] + bias.pull_down_ohm * f.bias[:, 2 * k + 1])
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


@dataclass(frozen=True, slots=True)
class _Grid:
    """A grid run (the nominal bus with one edge) and, per receiver, the window instants to read (n_rx, n_tau),
    in bits after the start edge: the window's ends and centre first, then the refined offsets inside it."""

    step: StepResponses
    tau_ui: np.ndarray  # (n_rx, n_tau)


def _window_instants(offsets_s: np.ndarray, phase_s: np.ndarray, t_bit: float, window: SamplingWindow) -> np.ndarray:
    """Per receiver the window's ends and centre and every offset inside it, in bits after its start edge
    (n_rx, n_tau); rows are padded with the centre."""
    lo, hi = window.centre_ui - window.half_width_ui, window.centre_ui + window.half_width_ui
    rows = []
    for phase in phase_s:
        tau = (np.concatenate([offsets_s + k * t_bit for k in range(3)]) - phase) / t_bit
        rows.append(np.r_[lo, window.centre_ui, hi, tau[(tau > lo) & (tau < hi)]])
    width = max(r.size for r in rows)
    return np.array([np.pad(r, (0, width - r.size), constant_values=window.centre_ui) for r in rows])


def _sampled_levels(
    step: StepResponses,
    variants: np.ndarray,
    phase_s: np.ndarray,
    tau_ui: np.ndarray,
    bits: str,
    t_bit: float,
    threshold_v: float,
) -> np.ndarray:
    """Lowest level, bits below the threshold and eye height, (3, n_variants, n_rx), of the step's variants
    `variants` (its probes are variant-major), receiver r read with its start edge at phase_s[r] (module
    docstring). The instants are located on the step's grid once for all these variants, a block of receivers at a
    time (SAMPLED_VALUES)."""
    n_rx = tau_ui.shape[0]
    b = np.frombuffer(bits.encode(), dtype=np.uint8) == ord("1")
    level = np.where(b, 1.0, -1.0)
    edges = 2.0 * np.diff(b.astype(float), prepend=float(b[0]))
    n_bits = len(bits)
    n_mem = pattern_memory_bits(step, t_bit, n_bits)
    toeplitz = edge_matrix(edges, n_mem)  # (n_bits, n_mem): edges[n - m]
    t = step.time_s
    u = phase_s[:, None] + tau_ui * t_bit  # (n_rx, n_tau) local time after bit n's start
    shift = np.floor(u / t_bit).astype(int)
    u -= shift * t_bit
    n_s = n_bits - max(1, int(shift.max(initial=0)))
    ones, zeros = level[:n_s] > 0, level[:n_s] < 0
    out = np.empty((3, variants.size, n_rx))
    per_block = max(1, SAMPLED_VALUES // (n_mem * tau_ui.shape[1]))  # receivers whose instants are held at once
    for r0 in range(0, n_rx, per_block):
        block = slice(r0, min(n_rx, r0 + per_block))
        n_b = block.stop - r0
        at = np.arange(n_mem)[None, :, None] * t_bit + u[block, None, :]  # (n_b, n_mem, n_tau)
        k = grid_index(step.levels, at)
        w = np.clip((at - t[k]) / (t[k + 1] - t[k]), 0.0, 1.0)
        late = at > t[-1]
        flat = (k + np.arange(n_b)[:, None, None] * t.size).reshape(n_b, -1)  # into a variant's rows, flattened
        shift_b = shift[block]
        for i, v in enumerate(variants):
            probes = slice(v * n_rx + r0, v * n_rx + block.stop)
            final = step.v_final_v[0, probes, None]
            rows = step.v_diff_v[0, probes].ravel()  # (n_b * n_t,); D = rows - final
            d0 = (rows[flat] - final).reshape(k.shape)
            d = d0 + ((rows[flat + 1] - final).reshape(k.shape) - d0) * w
            d = np.where(late, 0.0 if step.settled else (rows[t.size - 1 :: t.size, None] - final)[..., None], d)
            wave = np.matmul(toeplitz, d)  # (n_b, n_bits, n_tau): the edges' sum in bit n
            wave += level[None, :, None] * final[..., None]
            # bit n's instants, each read from the bit it falls in (an instant before its bit's start reads bit
            # n - 1; bit -1 is the last)
            driven = np.empty((n_b, n_s, tau_ui.shape[1]))
            for later in np.unique(shift_b):
                where = (shift_b == later)[:, None, :]
                np.copyto(driven, np.take(wave, np.arange(later, later + n_s), axis=1), where=where)
            driven *= level[None, :n_s, None]
            window_min = driven.min(axis=2)
            centre = driven[..., 1]
            if ones.any() and zeros.any():
                out[2, i, block] = centre[:, ones].min(axis=1) + centre[:, zeros].min(axis=1)
            else:
                out[2, i, block] = 2.0 * centre.min(axis=1)
            out[0, i, block] = window_min.min(axis=1)
            out[1, i, block] = np.count_nonzero(window_min < threshold_v, axis=1)
    return out


def _simulate(
    bus: Bus,
    grids: dict[float, _Grid],
    topo: Topology,
    f: _Factors,
    phase_s: np.ndarray,
    bits: str,
    threshold_v: float,
) -> np.ndarray:
    """Sampled levels of every receiver of each variant, (3, n_v, n_rx): lowest level, bits below the threshold
    and eye height. Variants run on their edge's grid (_grid_factor), up to VARIANTS_PER_BATCH solved at once."""
    n_rx = len(bus.plan.nodes)
    t_bit = 1.0 / bus.plan.bit_rate_bps
    t_edge = edge_duration_s(bus.driver.rise_time_s)
    out = np.empty((3, f.z0.size, n_rx))
    bucket = np.array([_grid_factor(x, min(grids)) for x in f.rise_time])
    for factor, grid in grids.items():
        members = np.flatnonzero(bucket == factor)
        # the grid run is itself the variant with nominal parts and the grid's edge: its levels are read off it
        own = members[(f.rise_time[members] == factor) & _nominal_parts(f, members)]
        if own.size:
            phase = phase_s + 0.5 * t_edge * (factor - 1.0)
            out[:, own] = _sampled_levels(grid.step, np.zeros(1, int), phase, grid.tau_ui, bits, t_bit, threshold_v)
            members = np.setdiff1d(members, own)
        per_batch = int(np.clip(BATCH_VALUES // (n_rx * grid.step.time_s.size), 1, VARIANTS_PER_BATCH))
        for v0 in range(0, members.size, per_batch):
            part = members[v0 : v0 + per_batch]
            chunk = _Factors(*(np.asarray(getattr(f, k))[part] for k in _Factors.__slots__))
            variants, network_of = _networks(bus, topo, chunk)
            step = variant_step_responses(
                bus, grid.step, variants, network_of, bus.driver.rise_time_s * chunk.rise_time
            )
            for edge in np.unique(chunk.rise_time):  # a ramp crosses 0 V at its middle
                same = np.flatnonzero(chunk.rise_time == edge)
                phase = phase_s + 0.5 * t_edge * (edge - 1.0)
                out[:, part[same]] = _sampled_levels(step, same, phase, grid.tau_ui, bits, t_bit, threshold_v)
    return out


def _nominal_parts(f: _Factors, members: np.ndarray) -> np.ndarray:
    """Which of the variants `members` have every part but the driver's edge at its nominal value, (n_members,)."""
    nominal = np.ones(members.size, dtype=bool)
    for key in _Factors.__slots__:
        if key != "rise_time":
            factor = np.asarray(getattr(f, key))[members]
            nominal &= np.all(factor == 1.0, axis=1) if factor.ndim == 2 else factor == 1.0
    return nominal


def _grid_factor(edge_factor: float, fastest: float) -> float:
    """The edge (as a factor on the nominal) whose grid a variant runs on: 1 for the nominal edge or slower, else
    its factor rounded down to a power of two, but not below the fastest of the range."""
    if edge_factor >= 1.0:
        return 1.0
    return float(max(fastest, 2.0 ** np.floor(np.log2(edge_factor))))


def _grids(
    bus: Bus, factors: set[float], bits: str, nominal: StepResponses, phase_s: np.ndarray, window: SamplingWindow
) -> dict[float, _Grid]:
    """A grid run per edge factor (the nominal edge reuses the nominal simulation) and its window instants."""
    t_bit = 1.0 / bus.plan.bit_rate_bps
    out = {}
    for factor in sorted(factors):
        if factor == 1.0:
            step = nominal
        else:
            edged = replace(bus, driver=replace(bus.driver, rise_time_s=bus.driver.rise_time_s * factor))
            step = step_responses(edged, max_time_s=pattern_duration_s(bus, bits))
        offsets = pattern_offsets_s(step, bits, t_bit, INSTANT_TOLERANCE)
        out[factor] = _Grid(step, _window_instants(offsets, phase_s, t_bit, window))
    return out


def _text(ranges: tuple[ToleranceRange, ...], ends: np.ndarray, rise_s: float) -> str:
    parts = []
    for r, e in zip(ranges, ends, strict=True):
        if e == 0:
            continue
        factor = r.high if e > 0 else r.low
        if r.key == "rise_time":
            parts.append(f"{r.label} {si_format(factor * rise_s, 's')}")
        else:
            parts.append(f"{r.label} {100.0 * (factor - 1.0):+.0f} %")
    return ", ".join(parts) or "nominal"


def _rank(margin_v: np.ndarray, eye_v: np.ndarray) -> np.ndarray:
    """Order of cases (rows) per receiver, worst first: lowest margin, then smallest eye."""
    return np.lexsort((eye_v, margin_v), axis=0)


def analyse_tolerances(
    bus: Bus,
    *,
    pattern: str | None = None,
    variants: int | None = None,
    seed: int | None = None,
    window: SamplingWindow | None = None,
    nominal: tuple[StepResponses, tuple[ReceiverMetrics, ...]] | None = None,
) -> ToleranceReport:
    """Corners and Monte Carlo of the primary driver's bit pattern at every receiver (module docstring).

    pattern None: the plan's test pattern, else the default PRBS of the nominal bus. variants / seed None: the
    plan's tolerances.monte_carlo_variants / seed. window None: the plan's sampling window. nominal: the primary
    driver's edge responses at every receiver and their metrics for this pattern and window, when known.
    """
    plan = bus.plan
    ranges = tolerance_ranges(bus)
    sampling = plan_window(bus) if window is None else window
    n_mc = plan.tolerances.monte_carlo_variants if variants is None else variants
    rng_seed = plan.tolerances.seed if seed is None else seed
    t_bit = 1.0 / plan.bit_rate_bps
    if nominal is None:
        step = step_responses(bus, max_time_s=pattern_duration_s(bus, pattern or plan.test_pattern))
        bits = pattern or plan.test_pattern or default_pattern(step, t_bit)
        metrics = receiver_metrics(bus, pattern=bits, step=step, window=sampling)
    else:
        step, metrics = nominal
        bits = pattern or plan.test_pattern or default_pattern(step, t_bit)
    t_edge = edge_duration_s(bus.driver.rise_time_s)
    start = step.start_s[0]
    phase = np.array(
        [
            m.propagation_delay_s - s + 0.5 * t_edge if np.isfinite(m.propagation_delay_s) else 0.5 * t_edge
            for m, s in zip(metrics, start, strict=True)
        ]
    )
    by = {r.key: r for r in ranges}
    fastest = min(1.0, by["rise_time"].low)
    topo = build_topology(bus)
    n_terms, n_rx, n_bias = len(plan.terminations), len(plan.nodes), len(plan.bias)
    threshold = metrics[0].threshold_v if metrics else RECEIVER_THRESHOLD_V

    # nominal and one at a time
    k = len(ranges)
    one_at_a_time = np.zeros((1 + 2 * k, k))
    for i in range(k):
        one_at_a_time[1 + 2 * i, i], one_at_a_time[2 + 2 * i, i] = -1.0, 1.0
    first_f = _corner_factors(ranges, one_at_a_time, n_terms, n_rx, n_bias)
    randoms = _random_factors(ranges, n_mc, n_terms, n_rx, n_bias, rng_seed) if n_mc > 0 else None
    factors = {_grid_factor(x, fastest) for x in first_f.rise_time}
    factors |= {_grid_factor(by["rise_time"].low, fastest), _grid_factor(by["rise_time"].high, fastest)}
    if randoms is not None:
        factors |= {_grid_factor(x, fastest) for x in randoms.rise_time}
    grids = _grids(bus, factors, bits, step, phase, sampling)
    first = _simulate(bus, grids, topo, first_f, phase, bits, threshold)
    margins = first[0] - threshold  # (1 + 2k, n_rx)
    low_end, high_end = margins[1::2], margins[2::2]  # (k, n_rx)
    # each receiver's worst corner: every parameter at the end that lowered its margin
    corner_ends = np.where(low_end < high_end, -1.0, 1.0).T  # (n_rx, k)
    vertices = np.unique(corner_ends, axis=0)
    second_f = _corner_factors(ranges, vertices, n_terms, n_rx, n_bias)
    second = _simulate(bus, grids, topo, second_f, phase, bits, threshold)
    cases = np.concatenate([first, second], axis=1)  # (3, n_cases, n_rx)
    case_ends = np.vstack([one_at_a_time, vertices])

    p1_margin = p1_eye = mc_margin = mc_eye = None
    if randoms is not None:
        drawn = _simulate(bus, grids, topo, randoms, phase, bits, threshold)
        mc_margin, mc_eye = drawn[0] - threshold, drawn[2]
        p1_margin = np.percentile(mc_margin, 1.0, axis=0)
        p1_eye = np.percentile(mc_eye, 1.0, axis=0)

    worst_case = _rank(cases[0], cases[2])[0]  # (n_rx,)
    receivers = []
    for r, node in enumerate(plan.nodes):
        c = int(worst_case[r])
        shifts = np.minimum(low_end[:, r], high_end[:, r]) - margins[0, r]
        dominant = int(np.argmin(shifts))
        receivers.append(
            ReceiverTolerance(
                receiver=node.name,
                nominal=metrics[r],
                worst=SampledLevels(float(cases[0, c, r]), int(cases[1, c, r]), float(cases[2, c, r]), threshold),
                worst_corner=_text(ranges, case_ends[c], bus.driver.rise_time_s),
                p1_margin_v=None if p1_margin is None else float(p1_margin[r]),
                p1_eye_height_v=None if p1_eye is None else float(p1_eye[r]),
                dominant=ranges[dominant].label,
                dominant_shift_v=float(min(shifts[dominant], 0.0)),
            )
        )
    return ToleranceReport(
        ranges=ranges,
        receivers=tuple(receivers),
        corners=len(case_ends) - 1,
        variants=n_mc,
        seed=rng_seed,
        pattern=bits,
        window=sampling,
        monte_carlo_margin_v=mc_margin,
        monte_carlo_eye_height_v=mc_eye,
    )
