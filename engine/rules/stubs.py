"""Stub length against the driver's rise time.

A stub (the branch from the trunk to a node's transceiver) reflects the edge from its open end. It stays
electrically invisible while its delay is a small part of the edge. TI SLLA272 gives the rule
    L_stub <= 0.1 * t_r * VF * c0          (stub delay at most a tenth of the 10-90 % rise time)
with t_r the driver's rise time, VF the cable's velocity factor and c0 the speed of light.

Verdicts: BREAKS beyond that length; TIGHT when the stub as built, up to 10 % longer than drawn (routing and
service loops; engine.rules.margins), would be beyond it, i.e. from 1/1.1 = 91 % of the limit; HOLDS below.
The looser published variants (stub delay <= 1/3 of t_r; CiA 301 critical length) are named in the detail only.

Every node that may drive is assumed to have the driver's rise time (the plan states one driver class); the
driver's own stub is checked like any node's. A slower driver allows longer stubs but must still switch
within 30 % of a bit (TI SLLA628 compliance paragraph), which bounds the rise time a fix may ask for.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.findings import Finding, Verdict
from pairline.engine.rules.margins import band_verdict, long_run_factor
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S, length_text, si_format

STUB_RISE_FRACTION = 0.1  # TI SLLA272
MAX_TRANSITION_BIT_FRACTION = 0.3  # driver transition <= 30 % of a bit (TI SLLA628)
_SOURCE = "TI SLLA272 The RS-485 Design Guide (stub delay <= 1/10 of the driver rise time)"


def max_stub_length_m(rise_time_s: float, velocity_factor: float) -> float:
    """Longest stub the rise time allows: L = 0.1 * t_r * VF * c0 (metres). Source: TI SLLA272."""
    return STUB_RISE_FRACTION * rise_time_s * velocity_factor * SPEED_OF_LIGHT_M_PER_S


def rise_time_needed_s(stub_length_m: float, velocity_factor: float) -> float:
    """Slowest-edge requirement of a stub: t_r >= L / (0.1 * VF * c0) (seconds). Source: TI SLLA272."""
    return stub_length_m / (STUB_RISE_FRACTION * velocity_factor * SPEED_OF_LIGHT_M_PER_S)


def stub_verdict(stub_length_m: float, limit_m: float) -> Verdict:
    """BREAKS beyond the limit, TIGHT when the stub 10 % longer as built would be beyond it, else HOLDS."""
    return band_verdict(stub_length_m <= limit_m, stub_length_m * long_run_factor() <= limit_m)


def stub_lengths_m(bus: Bus) -> dict[str, float]:
    """Every stub on the bus by node name: the driver's first, then the nodes in plan order."""
    stubs = {bus.plan.driver.name: bus.plan.driver.stub_length_m}
    stubs.update({n.name: n.stub_length_m for n in bus.plan.nodes})
    return stubs


def max_stub_by_node_m(bus: Bus) -> dict[str, float]:
    """The stub limit for each node: the fastest edge any node that may drive puts on the bus sets one value, keyed
    by node for the report."""
    limit = max_stub_length_m(bus.fastest_rise_time_s, bus.cable.velocity_factor)
    return dict.fromkeys(stub_lengths_m(bus), limit)


def max_bit_rate_for_stubs_bps(bus: Bus) -> float:
    """Highest bit rate the stub / rise-time view allows.

    The edge must be at least as slow as the longest stub needs and at most 30 % of a bit:
    rate <= 0.3 / max(t_r of the slowest driver, t_r needed by the longest stub). Sources: TI SLLA272, TI SLLA628.
    """
    longest = max(stub_lengths_m(bus).values())
    needed = rise_time_needed_s(longest, bus.cable.velocity_factor)
    return MAX_TRANSITION_BIT_FRACTION / max(bus.slowest_rise_time_s, needed)


def check_stubs(bus: Bus) -> list[Finding]:
    """Rule "stub.length": one finding per node (and the driver), stub vs 0.1 * t_r * VF * c0. A node on a branch is
    held by its own stub off the branch; the branch as a whole is rule stub.branch's (engine.rules.branches)."""
    vf = bus.cable.velocity_factor
    rise = bus.fastest_rise_time_s
    limit = max_stub_length_m(rise, vf)
    bit_s = 1.0 / bus.plan.bit_rate_bps
    slowest_ok_s = MAX_TRANSITION_BIT_FRACTION * bit_s
    findings = []
    along = {name: a for name, (_, a) in bus.layout.along_m.items()}
    for name, run in stub_lengths_m(bus).items():
        length = max(0.0, run - along.get(name, 0.0))  # a branch's node: its own stub off the branch
        verdict = stub_verdict(length, limit)
        detail = (
            f"Rise time {si_format(rise, 's')}, velocity factor {vf:g}: limit {length_text(limit)}. HOLDS to "
            f"{length_text(limit / long_run_factor())} (a stub 10 % longer as built still fits), TIGHT to "
            f"{length_text(limit)}. "
            f"Looser published variants (stub delay <= 1/3 of the rise time) would allow "
            f"{length_text(limit * 10 / 3)}."
        )
        fix = ""
        if verdict is not Verdict.HOLDS:
            needed = rise_time_needed_s(length * long_run_factor(), vf)  # holds as built, 10 % longer
            keep = limit / long_run_factor()  # so the stub holds as built, 10 % longer included
            fix = f"Shorten the stub of node '{name}' to <= {_length_text(keep)}"
            if name in along:
                branch = bus.layout.along_m[name][0]
                fix = f"Shorten the stub of node '{name}' off branch '{branch}' to <= {_length_text(keep)}"
            if needed <= slowest_ok_s:
                fix += f", or use a driver with >= {si_format(needed, 's')} rise time."
            else:
                fix += (
                    f"; a driver slow enough for this stub (>= {si_format(needed, 's')} rise time) would take "
                    f"more than 30 % of a bit at {si_format(bus.plan.bit_rate_bps, 'bit/s')}, so shortening "
                    "is the fix (or lower the bit rate to "
                    f"<= {si_format(MAX_TRANSITION_BIT_FRACTION / needed, 'bit/s')} with such a driver)."
                )
        findings.append(
            Finding(
                rule_id="stub.length",
                title="Stub length (delay within a tenth of the rise time)",
                verdict=verdict,
                value=length,
                limit=limit,
                unit="m",
                node=name,
                criterion="Stub length <= 0.1 × t_r × VF × c0 (stub delay at most a tenth of the rise time); "
                "tight when the stub 10 % longer as built would exceed it",
                source=_SOURCE,
                fix=fix,
                detail=detail,
                figures=(
                    (
                        "max_bit_rate_bps",
                        MAX_TRANSITION_BIT_FRACTION / max(bus.slowest_rise_time_s, rise_time_needed_s(length, vf)),
                    ),
                ),
            )
        )
    return findings


def _length_text(length_m: float) -> str:
    """A limit shown to two significant digits, rounded down so following the fix really fixes it."""
    if length_m <= 0.0:
        return length_text(0.0)
    scale = 10.0 ** (math.floor(math.log10(length_m)) - 1)
    return length_text(math.floor(length_m / scale + 1e-9) * scale)
