"""One cable section as a distributed, lossy transmission line (differential mode).

The pair is treated as one line: Z0 is the cable's differential impedance and the series resistance is
the loop resistance, twice the per-conductor value.

Per-metre constants, written for the Laplace variable s (s = j*2*pi*f on the frequency axis, so the same
formulas serve the frequency response and the damped transform the time-domain solver uses):

- L and C follow from Z0 and the velocity factor v = VF * c0: L = Z0 / v, C = 1 / (Z0 v).
- Series impedance Z'(s) = R_dc * sqrt(1 + s / w_s) + s L, with w_s = 2 pi f_on / 2 (f_on = the cable's
  skin-effect onset). At real frequencies its real part blends smoothly from R_dc at low frequency to
  R_dc * sqrt(f / f_on) above the onset, the classical skin-effect growth of a round conductor; its imaginary
  part carries the matching internal inductance, which keeps the model causal (no signal before the
  line delay). Source: H. Johnson, M. Graham, High-Speed Signal Propagation (2003), ch. 2 (skin effect, R + jwL_int
  rising together as sqrt(f)).
- Shunt admittance Y'(s) = (C / cos d) * s * (s / w_r)^(-2 d / pi), d = arctan(tan_delta), w_r = 2 pi * 1 MHz.
  At f = 1 MHz this is exactly jwC + G with G = w C tan_delta; elsewhere G / (w C) stays tan_delta and C drifts by
  (f / 1 MHz)^(-2d/pi), under 1 % from 1 kHz to 1 GHz for tan_delta = 0.002. The constant-phase form is the
  causal companion of a constant loss tangent. Source: A. R. Djordjevic et al., "Wideband frequency-domain
  characterization of FR-4 and time-domain causality", IEEE Trans. EMC 43 (2001) (causality of constant-loss
  dielectric models); constant-phase element: K. S. Cole, R. H. Cole, J. Chem. Phys. 9 (1941).
- With skin_effect_onset_hz None the series R is the constant R_dc, and with loss tangent 0 the shunt is s C:
  the plain RLGC line that SPICE line models reproduce.

Propagation constant gamma = sqrt(Z' Y'), characteristic impedance Z0 = Z' / gamma.
A section of length l (Pozar, Microwave Engineering, 4th ed., table 4.1, ABCD of a transmission line):
A = D = cosh(gamma l), B = Z0 sinh(gamma l), C = sinh(gamma l) / Z0.
For numerical range the solver uses the normalised forms tanh, sech and Z0 tanh = Z' l tanhc(gamma l),
tanh / Z0 = Y' l tanhc(gamma l), which stay finite at DC (Z0 infinite) and for very lossy sections.
"""

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from pairline.engine.plan import ResolvedCable
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S

REFERENCE_FREQUENCY_HZ = 1e6  # where the dielectric model meets C and tan_delta exactly


@dataclass(frozen=True, slots=True)
class LineConstants:
    """Per-metre R, L, G, C of the pair at each frequency (differential mode), all shape (n_freq,)."""

    frequency_hz: np.ndarray
    r_ohm_per_m: np.ndarray
    l_h_per_m: np.ndarray
    g_siemens_per_m: np.ndarray
    c_f_per_m: np.ndarray


@dataclass(frozen=True, slots=True)
class SectionTerms:
    """Normalised terms of line sections, shape (n_s, n_sections): what the network solve needs.

    tanh_term = tanh(gamma l), sech_term = 1 / cosh(gamma l),
    z_tanh_ohm = Z0 tanh(gamma l), y_tanh_siemens = tanh(gamma l) / Z0.
    """

    sech_term: np.ndarray
    log_sech_term: np.ndarray  # log(sech(gamma l)), finite where sech underflows
    z_tanh_ohm: np.ndarray
    y_tanh_siemens: np.ndarray


def _s_from_hz(frequency_hz: ArrayLike) -> np.ndarray:
    return 2j * np.pi * np.asarray(frequency_hz, dtype=float)


def series_impedance_ohm_per_m(cable: ResolvedCable, s: ArrayLike) -> np.ndarray:
    """Z'(s) = R_dc sqrt(1 + s / w_s) + s L of the pair's loop, per metre; s the Laplace variable in 1/s."""
    s_arr = np.asarray(s, dtype=complex)
    r_loop = 2.0 * cable.resistance_ohm_per_m
    inductance = cable.z0_ohm / (cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S)
    if cable.skin_effect_onset_hz is None:
        resistive = np.full_like(s_arr, r_loop)
    else:
        w_s = 2.0 * np.pi * cable.skin_effect_onset_hz / 2.0
        resistive = r_loop * np.sqrt(1.0 + s_arr / w_s)
    return np.asarray(resistive + s_arr * inductance)


def shunt_admittance_siemens_per_m(cable: ResolvedCable, s: ArrayLike) -> np.ndarray:
    """Y'(s) = (C / cos d) s (s / w_r)^(-2d/pi), d = arctan(tan_delta), per metre (module docstring)."""
    s_arr = np.asarray(s, dtype=complex)
    capacitance = 1.0 / (cable.z0_ohm * cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S)
    if cable.dielectric_loss_tangent == 0.0:
        return np.asarray(s_arr * capacitance)
    angle = np.arctan(cable.dielectric_loss_tangent)
    w_r = 2.0 * np.pi * REFERENCE_FREQUENCY_HZ
    out = np.zeros_like(s_arr)
    nonzero = s_arr != 0
    out[nonzero] = (capacitance / np.cos(angle)) * s_arr[nonzero] * (s_arr[nonzero] / w_r) ** (-2.0 * angle / np.pi)
    return out


def rlgc_per_m(cable: ResolvedCable, frequency_hz: ArrayLike) -> LineConstants:
    """R, L, G, C per metre at real frequencies: R + jwL = Z'(jw), G + jwC = Y'(jw).

    At f = 0 the reported L and C are the limits of the model (L includes the DC internal inductance,
    C is the nominal 1 / (Z0 v)); they multiply a zero frequency there.
    """
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    s = _s_from_hz(f)
    z = series_impedance_ohm_per_m(cable, s)
    y = shunt_admittance_siemens_per_m(cable, s)
    w = 2.0 * np.pi * f
    safe_w = np.where(w == 0.0, 1.0, w)
    inductance = cable.z0_ohm / (cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S)
    capacitance = 1.0 / (cable.z0_ohm * cable.velocity_factor * SPEED_OF_LIGHT_M_PER_S)
    l_dc = inductance
    if cable.skin_effect_onset_hz is not None:
        l_dc += 2.0 * cable.resistance_ohm_per_m / (2.0 * (2.0 * np.pi * cable.skin_effect_onset_hz / 2.0))
    return LineConstants(
        frequency_hz=f,
        r_ohm_per_m=z.real,
        l_h_per_m=np.where(w == 0.0, l_dc, z.imag / safe_w),
        g_siemens_per_m=y.real,
        c_f_per_m=np.where(w == 0.0, capacitance, y.imag / safe_w),
    )


def propagation_constant_per_m(cable: ResolvedCable, frequency_hz: ArrayLike) -> np.ndarray:
    """gamma = alpha + j beta = sqrt(Z' Y') in 1/m (alpha in Np/m), at real frequencies.

    Source: D. M. Pozar, Microwave Engineering, 4th ed., eq. 2.5 (general lossy line).
    """
    s = _s_from_hz(np.atleast_1d(frequency_hz))
    return np.asarray(np.sqrt(series_impedance_ohm_per_m(cable, s) * shunt_admittance_siemens_per_m(cable, s)))


def characteristic_impedance_ohm(cable: ResolvedCable, frequency_hz: ArrayLike) -> np.ndarray:
    """Z0(f) = Z' / gamma = sqrt(Z' / Y') in ohm (infinite at DC, where Y' = 0).

    Source: D. M. Pozar, Microwave Engineering, 4th ed., eq. 2.7.
    """
    s = _s_from_hz(np.atleast_1d(frequency_hz))
    z = series_impedance_ohm_per_m(cable, s)
    gamma = np.sqrt(z * shunt_admittance_siemens_per_m(cable, s))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(gamma == 0, np.inf + 0j, z / np.where(gamma == 0, 1.0, gamma))


def _tanh_and_tanhc(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """tanh(x) and tanh(x) / x (1 at x = 0), accurate for small |x| and finite for large Re x >= 0."""
    em = np.expm1(-2.0 * x)  # exp(-2x) - 1, exact near 0
    tanh = -em / (2.0 + em)
    tanhc = np.ones_like(tanh)
    np.divide(tanh, x, out=tanhc, where=x != 0)
    return tanh, tanhc


def section_terms(z_per_m: np.ndarray, y_per_m: np.ndarray, length_m: ArrayLike) -> SectionTerms:
    """Normalised ABCD terms for sections of the given lengths, batched: (n_s,) x (n_sections,) -> (n_s, n_sections).

    z_per_m, y_per_m: Z'(s), Y'(s) of shape (n_s,). Uses exp(-2 gamma l), so nothing overflows however lossy.
    """
    length = np.asarray(length_m, dtype=float)[None, :]
    x = np.sqrt(z_per_m * y_per_m)[:, None] * length
    _, tc = _tanh_and_tanhc(x)
    log_sech = np.log(2.0) - x - np.log1p(np.exp(-2.0 * x))
    z_tanh = z_per_m[:, None] * length * tc
    y_tanh = y_per_m[:, None] * length * tc
    return SectionTerms(
        sech_term=np.exp(log_sech),
        log_sech_term=log_sech,
        z_tanh_ohm=z_tanh,
        y_tanh_siemens=y_tanh,
    )


def abcd_section(cable: ResolvedCable, frequency_hz: ArrayLike, length_m: float) -> np.ndarray:
    """ABCD matrix of one section, shape (n_freq, 2, 2): [[cosh, Z0 sinh], [sinh / Z0, cosh]] of gamma l.

    Source: D. M. Pozar, Microwave Engineering, 4th ed., table 4.1. Finite at DC (B = R l, C = 0).
    """
    s = _s_from_hz(np.atleast_1d(frequency_hz))
    z = series_impedance_ohm_per_m(cable, s)
    y = shunt_admittance_siemens_per_m(cable, s)
    x = np.sqrt(z * y) * length_m
    _, tc = _tanh_and_tanhc(x)
    cosh = np.cosh(x)
    out = np.empty((x.size, 2, 2), dtype=complex)
    out[:, 0, 0] = cosh
    out[:, 1, 1] = cosh
    out[:, 0, 1] = z * length_m * tc * cosh
    out[:, 1, 0] = y * length_m * tc * cosh
    return out
