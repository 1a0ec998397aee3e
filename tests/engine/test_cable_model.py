"""The cable model against published cable data."""

import numpy as np
import pytest
from pairline.engine.line import propagation_constant_per_m, rlgc_per_m
from pairline.engine.plan import CableSpec, resolve_cable

NEPER_DB = 20.0 / np.log(10.0)
CAT5E = resolve_cable(CableSpec(class_key="cat5e-100"))


def glisic_insertion_loss_db_per_100m(f_mhz: np.ndarray) -> np.ndarray:
    # Source: D. Glisic, "Getting the most out of your twisted pair cable", EE Times, 2008:
    # IL(f) = 1.967 sqrt(f) + 0.023 f + 0.05 / sqrt(f) dB per 100 m, f in MHz (Cat-5e).
    return 1.967 * np.sqrt(f_mhz) + 0.023 * f_mhz + 0.05 / np.sqrt(f_mhz)


@pytest.mark.parametrize("f_mhz", [1.0, 4.0, 10.0, 16.0, 31.25, 62.5, 100.0])
def test_cat5e_insertion_loss_follows_the_published_model(f_mhz):
    # Matched-line insertion loss is the attenuation: IL = 20 log10(e) * alpha * 100 m.
    ours_db = NEPER_DB * propagation_constant_per_m(CAT5E, [f_mhz * 1e6])[0].real * 100.0
    # Source: D. Glisic, EE Times 2008, Cat-5e insertion loss model (glisic_insertion_loss_db_per_100m above).
    expected_db = glisic_insertion_loss_db_per_100m(np.array(f_mhz))
    assert ours_db == pytest.approx(expected_db, abs=1.0)  # 1 dB per 100 m


def test_cat5e_insertion_loss_within_the_category_limits():
    # Source: TIA/EIA-568 Cat-5e insertion loss limits: 8.2 dB at 16 MHz and 22.0 dB at 100 MHz per 100 m;
    # a model of a compliant cable stays within each limit plus the 1 dB model tolerance asked above.
    il = NEPER_DB * propagation_constant_per_m(CAT5E, [16e6, 100e6]).real * 100.0
    assert il[0] <= 8.2 + 1.0
    assert il[1] <= 22.0 + 1.0


def test_cat5e_propagation_delay_within_the_category_limit():
    # Source: TIA/EIA-568 Cat-5e, propagation delay at most 548 ns per 100 m (at 1-100 MHz).
    f = np.array([1e6, 10e6, 100e6])
    beta = propagation_constant_per_m(CAT5E, f).imag
    delay_ns_per_100m = beta / (2 * np.pi * f) * 100.0 * 1e9
    assert np.all(delay_ns_per_100m <= 548.0)


def test_cat5e_dc_resistance():
    # Source: TIA/EIA-568 Cat-5e DC resistance at most 9.38 ohm per 100 m per conductor (from memory);
    # the loop of the pair is twice that.
    r_loop = rlgc_per_m(CAT5E, [0.0]).r_ohm_per_m[0]
    assert r_loop * 100.0 == pytest.approx(2 * 9.38, rel=1e-3)


def test_24awg_pair_dc_resistance():
    # Source: ASTM B258 / AWG table, 24 AWG copper 84.2 ohm/km per conductor.
    cable = resolve_cable(CableSpec(class_key="pair-24awg-120"))
    r_loop = rlgc_per_m(cable, [0.0]).r_ohm_per_m[0]
    assert r_loop / 2 * 1000.0 == pytest.approx(84.2, rel=1e-3)
