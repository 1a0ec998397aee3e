"""Input-error messages for people: each names the field, what was typed and the allowed range, in the units
the form shows (feet first with metres in brackets for an imperial plan) and rounded the one house way.

The allowed range of a field comes from the plan model (`engine.plan`), the single schema every input passes.
"""

import math
import re
from typing import TYPE_CHECKING, Any

from pairline.engine.plan import BusPlan, Problem, allowed_of, field_info
from pairline.engine.units import si_format
from pairline.server.quantities import KINDS, QuantityError, UnitSystem, bare_unit, length_text, number_text

if TYPE_CHECKING:
    from pairline.server.forms import FieldSpec

_SI_UNITS = {"s", "F", "Hz", "Ω", "bit/s", "W", "A", "V"}


def field_allowed(path: str) -> dict[str, Any]:
    """The allowed range of a plan field by dotted path (`nodes.3.stub_length_m`): min, max, min_exclusive and
    the SI unit, as the plan model states them; {} for a path that is not a field of the plan."""
    info = field_info(BusPlan, tuple(int(p) if p.isdigit() else p for p in path.split(".")))
    return allowed_of(info) if info is not None else {}


def value_text(value: float, unit: str, units: UnitSystem, spec: "FieldSpec | None" = None) -> str:
    """One value as the form would show it: a length in feet with metres in brackets for an imperial plan,
    a per-length value in the input's unit, an electrical value with an SI prefix."""
    if unit == "m":
        if units == "imperial":
            return f"{length_text(value, 'imperial')} ({length_text(value, 'metric')})"
        return length_text(value, "metric")
    if spec is not None and spec.kind:
        bare = bare_unit(spec.kind, units, spec.bare)
        if not bare.prefixed and bare.label:
            return f"{number_text(value / bare.factor)} {bare.label}"
        if bare.prefixed and value != 0:
            return si_format(value, KINDS[spec.kind].si_unit)
    if unit in _SI_UNITS and value != 0:
        return si_format(value, unit)
    return f"{number_text(value)} {unit}".strip()


def range_text(allowed: dict[str, Any], units: UnitSystem, spec: "FieldSpec | None" = None) -> str:
    """The allowed range for reading: "50 bit/s to 100 Mbit/s", "more than 0 ft, up to 13 100 ft (4000 m)".
    Lengths in an imperial plan give each bound in feet, then in metres."""
    lo, hi, unit = allowed.get("min"), allowed.get("max"), str(allowed.get("unit", ""))
    if lo is None or hi is None:
        return ""
    if unit == "m" and units == "imperial":
        return _range_words(lo, hi, allowed, lambda v: value_text(v, unit, units) if v else "0 ft")
    return _range_words(lo, hi, allowed, lambda v: value_text(v, unit, units, spec))


def _range_words(lo: float, hi: float, allowed: dict[str, Any], fmt: Any) -> str:
    if allowed.get("min_exclusive"):
        return f"more than {fmt(lo)}, up to {fmt(hi)}"
    return f"{fmt(lo)} to {fmt(hi)}"


def not_a_number_message(label: str, text: str, path: str, spec: "FieldSpec", units: UnitSystem, exc: Exception) -> str:
    """ "Bit rate is 'fast'; write a number in bit/s (e.g. 115.2k, 1M), allowed 50 bit/s to 100 Mbit/s."""
    unit = spec.unit_label(units)
    reason = exc.reason if isinstance(exc, QuantityError) else ""
    parts = [f"{label} is '{text}'"]
    if reason:
        parts.append(reason)
    write = f"write a number in {unit}" if unit else "write a number"
    if spec.hint:
        write += f" ({spec.hint})"
    allowed = range_text(field_allowed(path), units, spec)
    parts.append(write + (f", allowed {allowed}" if allowed else ""))
    return "; ".join(parts) + "."


_PAST_END = "past the trunk end"
_PAST_BRANCH_END = re.compile(r"along branch '(.*)', past that branch's end")


def problem_message(problem: Problem, units: UnitSystem) -> str:
    """The engine's message, restated in the form's units and rounding when it is about a number out of range:
    "Trunk length is 20 000 ft (6100 m); allowed more than 0 ft, up to 13 100 ft (4000 m)." Other messages
    (missing values, names, choices) pass unchanged."""
    value, allowed = problem.value, problem.allowed
    if problem.field == "nodes" and value == 0:
        return (
            f"The bus has no nodes yet: fill in at least one row of the node table (a name and a position); "
            f"allowed {allowed.get('min_length', 1)} to {allowed.get('max_length', 512)} nodes."
        )
    numeric = isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)
    if not numeric or "min" not in allowed or "max" not in allowed:
        return problem.message
    from pairline.server.forms import spec_for  # forms builds its own messages with this module

    spec = spec_for(problem.field)
    unit = str(allowed.get("unit", ""))
    shown = value_text(float(value), unit, units, spec)
    allowed_words = range_text(allowed, units, spec)
    if "nonzero_min" in allowed:
        floor = value_text(float(allowed["nonzero_min"]), unit, units, spec)
        return (
            f"{problem.label} is {value:g} {unit}, too small to be physical; allowed 0 or at least {floor} in size, "
            f"within {allowed_words}."
        )
    branch = _PAST_BRANCH_END.search(problem.message)
    if branch:
        end = value_text(float(allowed["max"]), unit, units, spec)
        return (
            f"{problem.label} is {shown} along branch '{branch.group(1)}', past that branch's end at {end}; allowed "
            f"{allowed_words} (a node's position on a branch is measured along it from its junction)."
        )
    if _PAST_END in problem.message:
        end = value_text(float(allowed["max"]), unit, units, spec)
        return f"{problem.label} is at {shown}, {_PAST_END} at {end}; allowed {allowed_words}."
    if re.match(re.escape(problem.label) + r" is ", problem.message):
        return f"{problem.label} is {shown}; allowed {allowed_words}."
    return problem.message
