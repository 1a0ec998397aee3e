"""Reading captures: the shapes scopes and loggers write, units, A and B, and every kind of bad file."""

import numpy as np
import pytest
from pairline.engine.capture import (
    MAX_CAPTURE_BYTES,
    CaptureOptions,
    decode_capture,
    noise_sigma_v,
    parse_capture,
)
from pairline.engine.plan import BusInputError

N = 400
DT_S = 2e-9


def _edge(n: int = N, noise_v: float = 0.01, seed: int = 3, at_s: float = 200e-9) -> tuple[np.ndarray, np.ndarray]:
    """An invented trace: -2 V, a 40 ns ramp to +2 V at at_s, seeded noise."""
    t = DT_S * np.arange(n)
    v = np.interp(t, [at_s, at_s + 40e-9], [-2.0, 2.0]) + np.random.default_rng(seed).normal(0.0, noise_v, n)
    return t, v


def _rows(*columns: np.ndarray, sep: str = ",", fmt: str = "{:.6g}") -> str:
    return "\n".join(sep.join(fmt.format(x) for x in row) for row in np.column_stack(columns))


def _problem(exc: pytest.ExceptionInfo[BusInputError]) -> tuple[str, str]:
    problem = exc.value.problems[0]
    return problem.field, problem.message


def test_time_and_differential_with_a_header():
    t, v = _edge()
    text = "Model,bench scope\nSample Interval,2e-9,s\nTime (s),A-B (V)\n" + _rows(t, v)
    cap = parse_capture(text)
    # Source: the CSV above: 400 rows, 2 ns apart, one voltage column.
    assert cap.time_s.size == N and cap.signal == "differential"
    assert cap.sample_interval_s == pytest.approx(DT_S, rel=1e-6)
    np.testing.assert_allclose(cap.v_diff_v, v, atol=1e-5)  # 6 printed digits
    assert cap.warnings == () and not cap.clipped.any()


def test_lines_a_and_b_give_their_difference():
    t, v = _edge()
    common = 2.5 + np.random.default_rng(9).normal(0.0, 0.05, N)
    text = "Time (us);A (V);B (V)\n" + _rows(t * 1e6, common + v / 2, common - v / 2, sep=";", fmt="{:.9g}")
    cap = parse_capture(text.replace(".", ","))  # decimal commas with semicolons
    # Source: A - B of the columns written above, time in µs as its column name says.
    assert cap.signal == "lines"
    np.testing.assert_allclose(cap.v_diff_v, v, atol=1e-6)
    assert cap.sample_interval_s == pytest.approx(DT_S, rel=1e-6)


def test_b_column_first_is_still_read_as_a_minus_b():
    t, v = _edge()
    text = "time,B,A\n" + _rows(t, -v / 2, v / 2)
    # Source: the columns above are named B then A; A - B = v.
    np.testing.assert_allclose(parse_capture(text).v_diff_v, v, atol=1e-5)


def test_values_only_with_the_interval_from_the_user_and_millivolts():
    _, v = _edge()
    text = "\n".join(f"{x * 1e3:.4f}" for x in v)
    cap = parse_capture(text, CaptureOptions(sample_interval_s=DT_S, voltage_unit="mV", probe_attenuation=10.0))
    # Source: the values above are millivolts at the scope; a 10:1 probe the scope did not know about.
    np.testing.assert_allclose(cap.v_diff_v, 10.0 * v, atol=1e-5)
    assert cap.time_s[1] - cap.time_s[0] == pytest.approx(DT_S)


def test_values_only_with_a_sample_rate_in_the_header():
    _, v = _edge()
    text = "Sample Rate: 500 MSa/s\nVertical Units: V\n" + "\n".join(f"{x:.5f}" for x in v)
    # Source: 500 MSa/s is one sample every 2 ns.
    assert parse_capture(text).sample_interval_s == pytest.approx(DT_S)


def test_tab_separated_with_no_units_warns_and_reads_seconds_and_volts():
    t, v = _edge()
    cap = parse_capture(_rows(t, v, sep="\t"))
    assert cap.sample_interval_s == pytest.approx(DT_S)
    assert any("seconds" in w for w in cap.warnings) and any("volts" in w for w in cap.warnings)


def test_a_time_column_printed_coarsely_is_read_by_its_mean_step():
    t, v = _edge()
    text = "Time (s),V\n" + "\n".join(f"{a:.2e},{b:.5f}" for a, b in zip(t + 1e-6, v, strict=True))
    # Source: 2 ns steps printed with 3 digits around 1 µs repeat some times; the mean step is still 2 ns.
    assert parse_capture(text).sample_interval_s == pytest.approx(DT_S, rel=1e-3)


def test_noise_estimate_of_a_normal_trace():
    # Source: seeded normal draw of sigma 10 mV; MAD scale 1.4826 for a normal distribution (Hampel, JASA 1974).
    _, v = _edge(n=4000, noise_v=0.01)
    assert noise_sigma_v(v) == pytest.approx(0.01, rel=0.1)


@pytest.mark.parametrize(
    ("text", "field", "needle"),
    [
        (
            "Time,V\n" + "\n".join(f"{k * 1e-9},{'x' if k == 150 else 0.5}" for k in range(200)),
            "capture_csv",
            "Line 152",
        ),
        ("Time,V\n" + "\n".join(f"{(k if k != 90 else 80) * 1e-9},{k % 7}" for k in range(200)), "capture_csv", "rise"),
        (
            "Time,V\n" + "\n".join(f"{(k if k < 100 else k + 5) * 1e-9},{k % 7}" for k in range(200)),
            "capture_csv",
            "irregular",
        ),
        ("Time,V\n" + "\n".join(f"{k * 1e-9},{k % 7}" for k in range(60)), "capture_csv", "60 samples"),
        ("Time,V\n" + "\n".join(f"{k * 1e-9},0.5" for k in range(200)), "capture_csv", "no edge"),
        ("Time (fortnights),V\n" + "\n".join(f"{k},{k % 7}" for k in range(200)), "time_unit", "fortnights"),
        ("Time,CH1 (furlongs)\n" + "\n".join(f"{k},{k % 7}" for k in range(200)), "voltage_unit", "furlongs"),
        ("Time,A,B,C\n" + "\n".join(f"{k},{k % 7},1,2" for k in range(200)), "signal", "3 voltage columns"),
        ("Time,V\n" + "\n".join(f"{k * 1e-9},{k % 7}" for k in range(150)) + "\n1,2,3", "capture_csv", "3 fields"),
        ("Model,bench\nNo data here", "capture_csv", "only numbers"),
        ("", "capture_csv", "empty"),
    ],
    ids=[
        "non-numeric",
        "time-steps-back",
        "time-gap",
        "too-few",
        "no-edge",
        "unknown-time-unit",
        "unknown-voltage-unit",
        "too-many-columns",
        "ragged-row",
        "no-data",
        "empty",
    ],
)
def test_bad_files_are_refused_naming_what_is_wrong(text, field, needle):
    with pytest.raises(BusInputError) as exc:
        parse_capture(text)
    got_field, message = _problem(exc)
    assert got_field == field
    assert needle in message


def test_values_only_without_any_interval_asks_for_one():
    _, v = _edge()
    with pytest.raises(BusInputError) as exc:
        parse_capture("\n".join(f"{x:.5f}" for x in v))
    assert _problem(exc)[0] == "sample_interval_s"


def test_flat_tops_are_flagged_and_left_out():
    t, v = _edge(at_s=600e-9)
    clipped = np.minimum(v, 1.5)  # a scope rail at 1.5 V, reached late in the capture
    cap = parse_capture(_rows(t, clipped, fmt="{:.9g}"))
    # Source: the samples cut to exactly 1.5 V above, all of them after the ramp (one run).
    assert cap.clipped.sum() == np.count_nonzero(clipped == 1.5) > 50
    assert any("clipped" in w for w in cap.warnings)


def test_a_trace_clipped_most_of_the_time_is_refused():
    t, v = _edge()
    with pytest.raises(BusInputError) as exc:
        parse_capture(_rows(t, np.clip(v, -0.5, 0.5), fmt="{:.9g}"))
    assert "clipped" in _problem(exc)[1]


def test_files_over_the_size_cap_are_refused_before_reading():
    with pytest.raises(BusInputError) as exc:
        decode_capture(b"0" * (MAX_CAPTURE_BYTES + 1))
    assert _problem(exc)[0] == "capture_csv" and str(MAX_CAPTURE_BYTES) in _problem(exc)[1]


def test_latin1_files_are_read():
    t, v = _edge()
    raw = ("Zeit (µs);Spannung (V)\n" + _rows(t * 1e6, v, sep=";").replace(".", ",")).encode("latin-1")
    cap = parse_capture(decode_capture(raw))
    assert cap.sample_interval_s == pytest.approx(DT_S, rel=1e-5)


@pytest.mark.parametrize(
    ("options", "field"),
    [
        (CaptureOptions(signal="both"), "signal"),  # type: ignore[arg-type]
        (CaptureOptions(time_unit="fortnight"), "time_unit"),
        (CaptureOptions(voltage_unit="furlong"), "voltage_unit"),
        (CaptureOptions(sample_interval_s=-1.0), "sample_interval_s"),
        (CaptureOptions(probe_attenuation=0.0), "probe_attenuation"),
    ],
)
def test_settings_out_of_range_name_their_field(options, field):
    t, v = _edge()
    with pytest.raises(BusInputError) as exc:
        parse_capture(_rows(t, v), options)
    assert _problem(exc)[0] == field
