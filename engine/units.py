"""Physical constants and unit helpers. Inside the engine everything is SI; these convert at the edges."""

SPEED_OF_LIGHT_M_PER_S = 299_792_458.0  # exact, SI definition of the metre
FEET_PER_M = 1.0 / 0.3048  # exact, international foot


def m_from_ft(length_ft: float) -> float:
    return length_ft * 0.3048


def ft_from_m(length_m: float) -> float:
    return length_m / 0.3048


def length_text(length_m: float, display_units: str = "metric") -> str:
    """A length for a sentence in the plan's display units: "984 m"; imperial "3230 ft (984 m)".

    Below 1 m metric lengths read in cm ("45 cm"), below 1 cm in mm; below 1 ft imperial ones in inches;
    3 significant digits, whole numbers from 100 up.
    """

    def plain(value: float, unit: str) -> str:
        return f"{value:.0f} {unit}" if abs(value) >= 100.0 else f"{value:.3g} {unit}"

    if 0.0 < length_m < 0.01:
        metric = f"{length_m * 1000:.3g} mm"
    elif 0.0 < length_m < 1.0:
        metric = f"{length_m * 100:.3g} cm"
    else:
        metric = plain(length_m, "m")
    if display_units == "imperial":
        feet = ft_from_m(length_m)
        imperial = f"{feet * 12:.3g} in" if 0.0 < feet < 1.0 else plain(feet, "ft")
        return f"{imperial} ({metric})"
    return metric


def s_from_ns(time_ns: float) -> float:
    return time_ns * 1e-9


def ns_from_s(time_s: float) -> float:
    return time_s * 1e9


def s_from_us(time_us: float) -> float:
    return time_us * 1e-6


def us_from_s(time_s: float) -> float:
    return time_s * 1e6


def propagation_velocity_m_per_s(velocity_factor: float) -> float:
    """Signal speed on a line: v = VF * c0."""
    return velocity_factor * SPEED_OF_LIGHT_M_PER_S


def delay_s(length_m: float, velocity_factor: float) -> float:
    """One-way delay of a line section: t = L / (VF * c0)."""
    return length_m / propagation_velocity_m_per_s(velocity_factor)


def parallel_ohm(*resistances_ohm: float) -> float:
    """Resistances in parallel; an infinite value is an open circuit. No arguments -> open (inf)."""
    conductance_siemens = sum(1.0 / r for r in resistances_ohm if r != float("inf"))
    return float("inf") if conductance_siemens == 0.0 else 1.0 / conductance_siemens


_PREFIXES = [
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "µ"),
    (1e-9, "n"),
    (1e-12, "p"),
]


def si_format(value: float, unit: str, digits: int = 3) -> str:
    """Format with an SI prefix: si_format(4.7e-9, 'F') -> '4.7 nF'."""
    if value == 0.0 or value != value or abs(value) == float("inf"):
        return f"{value:g} {unit}".strip()
    for scale, prefix in _PREFIXES:
        if abs(value) >= scale * 0.9995:
            return f"{value / scale:.{digits}g} {prefix}{unit}".strip()
    scale, prefix = _PREFIXES[-1]
    return f"{value / scale:.{digits}g} {prefix}{unit}".strip()
