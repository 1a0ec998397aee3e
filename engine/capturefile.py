"""The text of a capture file read as a table: separators and decimal commas, header lines, column names and
units, the time column checked for order and regular steps, and A and B turned into A-B.

Shapes (common practice; IEC 60469:2013 for the terms): key,value header rows (`Sample Interval,2e-9,s`), one row of
column names (`Time (us),A (V),B (V)`), data rows of numbers separated by commas, semicolons, tabs or spaces (with
semicolons, tabs or spaces a comma may be the decimal mark). Data start at the first row of numbers only.
"""

import re
from dataclasses import dataclass
from typing import Literal

import numpy as np
from pairline.engine.plan import BusInputError, Problem

MAX_CAPTURE_BYTES = 1_500_000  # about 40 000 rows of time, A and B
MAX_SAMPLES = 200_000
STEP_TOLERANCE = 0.25  # of the mean time step: larger departures are gaps or jitter

Signal = Literal["auto", "differential", "lines"]
SIGNALS: tuple[Signal, ...] = ("auto", "differential", "lines")
TIME_UNITS = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9, "ps": 1e-12}
VOLTAGE_UNITS = {"v": 1.0, "volt": 1.0, "volts": 1.0, "mv": 1e-3, "uv": 1e-6, "µv": 1e-6, "μv": 1e-6, "kv": 1e3}
RATE_UNITS = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9, "sa/s": 1.0, "ksa/s": 1e3, "msa/s": 1e6, "gsa/s": 1e9}
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_BRACKET = re.compile(r"[\(\[]\s*([^\)\]]*?)\s*[\)\]]")
_TIME_NAMES = {"t", "time", "x", "sec", "second", "seconds", "s"}


def problem(field: str, label: str, value: object, allowed: dict[str, object], message: str) -> Problem:
    return Problem(field, label, value, allowed, message)


def unit_factor(unit: str, table: dict[str, float]) -> float | None:
    key = unit.strip()
    return table.get(key, table.get(key.lower()))


def unknown_unit(field: str, label: str, unit: str, table: dict[str, float]) -> Problem:
    shown = ", ".join(dict.fromkeys(k for k in table if k.isascii() or k.startswith("µ")))
    return problem(
        field,
        label,
        unit,
        {"choices": list(table)},
        f"{label} '{unit}' is not known; allowed {shown}.",
    )


def decode_capture(raw: bytes) -> str:
    """File bytes as text: UTF-8 (with or without a byte-order mark), else Latin-1, which reads any byte."""
    if len(raw) > MAX_CAPTURE_BYTES:
        raise file_error(
            len(raw),
            {"max": MAX_CAPTURE_BYTES, "unit": "bytes"},
            f"The capture file holds {len(raw)} bytes; at most {MAX_CAPTURE_BYTES} are read. Save fewer points "
            "(a shorter record or a longer sample interval) or only the channels on the bus.",
        )
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def file_error(value: object, allowed: dict[str, object], message: str) -> BusInputError:
    return BusInputError([problem("capture_csv", "Capture file", value, allowed, message)])


@dataclass(frozen=True, slots=True)
class Table:
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


def read_table(text: str) -> Table:
    if len(text) > MAX_CAPTURE_BYTES:
        raise file_error(
            len(text),
            {"max": MAX_CAPTURE_BYTES, "unit": "characters"},
            f"The capture holds {len(text)} characters; at most {MAX_CAPTURE_BYTES} are read.",
        )
    lines = [(i + 1, ln.strip()) for i, ln in enumerate(text.lstrip("\ufeff").splitlines())]
    lines = [(n, ln) for n, ln in lines if ln]
    if not lines:
        raise file_error("", {"type": "CSV text"}, "The capture is empty; choose a CSV file or paste its rows.")
    sep = _separator(lines[-1][1])
    decimal_comma = sep != "," and any("," in ln for _, ln in lines[-5:])
    start = next(
        (k for k, (_, ln) in enumerate(lines) if (f := _split(ln, sep, decimal_comma)) and all(map(_is_number, f))),
        None,
    )
    if start is None:
        raise file_error(
            lines[-1][1][:80],
            {"type": "rows of numbers"},
            "No row of the capture holds only numbers; the data rows should read like '1.5e-6,0.82' "
            "(time, volts) after any header lines.",
        )
    header = [ln.replace(",", ".") if decimal_comma else ln for _, ln in lines[:start]]
    body = lines[start:]
    if len(body) > MAX_SAMPLES:
        raise file_error(
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
            raise file_error(
                f"line {line_no}",
                {"columns": width},
                f"Line {line_no} of the capture has {len(fields)} fields where the data rows have {width}: "
                f"'{ln[:60]}'.",
            )
        for c, cell in enumerate(fields):
            if not _is_number(cell):
                raise file_error(
                    f"line {line_no}, column {c + 1}: {cell[:40]!r}",
                    {"type": "number"},
                    f"Line {line_no}, column {c + 1} of the capture is '{cell[:40]}', not a number; every data "
                    "row must hold numbers only.",
                )
            values[r, c] = float(cell)
        time_text.append(fields[0])
    last = _split(header[-1], sep, False) if header else []
    names = last if len(last) == width and not all(map(_is_number, last)) else None
    return Table(header, sep, names, values, time_text, body[0][0], np.array([n for n, _ in body]))


def header_items(lines: list[str], sep: str | None) -> dict[str, tuple[str, str]]:
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
class Layout:
    time_column: int | None
    signal_columns: list[int]
    time_factor: float | None
    voltage_factor: float | None


def column_layout(table: Table, signal: Signal, interval_known: bool) -> Layout:
    """Which column is time (by name, else the first unless an interval is known) and which hold volts; units
    found in the column names; two voltage columns named B then A are swapped."""
    width = table.rows.shape[1]
    time_factor = voltage_factor = None
    if table.names is None:
        first_rises = width > 1 and bool(np.all(np.diff(table.rows[:, 0]) > 0))
        if not interval_known:
            has_time = width > 1
        elif width == 2:  # time and A-B, or A and B with the interval from elsewhere
            has_time = first_rises and signal != "lines"
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
                    factor = unit_factor(unit, TIME_UNITS)
                    if factor is None:
                        raise BusInputError([unknown_unit("time_unit", "Time unit", unit, TIME_UNITS)])
                    time_factor = factor
                else:
                    factor = unit_factor(unit, VOLTAGE_UNITS)
                    if factor is not None:
                        voltage_factor = factor
                    elif not bases[i].startswith("v"):  # 'V(A)' names a net, not a unit
                        raise BusInputError([unknown_unit("voltage_unit", "Voltage unit", unit, VOLTAGE_UNITS)])
    signal_columns = [i for i in range(width) if i != time_column]
    if table.names is not None and len(signal_columns) == 2:
        tags = [re.findall(r"[a-z0-9]+", table.names[i].lower())[-1:] for i in signal_columns]
        if tags == [["b"], ["a"]]:
            signal_columns.reverse()
    return Layout(time_column, signal_columns, time_factor, voltage_factor)


def header_interval(items: dict[str, tuple[str, str]]) -> float | None:
    for key, (value, unit) in items.items():
        if not _is_number(value):
            continue
        number = float(value)
        if any(w in key for w in ("interval", "increment", "time step", "sample period", "time per sample")) or key in (
            "dt",
            "xinc",
        ):
            factor = unit_factor(unit, TIME_UNITS) if unit else 1.0
            if factor is None:
                raise BusInputError([unknown_unit("time_unit", "Time unit", unit, TIME_UNITS)])
            if number > 0:
                return number * factor
        if "sample rate" in key or "sampling rate" in key:
            factor = unit_factor(unit, RATE_UNITS) if unit else 1.0
            if factor is None:
                raise BusInputError([unknown_unit("sample_interval_s", "Sample rate unit", unit, RATE_UNITS)])
            if number > 0:
                return 1.0 / (number * factor)
    return None


def header_units(items: dict[str, tuple[str, str]]) -> tuple[str | None, str | None]:
    time_unit = voltage_unit = None
    for key, (value, _) in items.items():
        if "unit" not in key:
            continue
        if unit_factor(value, TIME_UNITS) is not None:
            time_unit = value
        elif unit_factor(value, VOLTAGE_UNITS) is not None:
            voltage_unit = value
    return time_unit, voltage_unit


def uniform_time(table: Table, column: int, factor: float) -> tuple[float, float]:
    """(t0, dt) of a time column that rises steadily; a step back or a gap raises, naming the file line."""
    t = table.rows[:, column] * factor
    steps = np.diff(t)
    printed = float(np.median([_printed_step(s) for s in table.time_text[:: max(1, t.size // 200)]])) * factor
    # repeated times are allowed only where the column is printed too coarsely to tell neighbours apart
    coarse = t[-1] > t[0] and 2.0 * printed >= 0.5 * (t[-1] - t[0]) / (t.size - 1)
    back = np.flatnonzero(steps < 0 if coarse else steps <= 0)
    if back.size:
        k = int(back[0]) + 1
        raise file_error(
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
        raise file_error(
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


def differential(table: Table, layout: Layout, signal: Signal) -> tuple[Literal["differential", "lines"], np.ndarray]:
    columns = layout.signal_columns
    if not columns:
        raise file_error(
            "time only",
            {"columns": "time, then A-B or A and B"},
            "The capture holds a time column and no voltage column.",
        )
    if signal == "auto" and len(columns) > 2:
        raise BusInputError(
            [
                problem(
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
                    problem(
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
