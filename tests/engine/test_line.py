"""One cable section: per-metre constants, propagation constant, Z0 and the ABCD matrix."""

import numpy as np
import pytest
from pairline.engine.library import CABLES
from pairline.engine.line import (
    REFERENCE_FREQUENCY_HZ,
    abcd_section,
    characteristic_impedance_ohm,
    propagation_constant_per_m,
    rlgc_per_m,
    section_terms,
    series_impedance_ohm_per_m,
    shunt_admittance_siemens_per_m,
)
from pairline.engine.plan import CableSpec, resolve_cable
from pairline.engine.units import SPEED_OF_LIGHT_M_PER_S

LOSSLESS = resolve_cable(
    CableSpec(class_key=None, z0_ohm=120.0, velocity_factor=0.66, resistance_ohm_per_m=0.0, dielectric_loss_tangent=0.0)
)
CONSTANT_R = resolve_cable(
    CableSpec(
        class_key=None, z0_ohm=100.0, velocity_factor=0.66, resistance_ohm_per_m=0.05, dielectric_loss_tangent=0.0
    )
)
PAIR_24 = resolve_cable(CableSpec(class_key="pair-24awg-120"))
F = np.array([1e3, 1e5, 1e6, 1e7, 1e8])


def test_lossless_line_is_a_pure_delay_with_real_z0():
    # Source: closed form, lossless TEM line: gamma = j w / v, Z0 = sqrt(L / C) (Pozar, 4th ed., sec. 2.1).
    v = 0.66 * SPEED_OF_LIGHT_M_PER_S
    np.testing.assert_allclose(propagation_constant_per_m(LOSSLESS, F), 2j * np.pi * F / v, rtol=1e-12)
    np.testing.assert_allclose(characteristic_impedance_ohm(LOSSLESS, F), 120.0, rtol=1e-12)


def test_plain_rlgc_without_skin_or_dielectric_loss():
    # Source: contract of the SPICE-comparable line: constant R (loop = 2 x conductor), G = 0,
    # L = Z0 / v and C = 1 / (Z0 v) (definition of a TEM line's Z0 and velocity).
    rlgc = rlgc_per_m(CONSTANT_R, F)
    v = 0.66 * SPEED_OF_LIGHT_M_PER_S
    np.testing.assert_allclose(rlgc.r_ohm_per_m, 0.1, rtol=1e-12)
    np.testing.assert_allclose(rlgc.g_siemens_per_m, 0.0, atol=1e-18)
    np.testing.assert_allclose(rlgc.l_h_per_m, 100.0 / v, rtol=1e-12)
    np.testing.assert_allclose(rlgc.c_f_per_m, 1.0 / (100.0 * v), rtol=1e-12)


def test_dc_resistance_is_the_loop_resistance():
    # Source: ASTM B258 / AWG table, 24 AWG copper 84.2 ohm/km per conductor; the pair's loop is twice that.
    rlgc = rlgc_per_m(PAIR_24, [0.0, 100.0])
    np.testing.assert_allclose(rlgc.r_ohm_per_m, 2 * 0.0842, rtol=1e-3)


def test_skin_effect_resistance_of_24_awg_at_10_mhz():
    # Source: textbook skin effect, R/R_dc ~ r / (2 delta), delta = 66 mm / sqrt(f/Hz), r = 0.255 mm
    # (24 AWG): 6.1 at 10 MHz (common practice). 5 % allowed for the model's smooth blend.
    ratio = rlgc_per_m(PAIR_24, [10e6]).r_ohm_per_m[0] / (2 * PAIR_24.resistance_ohm_per_m)
    assert ratio == pytest.approx(6.1, rel=0.05)


def test_skin_effect_resistance_grows_as_root_f_well_above_onset():
    # Source: textbook skin effect, R proportional to sqrt(f) once delta << r (common practice):
    # a decade of frequency multiplies R by sqrt(10) within 1 %.
    r = rlgc_per_m(PAIR_24, [20e6, 200e6]).r_ohm_per_m
    assert r[1] / r[0] == pytest.approx(np.sqrt(10.0), rel=0.01)


def test_dielectric_conductance_is_w_c_tan_delta():
    # Source: definition of the loss tangent, G = w C tan(delta), exact at the model's reference frequency.
    rlgc = rlgc_per_m(PAIR_24, [REFERENCE_FREQUENCY_HZ])
    w = 2 * np.pi * REFERENCE_FREQUENCY_HZ
    nominal_c = PAIR_24.capacitance_f_per_m
    np.testing.assert_allclose(rlgc.g_siemens_per_m, w * nominal_c * PAIR_24.dielectric_loss_tangent, rtol=1e-9)
    np.testing.assert_allclose(rlgc.c_f_per_m, nominal_c, rtol=1e-9)
    # Source: same definition; the causal constant-phase form keeps G / (w C) = tan(delta) at every frequency
    # and C within 1 % of nominal from 1 kHz to 1 GHz.
    wide = rlgc_per_m(PAIR_24, np.geomspace(1e3, 1e9, 7))
    ratio = wide.g_siemens_per_m / (2 * np.pi * wide.frequency_hz * wide.c_f_per_m)
    np.testing.assert_allclose(ratio, PAIR_24.dielectric_loss_tangent, rtol=1e-9)
    np.testing.assert_allclose(wide.c_f_per_m, nominal_c, rtol=0.01)


def test_low_loss_attenuation_matches_the_r_over_2z0_approximation():
    # Source: low-loss line, alpha = R / (2 Z0) + G Z0 / 2 (Pozar, 4th ed., eq. 2.85); valid when R << wL.
    f = np.array([5e6, 20e6, 80e6])
    rlgc = rlgc_per_m(PAIR_24, f)
    z0 = np.sqrt(rlgc.l_h_per_m / rlgc.c_f_per_m)
    approx = rlgc.r_ohm_per_m / (2 * z0) + rlgc.g_siemens_per_m * z0 / 2
    np.testing.assert_allclose(propagation_constant_per_m(PAIR_24, f).real, approx, rtol=0.01)


def test_abcd_is_reciprocal_and_halves_cascade_to_the_whole():
    # Source: ABCD of a transmission line section, AD - BC = 1 (reciprocal) and cascading multiplies
    # ABCD matrices (Pozar, 4th ed., sec. 4.4 and table 4.1).
    whole = abcd_section(PAIR_24, F, 300.0)
    half = abcd_section(PAIR_24, F, 150.0)
    det = whole[:, 0, 0] * whole[:, 1, 1] - whole[:, 0, 1] * whole[:, 1, 0]
    np.testing.assert_allclose(det, 1.0, rtol=1e-9)
    np.testing.assert_allclose(half @ half, whole, rtol=1e-9)


def test_normalised_section_terms_equal_the_abcd_ratios():
    # Source: ABCD of a line section (Pozar, 4th ed., table 4.1): 1/A = sech, B/A = Z0 tanh, C/A = tanh/Z0.
    s = 2j * np.pi * F
    z, y = series_impedance_ohm_per_m(PAIR_24, s), shunt_admittance_siemens_per_m(PAIR_24, s)
    terms = section_terms(z, y, np.array([300.0]))
    abcd = abcd_section(PAIR_24, F, 300.0)
    np.testing.assert_allclose(terms.sech_term[:, 0], 1.0 / abcd[:, 0, 0], rtol=1e-9)
    np.testing.assert_allclose(terms.z_tanh_ohm[:, 0], abcd[:, 0, 1] / abcd[:, 0, 0], rtol=1e-9)
    np.testing.assert_allclose(terms.y_tanh_siemens[:, 0], abcd[:, 1, 0] / abcd[:, 0, 0], rtol=1e-9)


def test_very_long_lossy_section_stays_finite():
    # Source: closed form, a section of attenuation alpha l passes exp(-alpha l): here far below float range,
    # so the terms must underflow to 0 cleanly instead of overflowing to inf / nan.
    s = 2j * np.pi * np.array([1e9, 1e10])
    z, y = series_impedance_ohm_per_m(PAIR_24, s), shunt_admittance_siemens_per_m(PAIR_24, s)
    terms = section_terms(z, y, np.array([4000.0]))
    assert np.all(np.isfinite(terms.log_sech_term))
    assert np.all(np.isfinite(terms.z_tanh_ohm)) and np.all(np.isfinite(terms.y_tanh_siemens))
    # Source: closed form, sech(x) -> 2 exp(-x) for Re x >> 1, so log|sech| = ln 2 - alpha l.
    alpha_l = np.sqrt(z * y).real * 4000.0
    np.testing.assert_allclose(terms.log_sech_term[:, 0].real, np.log(2.0) - alpha_l, rtol=1e-12)
    assert np.all(np.abs(terms.sech_term) < 1e-100)


def test_library_cables_all_resolve_to_finite_constants():
    # Source: common practice, every built-in class must give a usable line across the simulated band.
    for key in CABLES:
        cable = resolve_cable(CableSpec(class_key=key))
        gamma = propagation_constant_per_m(cable, np.geomspace(1.0, 1e9, 10))
        assert np.all(np.isfinite(gamma)) and np.all(gamma.real >= 0), key
