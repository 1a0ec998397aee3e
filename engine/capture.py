"""A scope or logger capture of the bus: read from CSV text, checked, turned into one differential trace.

Accepted shapes (what scopes and loggers commonly write):
- a few header lines before the data: `key,value[,unit]` pairs (sample interval or sample rate, units), and
  usually one row of column names (`Time (s),CH1 (V)`);
- data rows of numbers, separated by commas, semicolons, tabs or spaces; with semicolons, tabs or spaces a
  comma may be the decimal mark;
- time in the first (or a named) column, or no time column and a sample interval from the header or the user;
- one voltage column (the differential voltage A-B) or two (A and B against ground; A-B is taken).

The data start at the first row whose fields all read as numbers. Time must rise steadily: every step within
a quarter of the mean step (or the precision the times are printed with); a gap or a step back is an error
naming the row. Units come from the user, else the column names, else the header; units the reader does not
know are refused rather than guessed, and missing ones are read as seconds and volts with a warning.
Source for the shapes and the rules: IEC 60469:2013 (state levels, reference levels) and common practice.

A trace flat at its highest (or lowest) value for a run of samples is clipped at the scope's rails: the run
is flagged, the fit leaves it out, and a warning says so; a trace clipped for most of its length is refused.
"""

import math
import re
from dataclasses import dataclass
from typing import Literal

import numpy as np
from pairline.engine.plan import BusInputError, Problem

MAX_CAPTURE_BYTES = 1_500_000  # about 40 000 rows of time, A and B
MIN_SAMPLES = 100
MAX_SAMPLES = 200_000
MAX_ATTENUATION = 1000.0
STEP_TOLERANCE = 0.25  # of the mean time step: larger departures are gaps or jitter
CLIP_RUN_SAMPLES = 8  # consecutive samples exactly at the extreme value that count as a flat top
MAX_CLIPPED_FRACTION = 0.3  # of the samples; more than this is refused
EDGE_NOISE_RATIO = 12.0  # the trace must span at least this many noise sigmas to hold an edge

Signal = Literal["auto", "differential", "lines"]
SIGNALS: tuple[Signal, ...] = ("auto", "differential", "lines")
TIME_UNITS = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9, "ps": 1e-12}
VOLTAGE_UNITS = {"v": 1.0, "volt": 1.0, "volts": 1.0, "mv": 1e-3, "uv": 1e-6, "µv": 1e-6, "μv": 1e-6, "kv": 1e3}
RATE_UNITS = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9, "sa/s": 1.0, "ksa/s": 1e3, "msa/s": 1e6, "gsa/s": 1e9}
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_BRACKET = re.compile(r"[\(\[]\s*([^\)\]]*?)\s*[\)\]]")
_TIME_NAMES = {"t", "time", "x", "sec", "second", "seconds", "s"}


@dataclass(frozen=True, slots=True)
class CaptureOptions:
    """What the user says about the file; None = read it from the file."""

    signal: Signal = "auto"
    time_unit: str | None = None
    voltage_unit: str | None = None
    sample_interval_s: float | None = None
    probe_attenuation: float = 1.0  # volts on the bus per volt in the file


@dataclass(frozen=True, slots=True)
class Capture:
    """One differential trace on a uniform time grid, in SI units, with what reading it noticed."""

    time_s: np.ndarray  # (n,) uniform, t_k = time_s[0] + k * sample_interval_s
    v_diff_v: np.ndarray  # (n,) A - B at the bus, probe attenuation applied
    sample_interval_s: float
    signal: Literal["differential", "lines"]
    clipped: np.ndarray  # (n,) bool: samples at a flat top, left out of any fit
    noise_v: float  # standard deviation of the sample-to-sample noise
    warnings: tuple[str, ...]


def _problem(field: str, label: str, value: object, allowed: dict[str, object], message: str) -> Problem:
    return Problem(field, label, value, allowed, message)


def check_options(options: CaptureOptions) -> None:
    """Refuse settings outside their ranges, every problem at once (BusInputError)."""
    problems = []
    if options.signal not in SIGNALS:
        problems.append(
            _problem(
                "signal",
                "Signal",
                options.signal,
                {"choices": list(SIGNALS)},
                f"Signal '{options.signal}' is not known; choose auto, differential (A-B) or lines (A and B).",
            )
        )
    for field, label, unit, table in (
        ("time_unit", "Time unit", options.time_unit, TIME_UNITS),
        ("voltage_unit", "Voltage unit", options.voltage_unit, VOLTAGE_UNITS),
    ):
        if unit is not None and _unit_factor(unit, table) is None:
            problems.append(_unknown_unit(field, label, unit, table))
    dt = options.sample_interval_s
    if dt is not None and not (math.isfinite(dt) and 1e-13 <= dt <= 1.0):
        problems.append(
            _problem(
                "sample_interval_s",
                "Sample interval",
                dt,
                {"min": 1e-13, "max": 1.0, "unit": "s"},
                f"Sample interval is {dt:g} s; allowed 0.1 ps to 1 s.",
            )
        )
    att = options.probe_attenuation
    if not (math.isfinite(att) and 1e-3 <= att <= MAX_ATTENUATION):
        problems.append(
            _problem(
                "probe_attenuation",
                "Probe attenuation",
                att,
                {"min": 0.001, "max": MAX_ATTENUATION, "unit": ""},
                f"Probe attenuation is {att:g}; allowed 0.001 to {MAX_ATTENUATION:g} (10 for a 10:1 probe "
                f"the scope was not told about, 1 when the file already holds bus volts).",
            )
        )
    if problems:
        raise BusInputError(problems)


def _unit_factor(unit: str, table: dict[str, float]) -> float | None:
    key = unit.strip()
    return table.get(key, table.get(key.lower()))


def _unknown_unit(field: str, label: str, unit: str, table: dict[str, float]) -> Problem:
    shown = ", ".join(dict.fromkeys(k for k in table if k.isascii() or k.startswith("µ")))
    return _problem(
        field,
        label,
        unit,
        {"choices": list(table)},
        f"{label} '{unit}' is not known; allowed {shown}.",
    )


def decode_capture(raw: bytes) -> str:
    """File bytes as text: UTF-8 (with or without a byte-order mark), else Latin-1, which reads any byte."""
    if len(raw) > MAX_CAPTURE_BYTES:
        raise _file_error(
            len(raw),
            {"max": MAX_CAPTURE_BYTES, "unit": "bytes"},
            f"The capture file holds {len(raw)} bytes; at most {MAX_CAPTURE_BYTES} are read. Save fewer points "
            "(a shorter record or a longer sample interval) or only the channels on the bus.",
        )
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def _file_error(value: object, allowed: dict[str, object], message: str) -> BusInputError:
    return BusInputError([_problem("capture_csv", "Capture file", value, allowed, message)])


@dataclass(frozen=True, slots=True)
class _Table:
    header: list[str]  # header lines as written
    separator: str | None
    names: list[str] | None  # column names, when a header row names the data columns
    rows: np.ndarray  # (n, n_columns) float
    time_text: list[str]  # the first column as written (its printed precision bounds the time check)
    first_line: int  # file line number (1-based) of the first data row
    line_of: np.ndarray  # (n,) file line number of each data row


def _separator(line: str) -> str | None:
    for sep in (";", "\t", ","):
        if sep in line:
            return sep
    return None  # whitespace


def _split(line: str, sep: str | None, decimal_comma: bool) -> list[str]:
    fields = line.split(sep) if sep else line.split()
    fields = [f.strip().strip('"').strip() for f in fields]
    while fields and fields[-1] == "":
        fields.pop()
    if decimal_comma:
        fields = [f.replace(",", ".") for f in fields]
    return fields


def _is_number(text: str) -> bool:
    return bool(_NUMBER.match(text))


def _read_table(text: str) -> _Table:
    if len(text) > MAX_CAPTURE_BYTES:
        raise _file_error(
            len(text),
            {"max": MAX_CAPTURE_BYTES, "unit": "characters"},
            f"The capture holds {len(text)} characters; at most {MAX_CAPTURE_BYTES} are read.",
        )
    lines = [(i + 1, ln.strip()) for i, ln in enumerate(text.lstrip("\ufeff").splitlines())]
    lines = [(n, ln) for n, ln in lines if ln]
    if not lines:
        raise _file_error("", {"type": "CSV text"}, "The capture is empty; choose a CSV file or paste its rows.")
    sep = _separator(lines[-1][1])
    decimal_comma = sep != "," and any("," in ln for _, ln in lines[-5:])
    start = next(
        (k for k, (_, ln) in enumerate(lines) if (f := _split(ln, sep, decimal_comma)) and all(map(_is_number, f))),
        None,
    )
    if start is None:
        raise _file_error(
            lines[-1][1][:80],
            {"type": "rows of numbers"},
            "No row of the capture holds only numbers; the data rows should read like '1.5e-6,0.82' "
            "(time, volts) after any header lines.",
        )
    header = [ln.replace(",", ".") if decimal_comma else ln for _, ln in lines[:start]]
    body = lines[start:]
    if len(body) > MAX_SAMPLES:
        raise _file_error(
            len(body),
            {"max": MAX_SAMPLES, "unit": "samples"},
            f"The capture holds {len(body)} samples; at most {MAX_SAMPLES} are read.",
        )
    width = len(_split(body[0][1], sep, decimal_comma))
    values = np.empty((len(body), width))
    time_text: list[str] = []
    for r, (line_no, ln) in enumerate(body):
        fields = _split(ln, sep, decimal_comma)
        if len(fields) != width:
            raise _file_error(
                f"line {line_no}",
                {"columns": width},
                f"Line {line_no} of the capture has {len(fields)} fields where the data rows have {width}: "
                f"'{ln[:60]}'.",
            )
        for c, cell in enumerate(fields):
            if not _is_number(cell):
                raise _file_error(
                    f"line {line_no}, column {c + 1}: {cell[:40]!r}",
                    {"type": "number"},
                    f"Line {line_no}, column {c + 1} of the capture is '{cell[:40]}', not a number; every data "
                    "row must hold numbers only.",
                )
            values[r, c] = float(cell)
        time_text.append(fields[0])
    last = _split(header[-1], sep, False) if header else []
    names = last if len(last) == width and not all(map(_is_number, last)) else None
    return _Table(header, sep, names, values, time_text, body[0][0], np.array([n for n, _ in body]))


def _header_items(lines: list[str], sep: str | None) -> dict[str, tuple[str, str]]:
    """`key -> (value, unit text)` of the header's key-value rows ('key,value[,unit]', 'key: value unit' or
    'key = value'); keys in lower-case words."""
    items: dict[str, tuple[str, str]] = {}
    for line in lines:
        if sep is not None and sep in line:
            fields = [f.strip().strip('"') for f in line.split(sep)]
        elif re.search(r"[:=]", line):
            fields = [p.strip() for p in re.split(r"[:=]", line, maxsplit=1)]
        else:
            continue
        if len(fields) < 2:
            continue
        key = " ".join(re.sub(r"[^a-z0-9/]+", " ", fields[0].lower()).split())
        value, unit = fields[1], fields[2] if len(fields) > 2 else ""
        m = re.match(r"^([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(\S*)$", value)
        if m and m.group(2):
            value, unit = m.group(1), m.group(2)
        items[key] = (value, unit)
    return items


@dataclass(frozen=True, slots=True)
class _Layout:
    time_column: int | None
    signal_columns: list[int]
    time_factor: float | None
    voltage_factor: float | None


def _column_layout(table: _Table, options: CaptureOptions, interval_known: bool) -> _Layout:
    width = table.rows.shape[1]
    time_factor = voltage_factor = None
    if table.names is None:
        first_rises = width > 1 and bool(np.all(np.diff(table.rows[:, 0]) > 0))
        if not interval_known:
            has_time = width > 1
        elif width == 2:  # time and A-B, or A and B with the interval from elsewhere
            has_time = first_rises and options.signal != "lines"
        else:
            has_time = width == 3 and first_rises
        time_column = 0 if has_time else None
    else:
        bases = [_BRACKET.sub("", n).strip().lower() for n in table.names]
        time_column = next((i for i, b in enumerate(bases) if b in _TIME_NAMES or b.startswith("time")), None)
        if time_column is None and not interval_known:
            time_column = 0
        for i, name in enumerate(table.names):
            for unit in _BRACKET.findall(name):
                if i == time_column:
                    factor = _unit_factor(unit, TIME_UNITS)
                    if factor is None:
                        raise BusInputError([_unknown_unit("time_unit", "Time unit", unit, TIME_UNITS)])
                    time_factor = factor
                else:
                    factor = _unit_factor(unit, VOLTAGE_UNITS)
                    if factor is not None:
                        voltage_factor = factor
                    elif not bases[i].startswith("v"):  # 'V(A)' names a net, not a unit
                        raise BusInputError([_unknown_unit("voltage_unit", "Voltage unit", unit, VOLTAGE_UNITS)])
    signal_columns = [i for i in range(width) if i != time_column]
    if table.names is not None and len(signal_columns) == 2:
        tags = [re.findall(r"[a-z0-9]+", table.names[i].lower())[-1:] for i in signal_columns]
        if tags == [["b"], ["a"]]:
            signal_columns.reverse()
    return _Layout(time_column, signal_columns, time_factor, voltage_factor)


def parse_capture(text: str, options: CaptureOptions = CaptureOptions()) -> Capture:
    """Read a capture (module docstring). Bad input raises BusInputError naming the field, value and range."""
    check_options(options)
    table = _read_table(text)
    warnings: list[str] = []
    items = _header_items(table.header, table.separator)
    header_dt = _header_interval(items)
    header_time_unit, header_voltage_unit = _header_units(items)
    layout = _column_layout(table, options, options.sample_interval_s is not None or header_dt is not None)
    n = table.rows.shape[0]
    if n < MIN_SAMPLES:
        raise _file_error(
            n,
            {"min": MIN_SAMPLES, "unit": "samples"},
            f"The capture holds {n} samples; at least {MIN_SAMPLES} are needed to see an edge and what follows it.",
        )
    time_factor = _pick_factor(options.time_unit, TIME_UNITS, layout.time_factor, header_time_unit)
    voltage_factor = _pick_factor(options.voltage_unit, VOLTAGE_UNITS, layout.voltage_factor, header_voltage_unit)
    if time_factor is None and layout.time_column is not None:
        warnings.append("No time unit is stated in the file; times are read as seconds (choose the unit if not).")
    if voltage_factor is None:
        warnings.append("No voltage unit is stated in the file; values are read as volts (choose the unit if not).")
    if layout.time_column is None:
        dt = options.sample_interval_s or header_dt
        if dt is None:
            raise BusInputError(
                [
                    _problem(
                        "sample_interval_s",
                        "Sample interval",
                        None,
                        {"min": 1e-13, "max": 1.0, "unit": "s"},
                        "The capture has no time column and its header states no sample interval; enter the "
                        "sample interval.",
                    )
                ]
            )
        t0 = 0.0
    else:
        t0, dt = _uniform_time(table, layout.time_column, time_factor or 1.0)
        if options.sample_interval_s is not None and abs(options.sample_interval_s / dt - 1.0) > 0.01:
            warnings.append(
                f"The time column steps by {dt:.4g} s, not the {options.sample_interval_s:.4g} s entered; the time "
                "column is used."
            )
    signal, v = _differential(table, layout, options.signal)
    v = v * (voltage_factor or 1.0) * options.probe_attenuation
    time_s = t0 + dt * np.arange(n)
    noise_v = noise_sigma_v(v)
    swing_v = float(np.percentile(v, 99.5) - np.percentile(v, 0.5))
    if swing_v < EDGE_NOISE_RATIO * noise_v or swing_v == 0.0:
        raise _file_error(
            f"swing {swing_v:.3g} V",
            {"min_swing_v": EDGE_NOISE_RATIO * noise_v},
            f"The trace stays within {swing_v * 1e3:.3g} mV (noise about {noise_v * 1e3:.2g} mV): it holds no edge. "
            "Trigger on a transmitted edge and capture again.",
        )
    clipped = _clipped(v)
    share = float(np.count_nonzero(clipped)) / n
    if share > MAX_CLIPPED_FRACTION:
        raise _file_error(
            f"{100 * share:.0f} % clipped",
            {"max_clipped_fraction": MAX_CLIPPED_FRACTION},
            f"The trace sits flat at the scope's limit for {100 * share:.0f} % of the capture: it is clipped. "
            "Capture again with more volts per division (or a matching probe setting).",
        )
    if share > 0:
        top = "top" if np.any(clipped & (v >= v.max())) else "bottom"
        warnings.append(
            f"The trace is flat at its {top} for {np.count_nonzero(clipped)} samples: the scope probably clipped "
            "it there; those samples are left out of the comparison."
        )
    return Capture(time_s, v, dt, signal, clipped, noise_v, tuple(warnings))


def _pick_factor(
    chosen: str | None, table: dict[str, float], from_names: float | None, from_header: str | None
) -> float | None:
    if chosen is not None:
        return _unit_factor(chosen, table)
    if from_names is not None:
        return from_names
    return None if from_header is None else _unit_factor(from_header, table)


def _header_interval(items: dict[str, tuple[str, str]]) -> float | None:
    for key, (value, unit) in items.items():
        if not _is_number(value):
            continue
        number = float(value)
        if any(w in key for w in ("interval", "increment", "time step", "sample period", "time per sample")) or key in (
            "dt",
            "xinc",
        ):
            factor = _unit_factor(unit, TIME_UNITS) if unit else 1.0
            if factor is None:
                raise BusInputError([_unknown_unit("time_unit", "Time unit", unit, TIME_UNITS)])
            if number > 0:
                return number * factor
        if "sample rate" in key or "sampling rate" in key:
            factor = _unit_factor(unit, RATE_UNITS) if unit else 1.0
            if factor is None:
                raise BusInputError([_unknown_unit("sample_interval_s", "Sample rate unit", unit, RATE_UNITS)])
            if number > 0:
                return 1.0 / (number * factor)
    return None


def _header_units(items: dict[str, tuple[str, str]]) -> tuple[str | None, str | None]:
    time_unit = voltage_unit = None
    for key, (value, _) in items.items():
        if "unit" not in key:
            continue
        if _unit_factor(value, TIME_UNITS) is not None:
            time_unit = value
        elif _unit_factor(value, VOLTAGE_UNITS) is not None:
            voltage_unit = value
    return time_unit, voltage_unit


def _uniform_time(table: _Table, column: int, factor: float) -> tuple[float, float]:
    """(t0, dt) of a time column that rises steadily; a step back or a gap raises, naming the file line."""
    t = table.rows[:, column] * factor
    steps = np.diff(t)
    printed = float(np.median([_printed_step(s) for s in table.time_text[:: max(1, t.size // 200)]])) * factor
    # repeated times are allowed only where the column is printed too coarsely to tell neighbours apart
    coarse = t[-1] > t[0] and 2.0 * printed >= 0.5 * (t[-1] - t[0]) / (t.size - 1)
    back = np.flatnonzero(steps < 0 if coarse else steps <= 0)
    if back.size:
        k = int(back[0]) + 1
        raise _file_error(
            f"line {table.line_of[k]}",
            {"rule": "time rises from row to row"},
            f"Time does not rise at line {table.line_of[k]} of the capture ({t[k - 1]:.6g} s, then {t[k]:.6g} s); "
            "the rows must be in time order without repeats.",
        )
    k_index = np.arange(t.size)
    dt, t0 = np.polyfit(k_index, t, 1)
    off = np.abs(t - (t0 + dt * k_index))
    worst = int(np.argmax(off))
    if off[worst] > max(STEP_TOLERANCE * dt, printed):
        step_at = int(np.argmax(np.abs(steps - dt)))
        raise _file_error(
            f"line {table.line_of[step_at + 1]}",
            {"rule": f"every time step within {100 * STEP_TOLERANCE:.0f} % of the mean step"},
            f"The time steps are irregular: the step to line {table.line_of[step_at + 1]} is {steps[step_at]:.4g} s "
            f"where the mean step is {dt:.4g} s. Save the capture without gaps, at one sample rate.",
        )
    return float(t0), float(dt)


def _printed_step(text: str) -> float:
    """Half a unit in the last printed digit of a number as written ('1.25e-6' -> 5e-9)."""
    mantissa, _, exponent = text.lower().partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10.0 ** (int(exponent or 0) - decimals)


def _differential(
    table: _Table, layout: _Layout, signal: Signal
) -> tuple[Literal["differential", "lines"], np.ndarray]:
    columns = layout.signal_columns
    if not columns:
        raise _file_error(
            "time only",
            {"columns": "time, then A-B or A and B"},
            "The capture holds a time column and no voltage column.",
        )
    if signal == "auto" and len(columns) > 2:
        raise BusInputError(
            [
                _problem(
                    "signal",
                    "Signal",
                    "auto",
                    {"choices": ["differential", "lines"]},
                    f"The capture has {len(columns)} voltage columns; say which to use: differential (the first "
                    "column is A-B) or lines (the first two are A and B against ground).",
                )
            ]
        )
    if signal == "lines" or (signal == "auto" and len(columns) == 2):
        if len(columns) < 2:
            raise BusInputError(
                [
                    _problem(
                        "signal",
                        "Signal",
                        signal,
                        {"choices": ["differential"]},
                        "Lines A and B need two voltage columns; this capture has one. Choose differential.",
                    )
                ]
            )
        return "lines", table.rows[:, columns[0]] - table.rows[:, columns[1]]
    return "differential", table.rows[:, columns[0]].copy()


def noise_sigma_v(v_v: np.ndarray) -> float:
    """Sample-to-sample noise of a trace: 1.4826 * MAD of first differences / sqrt(2) (robust to the few
    edges), at least a twelfth-root-of-the-step floor when the trace is quantised more coarsely than its noise.

    Source: F. R. Hampel, "The influence curve and its role in robust estimation", JASA 69 (1974) (MAD scale
    1.4826 for a normal distribution); uniform quantisation noise step / sqrt(12): common practice.
    """
    d = np.diff(v_v)
    sigma = 1.4826 * float(np.median(np.abs(d - np.median(d)))) / math.sqrt(2.0)
    steps = np.abs(d[d != 0])
    floor = float(steps.min()) / math.sqrt(12.0) if steps.size else 0.0
    return max(sigma, floor, 1e-9)


def _clipped(v_v: np.ndarray) -> np.ndarray:
    """Samples in runs of at least CLIP_RUN_SAMPLES exactly at the trace's maximum or minimum (flat tops)."""
    mask = np.zeros(v_v.size, dtype=bool)
    for extreme in (v_v.max(), v_v.min()):
        at = v_v == extreme
        edges = np.flatnonzero(np.diff(np.r_[0, at.astype(np.int8), 0]))
        for start, stop in zip(edges[::2], edges[1::2], strict=True):
            if stop - start >= CLIP_RUN_SAMPLES:
                mask[start:stop] = True
    return mask


__all__ = [
    "Capture",
    "CaptureOptions",
    "MAX_CAPTURE_BYTES",
    "MIN_SAMPLES",
    "check_options",
    "decode_capture",
    "noise_sigma_v",
    "parse_capture",
]
