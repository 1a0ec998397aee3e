"""What a field check found, for people: fitted quantities with 95 % ranges, one sentence per difference, and
the plan as the capture says it was installed (a draft to check and save).

Where a sentence says when a reflection is seen, it is the time from the edge's arrival at the probe to the
reflection's: (|x_f - x_d| + |x_f - x_p| - |x_p - x_d|) / v along the installed trunk (driver x_d, probe x_p,
feature x_f, v = VF c0). Source: the scope-as-TDR relation distance = v t / 2 (N. Ida, Engineering
Electromagnetics, example 16.3), for a driver and a probe at different places.

95 % ranges are +/- 1.96 standard deviations of the fit (engine.fieldfit), widened for the driver's swing by
a scope's gain accuracy and for its edge time by the model's own edge resolution. Tolerances before a driver
quantity counts as different (common practice): swing +/- 10 %, edge time +/- 20 %.
"""

import math
from dataclasses import dataclass, replace

from pairline.engine.bus import Bus
from pairline.engine.fieldfit import FitResult
from pairline.engine.fieldmodel import PROBE_NAME, STUB_NAME, FieldSetup, Installed, installed_plan
from pairline.engine.plan import BusInputError, BusPlan, load_plan, plan_to_dict
from pairline.engine.units import length_text, propagation_velocity_m_per_s, si_format

Z95 = 1.96
MISSING_FRACTION = 0.1  # a terminator conductance under 0.1 / Z0 (above 10 Z0) counts as missing
RISE_TOLERANCE = 0.2
SWING_TOLERANCE = 0.1
RISE_FLOOR = 0.02  # the model's edge resolution, as a fraction of the edge time
SWING_FLOOR = 0.02  # a scope's vertical gain accuracy, 1.5 to 3 % of full scale: common practice
UNEXPLAINED_FRACTION = 0.03  # of the swing: a best fit still this far off (rms) leaves something unexplained
UNEXPLAINED_NOISE = 3.0  # ... and this many noise sigmas


RIVAL_TEXT = {
    "z0_ohm": "a cable of another impedance",
    "length_scale": "a longer or shorter run",
    "start_siemens": "another terminator at the start of the trunk",
    "end_siemens": "another terminator at the end of the trunk",
    "stub": "an extra stub",
    "open_circuit_v": "a driver with another swing",
}


@dataclass(frozen=True, slots=True)
class Quantity:
    """One physical quantity: as planned, as fitted, its 95 % range, and whether it counts as a difference."""

    key: str
    label: str
    unit: str
    planned: float | None  # None: the plan has none (no terminator, no stub)
    fitted: float | None  # None: none found (a missing terminator)
    low: float | None
    high: float | None  # None: open-ended (a terminator that may be missing altogether)
    differs: bool


@dataclass(frozen=True, slots=True)
class Difference:
    key: str  # the candidate's key ("end_siemens", "stub", ...), a driver quantity, or "unexplained"
    sentence: str


@dataclass(frozen=True, slots=True)
class _Context:
    bus: Bus
    inst: Installed
    planned: Installed
    best: FitResult
    driver_m: float
    probe_m: float
    speed_m_per_s: float

    def seen_text(self, feature_m: float) -> str:
        direct = abs(self.probe_m - self.driver_m)
        after_s = (abs(feature_m - self.driver_m) + abs(feature_m - self.probe_m) - direct) / self.speed_m_per_s
        if after_s < 2.0 * self.best.values["rise_time_s"]:
            return "The level just after the edge"
        return f"The reflection {time_text(after_s)} after the edge"

    def length(self, length_m: float) -> str:
        return length_text(length_m, self.bus.plan.display_units)

    def span(self, key: str, scale: float = 1.0) -> tuple[float, float, float]:
        """(value, low, high) of a fitted quantity times scale."""
        value, sd = self.best.values[key], self.best.sigma[key]
        return value * scale, (value - Z95 * sd) * scale, (value + Z95 * sd) * scale

    def give_or_take(self, key: str, scale: float = 1.0, unit: str = "m") -> str:
        """'(± 5.8 cm at 95 %)' for a fitted quantity times scale."""
        half = Z95 * self.best.sigma[key] * scale
        return f"(± {self.length(half) if unit == 'm' else f'{half:.2g} {unit}'} at 95 %)"


def describe(
    bus: Bus,
    setup: FieldSetup,
    inst: Installed,
    planned: Installed,
    best: FitResult,
    accepted: list[str],
    rivals: dict[str, list[str]],
    unexplained: tuple[float, str] | None,
) -> tuple[tuple[Quantity, ...], tuple[Difference, ...], BusPlan | None]:
    """(quantities, difference sentences, fitted plan or None) of a finished fit.

    rivals: for each accepted key, the other explanations that fit about as well from this probe.
    unexplained: (rms volts, region name) when the best fit still leaves too much (is_unexplained).
    """
    plan = bus.plan
    k = inst.length_scale
    ctx = _Context(
        bus, inst, planned, best, plan.driver.position_m * k, _probe_m(plan, setup) * k,
        propagation_velocity_m_per_s(bus.cable.velocity_factor),
    )  # fmt: skip
    found = [_rise(ctx), _swing(ctx)]
    builders = {"z0_ohm": _z0, "length_scale": _length, "start_siemens": _terminator, "end_siemens": _terminator}
    for key in accepted:
        quantities_of, difference = _stub(ctx) if key == "stub" else builders[key](ctx, key)
        if rivals.get(key) and difference is not None:
            others = " or ".join(RIVAL_TEXT[k] for k in rivals[key])
            difference = Difference(
                key,
                f"{difference.sentence} From this probe, {others} would look much the same: check this first, "
                "or capture at another node to tell them apart.",
            )
        found.append((quantities_of, difference))
    quantities = tuple(q for qs, _ in found for q in qs)
    differences = [d for _, d in found if d is not None]
    if unexplained is not None:
        rms_v, region = unexplained
        differences.append(
            Difference(
                "unexplained",
                f"Even the best fit leaves {rms_v * 1e3:.3g} mV rms unexplained, most of it in the {region}: "
                "something this check does not model differs there (another stub or device, a damaged cable, a "
                "second terminator along the trunk, or the probe's setup). Look there first.",
            )
        )
    driver = {
        "rise_time_s": best.values["rise_time_s"] if quantities[0].differs else None,
        "open_circuit_v": quantities[1].fitted if quantities[1].differs else None,
    }
    fitted_plan = _fitted_plan(plan, inst, driver) if differences else None
    return quantities, tuple(differences), fitted_plan


def is_unexplained(rms_v: float, noise_v: float, swing_v: float) -> bool:
    """Does a best fit's rms residual exceed both UNEXPLAINED_NOISE noise sigmas and UNEXPLAINED_FRACTION of the
    swing?"""
    return rms_v > max(UNEXPLAINED_NOISE * noise_v, UNEXPLAINED_FRACTION * swing_v)


def time_text(seconds: float) -> str:
    """A duration for a sentence, 3 significant digits: '3.42 µs'."""
    return si_format(seconds, "s")


_Found = tuple[list[Quantity], Difference | None]


def _driver_quantity(
    key: str, label: str, unit: str, planned: float, fitted: float, sd: float, floor: float, tolerance: float
) -> Quantity:
    """A driver quantity: its range widened by a floor (a fraction of it), different beyond the tolerance when
    the planned value lies outside the range."""
    sd = math.hypot(sd, floor * fitted)
    low, high = fitted - Z95 * sd, fitted + Z95 * sd
    differs = abs(fitted / planned - 1.0) > tolerance and not low <= planned <= high
    return Quantity(key, label, unit, planned, fitted, low, high, differs)


def _rise(ctx: _Context) -> _Found:
    rise0, rise = ctx.bus.driver.rise_time_s, ctx.best.values["rise_time_s"]
    q = _driver_quantity(
        "rise_time_s",
        "Driver rise time (10–90 %)",
        "s",
        rise0,
        rise,
        ctx.best.sigma["rise_time_s"],
        RISE_FLOOR,
        RISE_TOLERANCE,
    )
    if not q.differs or q.high is None:
        return [q], None
    return [q], Difference(
        "rise_time_s",
        f"The driver's edges fit a rise time of {time_text(rise)} (± {time_text(q.high - rise)} at 95 %) where "
        f"the plan's driver has {time_text(rise0)}: {'slower' if rise > rise0 else 'faster'} edges than planned. "
        "Check which transceiver is fitted.",
    )


def _swing(ctx: _Context) -> _Found:
    swing0, swing = ctx.bus.driver.open_circuit_v, abs(ctx.best.open_circuit_v)
    q = _driver_quantity(
        "open_circuit_v",
        "Driver open-circuit swing",
        "V",
        swing0,
        swing,
        ctx.best.sigma["open_circuit_v"],
        SWING_FLOOR,
        SWING_TOLERANCE,
    )
    if not q.differs or q.high is None:
        return [q], None
    return [q], Difference(
        "open_circuit_v",
        f"The levels fit a driver swing of {swing:.3g} V (± {q.high - swing:.2g} V at 95 %) where the plan has "
        f"{swing0:.3g} V: check the transceiver's supply and type, and the probe attenuation entered.",
    )


def _z0(ctx: _Context, key: str) -> _Found:
    z0, low, high = ctx.span(key)
    planned = ctx.planned.z0_ohm
    return [Quantity(key, "Cable impedance Z0", "Ω", planned, z0, low, high, True)], Difference(
        key,
        f"The steps at the edge and at the terminators fit a cable of about {z0:.0f} Ω "
        f"{ctx.give_or_take(key, 1.0, 'Ω')} instead of the planned {planned:.0f} Ω: check the cable type "
        "installed; terminators should match the cable's impedance.",
    )


def _length(ctx: _Context, key: str) -> _Found:
    trunk0 = ctx.bus.plan.trunk_length_m
    trunk, low, high = ctx.span(key, trunk0)
    vf = ctx.bus.cable.velocity_factor
    later_s = 2.0 * abs(trunk - trunk0) / ctx.speed_m_per_s
    quantities = [
        Quantity("trunk_length_m", "Trunk length", "m", trunk0, trunk, low, high, True),
        Quantity(
            "velocity_factor",
            "Or: cable velocity factor (the same reflections)",
            "",
            vf,
            vf * trunk0 / trunk,
            vf * trunk0 / high,
            vf * trunk0 / low,
            True,
        ),
    ]
    return quantities, Difference(
        key,
        f"Reflections from the far end arrive up to {time_text(later_s)} {'later' if trunk > trunk0 else 'earlier'} "
        f"than planned: the trunk fits about {ctx.length(trunk)} {ctx.give_or_take(key, trunk0)} "
        f"instead of {ctx.length(trunk0)}, or a cable with velocity factor {vf * trunk0 / trunk:.2f} instead of "
        f"{vf:.2f}. A capture alone cannot tell these apart: measure the run.",
    )


def _terminator(ctx: _Context, key: str) -> _Found:
    plan = ctx.bus.plan
    g0 = getattr(ctx.planned, key) or 0.0
    g, g_low, g_high = ctx.span(key)
    at_end = key == "end_siemens"
    position_m = plan.trunk_length_m * ctx.inst.length_scale if at_end else 0.0
    other_m = 0.0 if at_end else plan.trunk_length_m * ctx.inst.length_scale
    here_m, there_m = abs(position_m - ctx.driver_m), abs(other_m - ctx.driver_m)
    if abs(here_m - there_m) < 0.05 * max(here_m, there_m):  # a driver about midway: neither end is "far"
        name = f"end {ctx.length(position_m)} along the trunk"
    else:
        name = f"{'far' if here_m > there_m else 'near'} end, {ctx.length(position_m)} along the trunk,"
    low_ohm = 1.0 / g_high if g_high > 0 else math.inf
    high_ohm = 1.0 / g_low if g_low > 0 else None
    missing = g < MISSING_FRACTION / ctx.inst.z0_ohm
    label = f"Terminator at the {'end' if at_end else 'start'} of the trunk"
    q = Quantity(
        key.replace("siemens", "termination_ohm"),
        label,
        "Ω",
        1.0 / g0 if g0 > 0 else None,
        None if missing else 1.0 / g,
        low_ohm,
        high_ohm,
        True,
    )
    seen = ctx.seen_text(position_m)
    if missing:
        text = (
            f"{seen} fits an open end {ctx.length(abs(position_m - ctx.driver_m))} from the driver: the terminator "
            f"at the {name} is probably missing (fitted: above {si_format(low_ohm, 'Ω')}; planned "
            f"{si_format(1.0 / g0, 'Ω')})."
        )
    elif g0 == 0.0:
        text = (
            f"{seen} fits a terminator of about {si_format(1.0 / g, 'Ω')} at the {name}, where the plan has none: "
            "a device's built-in terminator may be switched on there."
        )
    else:
        shown_high = si_format(high_ohm, "Ω") if high_ohm is not None else "open"
        text = (
            f"{seen} fits a terminator of about {si_format(1.0 / g, 'Ω')} (95 %: {si_format(low_ohm, 'Ω')} to "
            f"{shown_high}) at the {name} instead of the planned {si_format(1.0 / g0, 'Ω')}: check the resistor "
            "fitted there."
        )
    return [q], Difference(key, text)


def _stub(ctx: _Context) -> _Found:
    position, p_low, p_high = ctx.span("stub_position_m")
    length, l_low, l_high = ctx.span("stub_length_m")
    l_low = max(l_low, 0.0)
    quantities = [
        Quantity("stub_position_m", "Extra stub: position along the trunk", "m", None, position, p_low, p_high, True),
        Quantity("stub_length_m", "Extra stub: length", "m", None, length, l_low, l_high, True),
    ]
    k = ctx.inst.length_scale
    near = min(ctx.bus.plan.nodes, key=lambda n: abs(n.position_m * k - position))
    close_m = max(2.0, position - p_low)
    if abs(near.position_m * k - position) <= close_m:
        there = (
            f"at node '{near.name}' (planned stub {ctx.length(near.stub_length_m)}): a longer stub or an extra "
            "branch there"
        )
    else:
        there = "where the plan has no stub"
    return quantities, Difference(
        "stub",
        f"{ctx.seen_text(position)} fits a stub about {ctx.length(length)} long {ctx.give_or_take('stub_length_m')} "
        f"about {ctx.length(position)} along the trunk {ctx.give_or_take('stub_position_m')}, {there}. Find it and "
        "shorten or remove it.",
    )


def _probe_m(plan: BusPlan, setup: FieldSetup) -> float:
    if setup.at == PROBE_NAME and setup.at_position_m is not None:
        return setup.at_position_m
    if setup.at == plan.driver.name:
        return plan.driver.position_m
    return next(n.position_m for n in plan.nodes if n.name == setup.at)


def _fitted_plan(plan: BusPlan, inst: Installed, driver: dict[str, float | None]) -> BusPlan | None:
    """The installation as a validated plan draft, values rounded as a person would enter them; None when the
    fitted installation falls outside what a plan may hold (a trunk stretched past the longest allowed)."""
    missing = MISSING_FRACTION / inst.z0_ohm
    ends = {k: 0.0 for k in ("start_siemens", "end_siemens") if (getattr(inst, k) or 0.0) < missing}
    doc = plan_to_dict(installed_plan(plan, replace(inst, **ends)))
    doc["title"] = (plan.title or "Bus")[:80] + " (as installed, fitted to a capture)"
    trunk_m = doc["trunk_length_m"] = round(doc["trunk_length_m"], 1)
    placed = [*doc["nodes"], *doc["terminations"], doc["driver"]] + ([doc["bias"]] if doc.get("bias") else [])
    for item in placed:
        item["position_m"] = min(round(item["position_m"], 1), trunk_m)
    for node in doc["nodes"]:
        node["stub_length_m"] = max(round(node["stub_length_m"], 1), 0.1 if node["name"] == STUB_NAME else 0.0)
    for term in doc["terminations"]:
        term["resistance_ohm"] = float(f"{term['resistance_ohm']:.3g}")
    if doc["cable"].get("z0_ohm") is not None:
        doc["cable"]["z0_ohm"] = float(round(doc["cable"]["z0_ohm"]))
    for key, value in driver.items():
        if value is not None:
            doc["driver"][key] = float(f"{value:.3g}")
    try:
        return load_plan(doc)
    except BusInputError:
        return None
