"""Resistor and capacitor values one can buy: the IEC 60063 preferred-number series, and how to pick from them."""

import functools
import math

# IEC 60063 E24 and E6 series (mantissas of one decade).
E24: tuple[float, ...] = (
    *(1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0),
    *(3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
)
E6: tuple[float, ...] = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
# IEC 60063 E96 series, the 1 % resistors bought when no 5 % E24 value fits a window.
E96: tuple[float, ...] = (
    *(1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37, 1.40, 1.43),
    *(1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10),
    *(2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09),
    *(3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53),
    *(4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65),
    *(6.81, 6.98, 7.15, 7.32, 7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76),
)


def in_series(value: float, series: tuple[float, ...] = E24) -> bool:
    """Whether a value is a member of a preferred series (any decade)."""
    if not math.isfinite(value) or value <= 0.0:
        return False
    return any(abs(c / value - 1.0) < 1e-9 for c in _candidates(value, series))


def _candidates(value: float, series: tuple[float, ...]) -> tuple[float, ...]:
    """The series values of value's decade and the next decade's first, rounded to 6 significant digits."""
    return _decade(math.floor(math.log10(value)), series)


@functools.lru_cache(maxsize=128)
def _decade(exponent: int, series: tuple[float, ...]) -> tuple[float, ...]:
    decade = 10.0**exponent
    return tuple(float(f"{m * decade:.6g}") for m in series) + (float(f"{10.0 * decade:.6g}"),)


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
