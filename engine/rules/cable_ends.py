"""The trunk's two cable ends: which of them need a terminator, and what already loads them.

RS-485 traffic runs both ways, so the trunk is terminated at its two physical cable ends (0 m and
trunk_length_m), wherever the driver sits (TI SLLA272; B&B RS-422/485 application note). A single-driver
RS-422 line with its driver at one end is terminated at the far end only: the driver's low output impedance
ends its own side (National Semiconductor AN-903); with the driver mid-bus both ends are terminated.
Something counts as "at the end" within the end tolerance: the smaller of 1 m and the stub limit of
engine.rules.stubs, since the cable left beyond a terminator is an open stub.
"""

import math

from pairline.engine.bus import Bus
from pairline.engine.rules.preferred import nearest_preferred
from pairline.engine.rules.stubs import max_stub_length_m
from pairline.engine.units import length_text, parallel_ohm

END_TOLERANCE_CAP_M = 1.0


def end_tolerance_m(bus: Bus) -> float:
    """How far from a cable end a terminator may sit and still count as at the end: min(1 m, stub limit)."""
    return bus.memo.get(
        ("end_tolerance_m", bus.plan.standard, bus.cable.velocity_factor),
        lambda: min(END_TOLERANCE_CAP_M, max_stub_length_m(bus.fastest_rise_time_s, bus.cable.velocity_factor)),
    )


def nearest_end_m(bus: Bus, position_m: float) -> float | None:
    """The cable end (0 or trunk length) within the end tolerance of a position, nearest first; else None."""
    length = bus.plan.trunk_length_m
    end = 0.0 if position_m <= length - position_m else length
    return end if abs(position_m - end) <= end_tolerance_m(bus) + 1e-12 else None


def required_ends_m(bus: Bus) -> tuple[float, ...]:
    """Cable ends that need a terminator: RS-485 both; RS-422 the far end, or both if the driver is mid-bus."""
    length = bus.plan.trunk_length_m
    if bus.plan.standard == "rs422":
        driver_end = nearest_end_m(bus, bus.plan.driver.position_m)
        if driver_end is not None:
            return (length,) if driver_end == 0.0 else (0.0,)
    return (0.0, length)


def end_name(bus: Bus, end_m: float) -> str:
    """How a practitioner names a cable end: "the driver's end (0 m)" / "the far end (600 m)", or, with the
    driver mid-bus, "the 0 m end" / "the 600 m end"."""
    driver_end = nearest_end_m(bus, bus.plan.driver.position_m)
    if driver_end is None:
        return f"the {length_text(end_m)} end"
    where = length_text(end_m)
    return f"the driver's end ({where})" if end_m == driver_end else f"the far end ({where})"


def lumped_load_ohm(bus: Bus, position_m: float) -> float:
    """Receivers (and the bias network) within the end tolerance of a position, in parallel: R_P."""
    tol = end_tolerance_m(bus)
    plan = bus.plan

    def receivers() -> tuple[float, ...]:
        near = [bus.devices[n.name].budget_input_ohm for n in plan.nodes if abs(n.position_m - position_m) <= tol]
        if plan.standard == "rs485" and abs(plan.driver.position_m - position_m) <= tol:
            near.append(bus.driver_device.budget_input_ohm)
        return tuple(near)

    loads = [*bus.memo.get(("receivers_near", plan.standard, tol, position_m), receivers)]
    loads += [b.pull_up_ohm + b.pull_down_ohm for b in plan.bias if abs(b.position_m - position_m) <= tol]
    return parallel_ohm(*loads)


def corrected_termination_ohm(z0_ohm: float, parallel_load_ohm: float) -> float:
    """Terminator that, beside a lumped load R_P, presents Z0: R_T = Z0 / (1 - Z0/R_P).

    R_P = inf gives Z0; R_P <= Z0 gives inf (the load alone is already at or below Z0, no resistor helps).
    Source: R_T || R_P = Z0 solved for R_T (parallel resistances); with a bias network 2 R_B as R_P this is the
    matched bias end of J. Axelson, Serial Port Complete, 2nd ed., ch. 7.
    """
    if math.isinf(parallel_load_ohm):
        return z0_ohm
    if parallel_load_ohm <= z0_ohm:
        return math.inf
    return z0_ohm / (1.0 - z0_ohm / parallel_load_ohm)


def terminator_value_ohm(bus: Bus, end_m: float) -> float:
    """The terminator to buy for a cable end: Z0 corrected for the loads lumped there, nearest E24 (IEC 60063).

    Every sentence and the summary name this one value; Z0 itself (nearest E24) where no resistor can correct
    the end (the loads there are already at or below Z0).
    """
    r = corrected_termination_ohm(bus.cable.z0_ohm, lumped_load_ohm(bus, end_m))
    return nearest_preferred(r if math.isfinite(r) else bus.cable.z0_ohm)
