"""Typed quantities at the edge: parse "115.2k", "4.7 nF", "30 ft", "1/8" into SI, and format SI back for inputs.

Each plan field has a kind (length, time, resistance ...). A bare number is read in the field's *bare unit*
(metres or feet for lengths, by the plan's display units; nanoseconds for rise times; picofarads for node input
capacitance ...), which the form shows beside the input. A number with a unit or SI prefix is read as written.
"""

import math
import re
from dataclasses import dataclass
from typing import Literal

from pairline.engine.units import FEET_PER_M

UnitSystem = Literal["metric", "imperial"]
UNIT_SYSTEMS: tuple[UnitSystem, ...] = ("metric", "imperial")

_PREFIX = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "M": 1e6, "G": 1e9}
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)(?:\s*/\s*(\d+(?:\.\d*)?))?\s*(.*?)\s*$")


@dataclass(frozen=True, slots=True)
class Kind:
    """A physical kind: its SI unit and the unit tokens (with their SI factor) a user may type."""

    name: str
    si_unit: str
    tokens: dict[str, float]


def _prefixed(symbols: tuple[str, ...], prefixes: str | tuple[str, ...]) -> dict[str, float]:
    table: dict[str, float] = {}
    for sym in symbols:
        for p in prefixes:
            table[p + sym] = _PREFIX[p]
    return table


_FT = 1.0 / FEET_PER_M  # metres per foot, exact
KINDS: dict[str, Kind] = {
    k.name: k
    for k in (
        Kind(
            "length",
            "m",
            {"m": 1.0, "km": 1e3, "cm": 1e-2, "mm": 1e-3, "ft": _FT, "'": _FT, "kft": 1e3 * _FT, "in": _FT / 12},
        ),
        Kind("time", "s", _prefixed(("s",), ("p", "n", "u", "µ", "μ", "m", ""))),
        Kind("rate", "bit/s", _prefixed(("bit/s", "bps", "b/s", "Bd", "baud", ""), ("", "k", "M"))),
        Kind("resistance", "Ω", _prefixed(("Ω", "ohm", "ohms", "Ohm", "R", ""), ("m", "", "k", "M"))),
        Kind("capacitance", "F", _prefixed(("F", ""), ("p", "n", "u", "µ", "μ", "m"))),
        Kind("voltage", "V", _prefixed(("V",), ("m", "", "k"))),
        Kind("frequency", "Hz", _prefixed(("Hz", ""), ("", "k", "M", "G"))),
        Kind(
            "capacitance_per_length",
            "F/m",
            {
                **{f"{p}F/m": _PREFIX[p] for p in "pn"},
                **{f"{p}F/ft": _PREFIX[p] / _FT for p in "pn"},
                "nF/km": 1e-12,
            },
        ),
        Kind(
            "resistance_per_length",
            "Ω/m",
            {
                **{f"{sym}/m": 1.0 for sym in ("Ω", "ohm")},
                **{f"{sym}/km": 1e-3 for sym in ("Ω", "ohm")},
                **{f"{sym}/ft": 1.0 / _FT for sym in ("Ω", "ohm")},
                **{f"{sym}/kft": 1e-3 / _FT for sym in ("Ω", "ohm")},
            },
        ),
        Kind("plain", "", {"": 1.0, "%": 0.01}),
    )
}


@dataclass(frozen=True, slots=True)
class Bare:
    """The unit a bare number is read in: label shown beside the input and its SI factor."""

    label: str
    factor: float
    prefixed: bool = False  # format values with an SI prefix and unit in the input (e.g. "4.7 nF")


# Bare units per kind, per unit system. Fields may override (see forms.FIELDS).
_BARE: dict[str, dict[UnitSystem, Bare]] = {
    "length": {"metric": Bare("m", 1.0), "imperial": Bare("ft", _FT)},
    "time": {"metric": Bare("ns", 1e-9, True), "imperial": Bare("ns", 1e-9, True)},
    "rate": {"metric": Bare("bit/s", 1.0, True), "imperial": Bare("bit/s", 1.0, True)},
    "resistance": {"metric": Bare("Ω", 1.0, True), "imperial": Bare("Ω", 1.0, True)},
    "capacitance": {"metric": Bare("pF", 1e-12, True), "imperial": Bare("pF", 1e-12, True)},
    "voltage": {"metric": Bare("V", 1.0), "imperial": Bare("V", 1.0)},
    "frequency": {"metric": Bare("Hz", 1.0, True), "imperial": Bare("Hz", 1.0, True)},
    "capacitance_per_length": {"metric": Bare("pF/m", 1e-12), "imperial": Bare("pF/ft", 1e-12 / _FT)},
    "resistance_per_length": {"metric": Bare("Ω/km", 1e-3), "imperial": Bare("Ω/kft", 1e-3 / _FT)},
    "plain": {"metric": Bare("", 1.0), "imperial": Bare("", 1.0)},
}


def bare_unit(kind: str, units: UnitSystem, override: Bare | None = None) -> Bare:
    return override if override is not None else _BARE[kind][units]


class QuantityError(ValueError):
    """Text that is not a number of the expected kind. `reason` is what is wrong beyond "not a number"
    (an unknown unit, a division by zero), or "" when the text simply is not a number."""

    def __init__(self, message: str, reason: str = "") -> None:
        super().__init__(message)
        self.reason = reason


def parse_quantity(text: str, kind: str, units: UnitSystem, bare: Bare | None = None) -> float:
    """SI value of typed text. Raises QuantityError naming the accepted units."""
    spec = KINDS[kind]
    unit_of_bare = bare_unit(kind, units, bare)
    m = _NUMBER.match(_decimal_point(text))
    if not m:
        raise QuantityError(f"'{text}' is not a number")
    number = float(m.group(1))
    if m.group(2) is not None:
        denominator = float(m.group(2))
        if denominator == 0:
            raise QuantityError(f"'{text}' divides by zero", "it divides by zero")
        number /= denominator
    token = m.group(3).replace(" ", "")
    if not math.isfinite(number):
        raise QuantityError(f"'{text}' is not a finite number", "it is not a finite number")
    if token == "":
        return _clean(number * unit_of_bare.factor)
    factor = spec.tokens.get(token)
    if factor is None:
        # Case-insensitive only where unambiguous ("KHZ", "OHM"), never between m and M.
        matches = {f for t, f in spec.tokens.items() if t.lower() == token.lower()}
        factor = matches.pop() if len(matches) == 1 else None
    if factor is None:
        shown = ", ".join(sorted({t for t in spec.tokens if t}, key=len)[:8])
        raise QuantityError(
            f"unit '{token}' is not understood here; write a number, or one of: {shown}",
            f"the unit '{token}' is not understood here (units it takes: {shown})",
        )
    return _clean(number * factor)


_SPACES = ("\u2009", "\u00a0", "\u202f")  # thin, no-break and narrow no-break spaces between digit groups
_COMMA_NUMBER = re.compile(r"(\d*),(\d+)")


def _decimal_point(text: str) -> str:
    """Typed text with a decimal comma read as a decimal point: "12,5" -> "12.5", "0,125" -> "0.125".

    A comma is never taken silently as a thousands separator. Where it could be either ("1,500": 1.5 or
    1500), where there are several ("1,234,567"), or beside a point ("1,500.5"), QuantityError names the
    readings, so the person says which they meant."""
    for space in _SPACES:
        text = text.replace(space, "")
    if "," not in text:
        return text
    commas = text.count(",")
    number = re.match(r"\s*[-+]?[\d.,]*", text)
    digits = number.group(0).strip().lstrip("+-") if number else ""
    as_thousands = digits.replace(",", "")
    if commas > 1 or "." in digits:
        raise QuantityError(
            f"'{text}' mixes separators",
            f"commas are not read as thousands separators; write {as_thousands} (or use a point for decimals)",
        )
    m = _COMMA_NUMBER.search(digits)
    if m is None:
        raise QuantityError(f"'{text}' is not a number")
    whole, fraction = m.group(1), m.group(2)
    as_decimal = f"{whole or '0'}.{fraction}"
    if len(fraction) == 3 and whole and not whole.startswith("0") and len(whole) <= 3:
        raise QuantityError(
            f"'{text}' is ambiguous",
            f"it could be {_plain(as_decimal)} (decimal comma) or {as_thousands} (thousands comma); "
            f"write {_plain(as_decimal)} or {as_thousands}",
        )
    return text.replace(",", ".", 1)


def _plain(number: str) -> str:
    return number.rstrip("0").rstrip(".") if "." in number else number


def _clean(value: float) -> float:
    """Drop binary noise from unit scaling (4.7 * 1e-9 -> 4.7e-9), keeping 12 significant digits."""
    return float(f"{value:.12g}")


def _number_text(value: float, digits: int = 10) -> str:
    """Up to 10 significant digits, trailing zeros dropped: round-trips typed values, stays readable."""
    if value == 0:
        return "0"
    text = f"{value:.{digits}g}"
    if "e" in text:
        return text
    return text.rstrip("0").rstrip(".") if "." in text else text


_DISPLAY_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"))


def format_quantity(
    value: float | None, kind: str, units: UnitSystem, bare: Bare | None = None, digits: int = 10
) -> str:
    """Text for an input from an SI value; "" for None. Prefixed kinds read "4.7 nF", others a bare number."""
    if value is None:
        return ""
    unit_of_bare = bare_unit(kind, units, bare)
    if kind == "plain" and (fraction := _fraction_text(value)):
        return fraction
    if not _is_power_of_ten(unit_of_bare.factor):
        # Converted from SI (feet, per foot): the conversion's long tail is noise, not what anyone typed.
        digits = min(digits, CONVERTED_DIGITS)
    if not unit_of_bare.prefixed or value == 0:
        return _number_text(value / unit_of_bare.factor, digits)
    si_unit = KINDS[kind].si_unit
    allowed = {"": (1e3, 1e6, 1e9, 1.0), "k": (1e3,), "M": (1e6,)}
    for scale, prefix in _DISPLAY_PREFIXES:
        if kind == "rate" and scale not in allowed[""]:
            continue
        if kind == "time" and scale > 1.0:
            continue
        if abs(value) >= scale * 0.9999999:
            return f"{_number_text(value / scale, digits)} {prefix}{si_unit}"
    scale, prefix = _DISPLAY_PREFIXES[-1]
    return f"{_number_text(value / scale, digits)} {prefix}{si_unit}"


CONVERTED_DIGITS = 6  # 100 m shows as 328.084 ft: 0.03 mm from the stored value, far below any cable tolerance


def _is_power_of_ten(factor: float) -> bool:
    exponent = math.log10(factor)
    return abs(exponent - round(exponent)) < 1e-9


def _fraction_text(value: float) -> str:
    """ "1/3" for a value that is a small fraction with a repeating decimal (unit loads), else ""."""
    if value <= 0 or len(_number_text(value)) <= 8:
        return ""
    for denominator in range(2, 17):
        numerator = round(value * denominator)
        if numerator and abs(numerator / denominator - value) <= 1e-9 * value:
            return f"{numerator}/{denominator}"
    return ""


def length_in(value_m: float, units: UnitSystem) -> float:
    """A length in the display unit (m or ft)."""
    return value_m * FEET_PER_M if units == "imperial" else value_m


def length_unit(units: UnitSystem) -> str:
    return "ft" if units == "imperial" else "m"


GROUP_FROM = 10_000  # numbers this large get thin spaces between groups of three digits: 13 100, 1 000 000


def number_text(value: float, digits: int = 3) -> str:
    """A number for reading, to `digits` significant digits and never in exponent form: 0.2338 -> '0.234',
    1312.3 -> '1310', 1e9 -> '1 000 000 000'. The command line rounds the same way."""
    if value == 0.0 or not math.isfinite(value):
        return f"{value:g}"
    if abs(value) >= 10.0 ** (digits - 1):
        rounded = float(f"{value:.{digits}g}")  # round() overflows near the largest float
        text = f"{rounded:,.0f}" if abs(rounded) >= GROUP_FROM else f"{rounded:.0f}"
        return text.replace(",", "\u202f")  # narrow no-break space
    text = f"{value:.{digits}g}"
    if "e" in text:  # tiny values: plain decimals rather than exponents
        text = f"{value:.{digits - 1 - math.floor(math.log10(abs(value)))}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def length_text(value_m: float, units: UnitSystem, digits: int = 3) -> str:
    """A length in the display unit, rounded for reading: '328 ft', '0.234 m'."""
    return f"{number_text(length_in(value_m, units), digits)} {length_unit(units)}"
