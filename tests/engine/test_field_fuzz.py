"""Whatever a capture file holds and wherever its edge falls, the field check answers or names the problem:
BusInputError (a ValueError carrying field, value and range), never another exception."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from pairline.engine.capture import CaptureOptions, parse_capture
from pairline.engine.fieldcheck import check_capture
from pairline.engine.fieldmodel import field_setup
from pairline.engine.plan import BusInputError, load_plan

cells = st.one_of(
    st.sampled_from(["0", "1.5", "-2e-9", "1,5", "nan", "inf", "", " ", "x", "1e999", "3;4", "\t", "Time (s)", "V"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.text(max_size=6),
)
rows = st.lists(st.lists(cells, min_size=1, max_size=4), max_size=150)
separators = st.sampled_from([",", ";", "\t", " "])


@settings(max_examples=150, deadline=None)
@given(rows=rows, sep=separators, signal=st.sampled_from(["auto", "differential", "lines"]))
def test_any_text_reads_or_names_its_problem(rows, sep, signal):
    text = "\n".join(sep.join(row) for row in rows)
    try:
        capture = parse_capture(text, CaptureOptions(signal=signal, sample_interval_s=1e-9))
    except BusInputError as exc:
        assert exc.problems and all(p.field and p.message for p in exc.problems)
        return
    assert capture.time_s.size == capture.v_diff_v.size >= 100
    assert np.all(np.isfinite(capture.v_diff_v))


# A short invented bus: 30 m of 120 Ohm pair, a 10 ns driver, one receiver at the far end, both ends terminated.
SHORT_BUS = load_plan(
    {
        "bit_rate_bps": 1e6,
        "trunk_length_m": 30.0,
        "driver": {"transceiver": "edge-10ns"},
        "nodes": [{"name": "far", "position_m": 30.0}],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 30.0, "resistance_ohm": 120.0}],
    }
)


@settings(max_examples=12, deadline=None)
@given(
    n=st.integers(100, 3000),
    edge_at=st.floats(0.0, 1.0),
    dt_ns=st.sampled_from([0.5, 2.0, 20.0, 200.0]),
    noise_v=st.floats(0.0, 0.5),
    clip_v=st.floats(0.2, 3.0),
    seed=st.integers(0, 100),
)
def test_edges_anywhere_check_or_name_their_problem(n, edge_at, dt_ns, noise_v, clip_v, seed):
    t = dt_ns * 1e-9 * np.arange(n)
    v = np.where(t >= edge_at * t[-1], 1.2, -1.2) + np.random.default_rng(seed).normal(0.0, noise_v, n)
    text = "Time (s),A-B (V)\n" + "\n".join(f"{a:.9g},{b:.6g}" for a, b in zip(t, np.minimum(v, clip_v), strict=True))
    try:
        result = check_capture(SHORT_BUS, parse_capture(text), field_setup(SHORT_BUS))
    except BusInputError as exc:
        assert exc.problems and all(p.field and p.message for p in exc.problems)
        return
    assert result.overlay.time_s.size >= 100
    assert all(np.isfinite(r.rms_v) for r in result.residuals)
