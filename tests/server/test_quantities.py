"""Typed quantities: SI prefixes, units and unit systems at the form's edge."""

import pytest
from pairline.server.quantities import QuantityError, format_quantity, number_text, parse_quantity


@pytest.mark.parametrize(
    ("text", "kind", "units", "si"),
    [
        # Source: SI Brochure (BIPM, 9th ed.), table 7: prefixes k = 1e3, M = 1e6, n = 1e-9, p = 1e-12, µ = 1e-6.
        ("115.2k", "rate", "metric", 115_200.0),
        ("1 Mbit/s", "rate", "metric", 1e6),
        ("4.7 nF", "capacitance", "metric", 4.7e-9),
        ("20", "capacitance", "metric", 20e-12),  # bare capacitance is read in pF (the unit shown by the input)
        ("1.2 µs", "time", "metric", 1.2e-6),
        ("1.2us", "time", "metric", 1.2e-6),
        ("100", "time", "metric", 100e-9),  # bare rise time is read in ns
        ("2.2k", "resistance", "metric", 2200.0),
        ("120 ohm", "resistance", "metric", 120.0),
        ("3 MHz", "frequency", "metric", 3e6),
        ("5 mV", "voltage", "metric", 5e-3),
        # Source: international yard and pound agreement (1959): 1 ft = 0.3048 m exactly.
        ("30 ft", "length", "metric", 9.144),
        ("30", "length", "imperial", 9.144),
        ("1 kft", "length", "metric", 304.8),
        ("1.5 km", "length", "imperial", 1500.0),
        # Source: TIA/EIA-422-B Annex A reference cable, 16 pF/ft = 52.5 pF/m (0.3048 m per ft).
        ("16 pF/ft", "capacitance_per_length", "metric", 16e-12 / 0.3048),
        ("84.2", "resistance_per_length", "metric", 0.0842),  # bare per-length resistance is Ω/km in metric
        # Source: TIA/EIA-485-A unit-load fractions 1/2, 1/4, 1/8.
        ("1/8", "plain", "metric", 0.125),
        ("66 %", "plain", "metric", 0.66),
    ],
)
def test_typed_text_reads_as_si(text, kind, units, si):
    assert parse_quantity(text, kind, units) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "kind"), [("abc", "length"), ("12 furlongs", "length"), ("5 F", "time"), ("1/0", "plain")]
)
def test_unreadable_text_raises_a_value_error_naming_the_text(text, kind):
    with pytest.raises(QuantityError) as err:
        parse_quantity(text, kind, "metric")
    assert isinstance(err.value, ValueError)
    assert text.split()[-1].split("/")[0] in str(err.value) or "divides" in str(err.value)


def test_milli_and_mega_are_not_confused():
    # Source: SI Brochure (BIPM, 9th ed.), table 7: m = 1e-3, M = 1e6 (case matters).
    assert parse_quantity("1 MΩ", "resistance", "metric") == pytest.approx(1e6, rel=1e-12)
    assert parse_quantity("1 mΩ", "resistance", "metric") == pytest.approx(1e-3, rel=1e-12)


@pytest.mark.parametrize(
    ("si", "kind", "units", "text"),
    [
        (115_200.0, "rate", "metric", "115.2 kbit/s"),
        (4.7e-9, "capacitance", "metric", "4.7 nF"),
        (1.2e-6, "time", "imperial", "1.2 µs"),
        (100e-9, "time", "metric", "100 ns"),
        (9.144, "length", "imperial", "30"),
        (120.0, "resistance", "metric", "120 Ω"),
    ],
)
def test_values_format_for_inputs_and_read_back_unchanged(si, kind, units, text):
    # Source: same SI prefix table and foot definition as above; the text is what the input shows.
    assert format_quantity(si, kind, units) == text
    assert parse_quantity(text, kind, units) == pytest.approx(si, rel=1e-12)


def test_a_metric_length_shown_in_feet_is_rounded_and_reads_back_within_a_hair():
    shown = format_quantity(100.0, "length", "imperial")
    # Source: 1 ft = 0.3048 m exactly, so 100 m = 328.0839895 ft; shown to 6 significant digits.
    assert shown == "328.084"
    assert parse_quantity(shown, "length", "imperial") == pytest.approx(100.0, rel=2e-6)  # 0.03 mm in 100 m


def test_a_repeating_unit_load_shows_as_a_fraction():
    # Source: TIA/EIA-485-A unit loads; 1/3 UL is a common rating written as a fraction.
    assert format_quantity(1 / 3, "plain", "metric") == "1/3"
    assert parse_quantity("1/3", "plain", "metric") == pytest.approx(1 / 3, rel=1e-11)
    assert format_quantity(0.125, "plain", "metric") == "0.125"


@pytest.mark.parametrize(
    ("value", "text"),
    [
        # Source: rounding to 3 significant digits, the same as the command line's number_text.
        (0.2338, "0.234"),
        (1312.3359, "1310"),
        (54.0, "54"),
        (1e9, "1\u202f000\u202f000\u202f000"),
        (1.2e-5, "0.000012"),
    ],
)
def test_numbers_for_reading_round_to_three_digits_without_exponents(value, text):
    assert number_text(value) == text
