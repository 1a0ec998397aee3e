"""Resistor and capacitor values one can buy: the IEC 60063 preferred-number series, and how to pick from them."""

import math

# IEC 60063 E24 and E6 series (mantissas of one decade).
E24: tuple[float, ...] = (
    *(1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0),
    *(3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
)
E6: tuple[float, ...] = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)


def _candidates(value: float, series: tuple[float, ...]) -> list[float]:
    """The series values of value's decade and the next decade's first, rounded to 6 significant digits."""
    decade = 10.0 ** math.floor(math.log10(value))
    return [float(f"{m * decade:.6g}") for m in series] + [float(f"{10.0 * decade:.6g}")]


def nearest_preferred(value: float, series: tuple[float, ...] = E24) -> float:
    """The nearest value of a preferred series, nearest on a log scale (IEC 60063). Non-finite or <= 0 passes."""
    if not math.isfinite(value) or value <= 0.0:
        return value
    return min(_candidates(value, series), key=lambda c: abs(math.log(c / value)))


def preferred_at_or_above(value: float, series: tuple[float, ...] = E6) -> float:
    """The smallest preferred-series value at or above value (IEC 60063). Non-finite or <= 0 passes."""
    if not math.isfinite(value) or value <= 0.0:
        return value
    return min(c for c in _candidates(value, series) if c >= value * (1 - 1e-9))


def preferred_at_or_below(value: float, series: tuple[float, ...] = E24) -> float:
    """The largest preferred-series value not above value (IEC 60063). Non-finite or <= 0 passes."""
    if not math.isfinite(value) or value <= 0.0:
        return value
    return max(c for c in _candidates(value, series) if c <= value * (1 + 1e-9))
