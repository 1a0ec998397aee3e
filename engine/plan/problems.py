"""Problems with a plan document, each naming the field (a dotted path, also the form input's name), the value
and the allowed range; and the translation of pydantic's validation errors into them."""

import math
from dataclasses import dataclass
from typing import Any

import annotated_types as at
from pairline.engine.library import CABLES, TRANSCEIVERS
from pairline.engine.units import si_format
from pydantic import BaseModel
from pydantic.fields import FieldInfo


@dataclass(frozen=True, slots=True)
class Problem:
    field: str  # dotted path, also the form input's name
    label: str
    value: Any
    allowed: dict[str, Any]
    message: str


class BusInputError(ValueError):
    """Input that cannot be planned. Carries every problem found, each naming field, value and range."""

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        super().__init__("; ".join(p.message for p in problems))


def allowed_of(info: FieldInfo) -> dict[str, Any]:
    """The allowed range a field states: min / max (min_exclusive), lengths, and its unit."""
    allowed: dict[str, Any] = {}
    for m in info.metadata:
        if isinstance(m, at.Ge):
            allowed["min"] = m.ge
        elif isinstance(m, at.Gt):
            allowed["min"] = m.gt
            allowed["min_exclusive"] = True
        elif isinstance(m, at.Le):
            allowed["max"] = m.le
        elif isinstance(m, at.Lt):
            allowed["max"] = m.lt
        elif isinstance(m, at.MaxLen):
            allowed["max_length"] = m.max_length
        elif isinstance(m, at.MinLen):
            allowed["min_length"] = m.min_length
    extra = info.json_schema_extra
    if isinstance(extra, dict) and "unit" in extra:
        allowed["unit"] = extra["unit"]
    return allowed


def range_text(allowed: dict[str, Any]) -> str:
    unit = str(allowed.get("unit", ""))
    if "choices" in allowed:
        return "one of " + ", ".join(str(c) for c in allowed["choices"])

    def fmt(v: float) -> str:
        return value_text(v, unit)

    lo, hi = allowed.get("min"), allowed.get("max")
    if lo is not None and hi is not None:
        if allowed.get("min_exclusive"):
            return f"more than {fmt(lo)}, up to {fmt(hi)}"
        return f"{fmt(lo)} to {fmt(hi)}"
    if "max_length" in allowed:
        return f"{allowed.get('min_length', 0)} to {allowed['max_length']} characters"
    return "a valid value"


def finite_float(value: int | float) -> float | None:
    """The number as a finite float, or None when it is infinite, NaN or an integer beyond any float."""
    try:
        number = float(value)
    except OverflowError:
        return None
    return number if math.isfinite(number) else None


def value_text(value: Any, unit: str) -> str:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return repr(value) if isinstance(value, str) else str(value)
    if isinstance(value, int) and finite_float(value) is None:
        return f"a {len(str(abs(value)))}-digit number"
    if not math.isfinite(value):
        return str(value)
    if unit in {"s", "F", "Hz", "Ω", "bit/s", "F/m"} and value != 0:
        return si_format(float(value), unit)
    return f"{value:g} {unit}".strip()


def value_beside(value: Any, bound: Any, unit: str) -> str:
    """The value's text, with as many digits as it takes to differ from the bound it is compared with."""
    text = value_text(value, unit)
    if not (isinstance(value, float) and isinstance(bound, int | float) and math.isfinite(value) and value != bound):
        return text
    digits = 7
    while text == value_text(bound, unit) and digits <= 17:
        text = f"{value:.{digits}g} {unit}".strip()
        digits += 1
    return text


def field_info(root: type[BaseModel], loc: tuple[int | str, ...]) -> FieldInfo | None:
    """Follow a location through the plan's models (from `root`) to the FieldInfo it names."""
    model: type[BaseModel] | None = root
    info: FieldInfo | None = None
    for part in loc:
        if isinstance(part, int) or model is None:
            continue
        info = model.model_fields.get(part)
        if info is None:
            return None
        model = submodel(info.annotation)
    return info


def submodel(annotation: Any) -> type[BaseModel] | None:
    """The model inside a field's annotation (through Optional, list, Annotated), or None."""
    stack = [annotation]
    while stack:
        item = stack.pop()
        if isinstance(item, type) and issubclass(item, BaseModel):
            return item
        stack.extend(getattr(item, "__args__", ()))
    return None


_ROWS = {
    "nodes": "Node",
    "terminations": "Terminator",
    "bias": "Bias network",
    "segments": "Segment",
    "repeaters": "Repeater",
}
_RETURN_ROWS = {"return_terminations": "terminations", "return_bias": "bias"}


def _lower_first(text: str) -> str:
    return text[:1].lower() + text[1:]


def _row(data: Any, key: Any, index: int) -> Any:
    try:
        return data[key][index]
    except (KeyError, IndexError, TypeError):
        return None


def row_label(loc: tuple[int | str, ...], data: Any, title: str) -> str:
    """A label for a field: "Node 4 ('pump') stub length", "Bias network 2 pull-up resistor", "Trunk length",
    "Segment 1 ('store') node 2 ('door') position", "Return-pair terminator 1 position"."""
    if len(loc) >= 4 and loc[0] == "segments" and isinstance(loc[1], int) and loc[2] in _ROWS:
        segment = row_label(loc[:2], data, title)
        return f"{segment} {_lower_first(row_label(loc[2:], _row(data, 'segments', loc[1]), title))}"
    if len(loc) >= 3 and loc[0] == "four_wire" and loc[1] in _RETURN_ROWS:
        key = _RETURN_ROWS[str(loc[1])]
        raw = data.get("four_wire") if isinstance(data, dict) else None
        inner = row_label((key, *loc[2:]), {key: raw.get(loc[1]) if isinstance(raw, dict) else None}, title)
        return f"Return-pair {_lower_first(inner)}"
    if len(loc) >= 2 and loc[0] in _ROWS and isinstance(loc[1], int):
        what = _ROWS[str(loc[0])]
        raw = _row(data, loc[0], loc[1])
        name = f" ('{raw['name']}')" if isinstance(raw, dict) and isinstance(raw.get("name"), str) else ""
        if len(loc) == 2:
            return f"{what} {loc[1] + 1}{name}"
        first = what.split()[0]
        word = _lower_first(title) if not title.startswith(first) else title[len(first) + 1 :]
        return f"{what} {loc[1] + 1}{name} {word}"
    if len(loc) >= 2 and loc[0] == "driver" and loc[1] == "device" and not title.startswith("Driver"):
        return f"Driver {_lower_first(title)}"
    return title


def problem_from_pydantic(err: Any, data: Any, root: type[BaseModel]) -> Problem:
    loc = tuple(err["loc"])
    # pydantic appends the union member or literal tag to the location of some errors; drop them.
    loc = tuple(
        p
        for p in loc
        if not (isinstance(p, str) and (p in {"float", "str", "none", "bool", "function-after"} or p.endswith("Spec")))
    )
    path = ".".join(str(p) for p in loc)
    info = field_info(root, loc)
    base = info.title if info is not None and info.title else str(loc[-1]) if loc else "Plan"
    label = row_label(loc, data, base or "(empty name)")
    allowed = allowed_of(info) if info is not None else {}
    value = err.get("input")
    kind = err["type"]
    ctx = err.get("ctx") or {}
    unit = str(allowed.get("unit", ""))
    if kind == "literal_error" or kind == "enum":
        choices = [c.strip().strip("'") for c in str(ctx.get("expected", "")).replace(" or ", ",").split(",")]
        allowed = {"choices": [c for c in choices if c]}
        msg = f"{label} is {value_text(value, '')}; allowed {range_text(allowed)}."
    elif kind == "missing":
        value = None
        msg = f"{label} is missing" + (f"; allowed {range_text(allowed)}." if allowed.get("max") else ".")
    elif kind == "extra_forbidden":
        allowed = {"rule": "not a field of the bus plan"}
        msg = f"'{loc[-1]}' is not a field of the bus plan (at {path}); remove it or check its spelling."
        value = short(value)
    elif kind in {"float_parsing", "float_type", "int_type", "int_parsing"}:
        msg = f"{label} must be a number; got {value_text(short(value), '')}"
        msg += f"; allowed {range_text(allowed)}." if "min" in allowed else "."
    elif kind in {"bool_parsing", "bool_type"}:
        allowed = {"choices": [True, False]}
        msg = f"{label} must be true or false; got {value_text(short(value), '')}."
    elif kind == "finite_number":
        msg = f"{label} is {value}; it must be a finite number, allowed {range_text(allowed)}."
    elif kind == "vanishing_number":
        floor = ctx["nonzero_min"]
        msg = (
            f"{label} is {value_beside(value, floor, unit)}, too small to be physical; allowed 0 or at least "
            f"{value_text(floor, unit)} in size, within {range_text(allowed)}."
        )
        allowed = allowed | {"nonzero_min": floor}
    elif kind in {"greater_than_equal", "greater_than", "less_than_equal", "less_than"}:
        bound = next((v for k, v in ctx.items() if k in {"ge", "gt", "le", "lt"}), None)
        msg = f"{label} is {value_beside(value, bound, unit)}; allowed {range_text(allowed)}."
    elif kind in {"too_long", "too_short", "string_too_long", "string_too_short"}:
        count = len(value) if isinstance(value, list | str) else value
        noun = "items" if isinstance(value, list) else "characters"
        lo = allowed.get("min_length", 0)
        hi = allowed.get("max_length", ctx.get("max_length", "?"))
        allowed = {"min_length": lo, "max_length": hi}
        msg = f"{label} has {count} {noun}; allowed {lo} to {hi}."
        value = count if isinstance(value, list) else value
    elif kind == "string_type":
        allowed = allowed or library_choices(loc)
        msg = f"{label} must be text; got {value_text(short(value), '')}"
        msg += f"; allowed {range_text(allowed)}." if allowed else "."
    elif kind == "string_pattern_mismatch":
        msg = f"{label} may hold only 0 and 1; got {value_text(short(value), '')}."
        allowed = {"pattern": "0s and 1s"}
    else:
        msg = f"{label}: {err['msg']} (got {value_text(short(value), '')})."
    return Problem(path, label, short(value), allowed, msg)


def library_choices(loc: tuple[int | str, ...]) -> dict[str, Any]:
    """The library keys a class field may name, for messages about it."""
    if loc == ("cable", "class_key"):
        return {"choices": sorted(CABLES)}
    if loc in {("driver", "transceiver"), ("default_device",)} or (
        len(loc) >= 2 and (loc[-1] == "device" or loc[-2:] == ("device", "class_key"))
    ):
        return {"choices": sorted(TRANSCEIVERS)}
    return {}


def short(value: Any) -> Any:
    """Keep echoed values small: a huge pasted list is summarised, not repeated back."""
    if isinstance(value, int) and not isinstance(value, bool) and finite_float(value) is None:
        return value_text(value, "")
    if isinstance(value, dict):
        return {"type": "object", "keys": len(value)}
    if isinstance(value, list):
        return {"type": "list", "items": len(value)}
    if isinstance(value, str) and len(value) > 200:
        return value[:200] + "…"
    return value
