"""What checking a plan costs, estimated before simulating, and the refusal when it is over the time limit.

The signal check simulates the bit pattern from every node that may drive (RS-485; a sample of them on
large buses) at every receiver. For each driver it interpolates every receiver's edge response at the edge's
own time step over the bits an edge is remembered for, then builds the pattern waveform at up to a few hundred
points per bit (32 evenly spread, and some of the edge response's points where the waveform bends); the edge
response itself costs one network solve per Laplace point. So the unavoidable work is

    work = (drivers + 1) x [receivers x (memory_bits x edge_points + pattern_bits x points_per_bit)
                            + laplace_points x (receivers + terminators)]

(the + 1 is the page's own simulation from the primary driver). The worst case over component tolerances
(engine.tolerance) solves the primary driver's edge again for each tolerance corner: at least 13 networks on the
grid of the driver's own edge and 2 on the grid of the fastest edge its class may have,

    tolerance work = (receivers + terminators) x (13 x laplace_points(edge) + 2 x laplace_points(fastest edge)).

Fixes found by re-simulating, the advised plan's own check and the receivers' sampled levels come on top, so
`SECONDS_PER_UNIT` (with the fraction of edge points a waveform keeps) is set at 80 % of the smallest ratio of
measured check time to this work over the spread of plans in tests/bench_cost.py (8 to 512 nodes, 0 to 32
transceivers, 0.5 ns to 500 ns edges, 50 bit/s to 2 Mbit/s) on a 2-core machine: there the estimate stays below
every measured check, so a plan estimated over the limit would not have finished within it. An engine that gets
faster calls for running that script again. The time limit in the workers stays the final guard.
"""

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass

from pairline.engine.bus import build_bus
from pairline.engine.plan import BusPlan, Problem
from pairline.engine.rules.signal import MAX_DRIVERS_ALL, MAX_DRIVERS_SAMPLED
from pairline.engine.segments import plan_parts
from pairline.engine.tolerance import tolerance_ranges
from pairline.engine.units import delay_s, si_format

SECONDS_PER_UNIT = 7.6e-8  # measured lower bound, see the module docstring
DEFAULT_PATTERN_BITS = 127  # the longest built-in pseudo-random pattern (PRBS-7)
EDGE_POINTS_PER_EDGE = 8  # edge response points per 0-100 % edge time
FIRST_LEVEL_EDGES = 512  # edge times the finest time step covers at most
POINTS_PER_BIT_MAX = 600
POINTS_PER_BIT_MIN = 32
KEPT_FRACTION = 0.05  # of the edge response's points within a bit, those a pattern waveform keeps (where it bends)
WAVEFORM_VALUES = 6_000_000  # receivers x bits x points of one pattern simulation, before points thin out
SETTLING_DELAYS = 6  # an edge is remembered for about six trunk delays
SLOWEST_RISE_S = 20e-6  # the plan model's largest rise time
NOMINAL_GRID_CORNERS = 13  # tolerance corners with distinct networks on the driver's own edge (engine.tolerance)
FASTEST_GRID_CORNERS = 2  # at least: the fastest edge alone, and one receiver's worst corner


@dataclass(frozen=True, slots=True)
class CheckWork:
    """The plan features the cost of a check grows with."""

    transceivers: int  # nodes that may drive besides the driver (RS-485)
    standard: str
    receivers: int
    terminators: int
    pattern_bits: int
    edge_s: float  # 0-100 % edge time of the primary driver
    rise_time_s: float  # 10-90 %
    bit_time_s: float
    settle_s: float  # how long an edge is remembered
    fastest_edge_ratio: float  # the fastest edge of the tolerance range over the driver's own

    @property
    def drivers(self) -> int:
        """Drivers the signal check simulates: every node that may drive, or a sample beyond MAX_DRIVERS_ALL."""
        if self.standard != "rs485":
            return 1
        every = 1 + self.transceivers
        return every if every <= MAX_DRIVERS_ALL else MAX_DRIVERS_SAMPLED


def check_work(plan: BusPlan) -> CheckWork:
    bus = build_bus(plan)
    cable, driver = bus.cable, bus.driver
    longest_stub_m = max([n.stub_length_m for n in plan.nodes] + [plan.driver.stub_length_m])
    edge_s = driver.rise_time_s / 0.8
    fastest = min(1.0, next(r.low for r in tolerance_ranges(bus) if r.key == "rise_time"))
    return CheckWork(
        transceivers=sum(n.may_drive for n in plan.nodes),
        standard=plan.standard,
        receivers=len(plan.nodes),
        terminators=len(plan.terminations),
        pattern_bits=len(plan.test_pattern) if plan.test_pattern else DEFAULT_PATTERN_BITS,
        edge_s=edge_s,
        rise_time_s=driver.rise_time_s,
        bit_time_s=1.0 / plan.bit_rate_bps,
        settle_s=edge_s + SETTLING_DELAYS * delay_s(plan.trunk_length_m + 2.0 * longest_stub_m, cable.velocity_factor),
        fastest_edge_ratio=fastest,
    )


def _laplace_points(work: CheckWork, edge_s: float) -> float:
    """Laplace points of one edge response for a driver edge of edge_s (0-100 %)."""
    step_s = edge_s / EDGE_POINTS_PER_EDGE
    horizon_s = min(work.settle_s, work.pattern_bits * work.bit_time_s)
    first_level_s = min(FIRST_LEVEL_EDGES * edge_s, max(32 * edge_s, horizon_s))
    later_levels = max(0.0, math.log(max(horizon_s / first_level_s, 1.0), 4))
    return first_level_s / step_s + 1024 * later_levels


def estimated_check_s(work: CheckWork) -> float:
    """A lower bound on the check's time on the reference machine, in seconds (module docstring)."""
    step_s = work.edge_s / EDGE_POINTS_PER_EDGE
    bits = work.pattern_bits
    memory_bits = min(bits, work.settle_s / work.bit_time_s + 1.0)
    edge_points = min(work.bit_time_s, work.settle_s, FIRST_LEVEL_EDGES * work.edge_s) / step_s + POINTS_PER_BIT_MIN
    per_bit = min(
        POINTS_PER_BIT_MAX,
        max(2 * POINTS_PER_BIT_MIN + 1, WAVEFORM_VALUES / (work.receivers * bits)),
        POINTS_PER_BIT_MIN + KEPT_FRACTION * edge_points,
    )
    loads = work.receivers + work.terminators
    per_driver = (
        work.receivers * (memory_bits * edge_points + bits * per_bit) + _laplace_points(work, work.edge_s) * loads
    )
    tolerance = loads * (
        NOMINAL_GRID_CORNERS * _laplace_points(work, work.edge_s)
        + FASTEST_GRID_CORNERS * _laplace_points(work, work.fastest_edge_ratio * work.edge_s)
    )
    return SECONDS_PER_UNIT * ((work.drivers + 1) * per_driver + tolerance)


def cost_problems(plan: BusPlan, limit_s: float) -> list[Problem]:
    """[] when the plan's estimated check fits the limit; else what makes it costly and what would fit. A plan of
    several parts costs the sum of its parts' checks (engine.network)."""
    if not plan.is_one_bus:
        return _parts_problems(plan, limit_s, "would take at least {estimate:.0f} s")
    work = check_work(plan)
    estimate_s = estimated_check_s(work)
    if estimate_s <= limit_s:
        return []
    return refusal_problems(plan, work, limit_s, f"would take at least {estimate_s:.0f} s")


def over_limit_problems(plan: BusPlan, limit: str, time_limit_s: float, memory_limit_mb: int) -> list[Problem]:
    """The refusal of a check that ran past its time limit or out of memory while simulating."""
    what = (
        f"needed more than the {memory_limit_mb} MB of memory a check may use"
        if limit == "memory"
        else f"took longer than {time_limit_s:g} s"
    )
    if not plan.is_one_bus:
        return _parts_problems(plan, time_limit_s, what, always=True)
    return refusal_problems(plan, check_work(plan), time_limit_s, what)


def _parts_problems(plan: BusPlan, limit_s: float, what: str, *, always: bool = False) -> list[Problem]:
    """The refusal of a plan of several parts: the head names every part's share; the changes are those of the
    costliest part with the rest of the budget, on the fields of the plan's own trunk (the master's segment or
    the transmit pair), where the part's fields are the plan's."""
    parts = plan_parts(plan)
    works = [check_work(p.plan) for p in parts]
    estimates = [estimated_check_s(w) for w in works]
    total = sum(estimates)
    if total <= limit_s and not always:
        return []
    k = max(range(len(parts)), key=lambda i: estimates[i])
    shares = ", ".join(f"{p.label} {e:.0f} s" for p, e in zip(parts, estimates, strict=True))
    head = Problem(
        "",
        "Simulation size",
        round(total, 1),
        {"max": limit_s, "unit": "s"},
        f"Checking this plan {what.format(estimate=total)}, over the {limit_s:g} s a check may take: its parts "
        f"take {shares}. Make {parts[k].label} smaller or its pattern shorter.",
    )
    room_s = limit_s - (total - estimates[k])
    own = parts[k].feeder is None and parts[k].kind != "return_pair"
    changes = _changes(parts[k].plan, works[k], room_s) if own and room_s > 0 else []
    return [head, *(c for c in changes if c.field in ("test_pattern", "") or c.field.startswith("driver."))]


def refusal_problems(plan: BusPlan, work: CheckWork, limit_s: float, what: str) -> list[Problem]:
    size = (
        f"{work.drivers} simulated driver(s), {work.receivers} receiver(s), a {work.pattern_bits}-bit pattern and "
        f"{si_format(work.rise_time_s, 's')} edges at {si_format(1.0 / work.bit_time_s, 'bit/s')}"
    )
    changes = _changes(plan, work, limit_s)
    head = Problem(
        "",
        "Simulation size",
        round(estimated_check_s(work), 1),
        {"max": limit_s, "unit": "s"},
        f"Checking this plan {what}, over the {limit_s:g} s a check may take: {size}. "
        + ("Change one of the fields named below." if changes else "Make the bus smaller or the pattern shorter."),
    )
    return [head, *changes]


def _fits(work: CheckWork, limit_s: float, **change: float) -> bool:
    return estimated_check_s(dataclasses.replace(work, **change)) <= limit_s


def _largest(fits: Callable[[int], bool], high: int) -> int | None:
    """The largest n in [0, high) for which fits(n), assuming fits is monotone (larger n costs more)."""
    if high <= 0 or not fits(0):
        return None
    low = 0
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return low


def _most_that_fits(work: CheckWork, limit_s: float, count: str, least: int) -> int | None:
    """The largest value from `least` below its present one of a count of `work` that fits the limit alone."""
    found = _largest(lambda n: _fits(work, limit_s, **{count: n + least}), getattr(work, count) - least)
    return None if found is None else found + least


def _changes(plan: BusPlan, work: CheckWork, limit_s: float) -> list[Problem]:
    """One problem per plan feature that, changed alone, brings the estimate within the limit."""
    out: list[Problem] = []
    if work.drivers > 1:
        # every transceiver is simulated as a driver up to MAX_DRIVERS_ALL; only fewer of them cost less
        most = _largest(lambda n: _fits(work, limit_s, transceivers=n), min(work.transceivers, MAX_DRIVERS_ALL - 1))
        if most is not None:
            first = next(i for i, n in enumerate(plan.nodes) if n.may_drive)
            out.append(
                Problem(
                    f"nodes.{first}.may_drive",
                    "Nodes that may drive",
                    work.transceivers,
                    {"max": most},
                    f"{work.transceivers} nodes may drive, and each is simulated driving the bus; let at most "
                    f"{most} of them drive (the rest only listen) to check this plan.",
                )
            )
    bits = _most_that_fits(work, limit_s, "pattern_bits", 2)
    if bits is not None:
        out.append(
            Problem(
                "test_pattern",
                "Bit pattern",
                work.pattern_bits,
                {"min_length": 2, "max_length": bits},
                f"The bit pattern has {work.pattern_bits} bits; at most {bits} fit the time limit.",
            )
        )
    slowest = SLOWEST_RISE_S
    if work.rise_time_s < slowest and _fits(work, limit_s, edge_s=slowest / 0.8, rise_time_s=slowest):
        low, high = work.rise_time_s, slowest  # bisection in log space: the slowest edge that still fails
        for _ in range(40):
            mid = math.sqrt(low * high)
            low, high = (low, mid) if _fits(work, limit_s, edge_s=mid / 0.8, rise_time_s=mid) else (mid, high)
        device = plan.driver.device
        field = "driver.device." + ("rise_time_s" if device and device.rise_time_s is not None else "class_key")
        out.append(
            Problem(
                field,
                "Driver rise time",
                work.rise_time_s,
                {"min": high, "unit": "s"},
                f"The driver's {si_format(work.rise_time_s, 's')} edges are resolved in fine time steps over the "
                f"whole bit; a driver with edges of {si_format(high, 's')} or slower fits the time limit.",
            )
        )
    nodes = _most_that_fits(work, limit_s, "receivers", 1)
    if nodes is not None:
        out.append(
            Problem(
                "nodes",
                "Nodes",
                work.receivers,
                {"min_length": 1, "max_length": nodes},
                f"The bus has {work.receivers} nodes; at most {nodes} fit the time limit as they are.",
            )
        )
    return out
