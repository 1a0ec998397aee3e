"""Preferred resistor and capacitor values (IEC 60063 E24 and E6)."""

import pytest
from pairline.engine.rules.preferred import E6, E24, nearest_preferred, preferred_at_or_above, preferred_at_or_below


def test_series_have_their_published_lengths():
    # Source: IEC 60063: the E24 series has 24 values per decade, E6 six.
    assert len(E24) == 24 and len(E6) == 6
    # Source: IEC 60063 E24 values 4.3, 4.7, 5.1 (the "odd" E24 members that E12 lacks).
    assert {4.3, 4.7, 5.1} <= set(E24)


def test_nearest_preferred_on_a_log_scale():
    # Source: IEC 60063 E24: 130 and 150 are neighbours; 142 is nearer 150 on a log scale (150/142 < 142/130).
    assert nearest_preferred(142.0) == pytest.approx(150.0)
    # Source: IEC 60063 E24: 109.1 rounds to 110.
    assert nearest_preferred(109.1) == pytest.approx(110.0)


def test_at_or_above_and_at_or_below():
    # Source: IEC 60063 E6: 15 nF, 22 nF are neighbours.
    assert preferred_at_or_above(18.2e-9) == pytest.approx(22e-9, rel=1e-9)
    # Source: IEC 60063 E24: 680 and 750 are neighbours.
    assert preferred_at_or_below(745.0) == pytest.approx(680.0)
    assert preferred_at_or_below(1000.0) == pytest.approx(1000.0)
