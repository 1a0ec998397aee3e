"""A scope or logger capture of the bus: read from CSV text, checked, turned into one differential trace.

The file's shapes (header lines, column names, separators, decimal commas, A and B or A-B) are read by
engine.capturefile. Time must rise steadily: every step within a quarter of the mean step (or the precision the
times are printed with); a gap or a step back is an error naming the line. Units come from the user, else the
column names, else the header; units the reader does not know are refused rather than guessed, and missing ones
are read as seconds and volts with a warning. Source for the shapes and the rules: IEC 60469:2013 (state levels,
reference levels) and common practice.

A trace that spans no more than a few noise sigmas holds no edge and is refused. A trace flat at its highest (or
lowest) value for a run of samples is clipped at the scope's rails: the run is flagged, the fit leaves it out,
and a warning says so; a trace clipped for most of its length is refused.
"""

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from pairline.engine.capturefile import (
    MAX_CAPTURE_BYTES,
    SIGNALS,
    TIME_UNITS,
    VOLTAGE_UNITS,
    Signal,
    column_layout,
    decode_capture,
    differential,
    file_error,
    header_interval,
    header_items,
    header_units,
    problem,
    read_table,
    uniform_time,
    unit_factor,
    unknown_unit,
)
from pairline.engine.plan import BusInputError

MIN_SAMPLES = 100
MAX_ATTENUATION = 1000.0
CLIP_RUN_SAMPLES = 8  # consecutive samples exactly at the extreme value that count as a flat top
MAX_CLIPPED_FRACTION = 0.3  # of the samples; more than this is refused
EDGE_NOISE_RATIO = 12.0  # the trace must span at least this many noise sigmas to hold an edge


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


def check_options(options: CaptureOptions) -> None:
    """Refuse settings outside their ranges, every problem at once (BusInputError)."""
    problems = []
    if options.signal not in SIGNALS:
        problems.append(
            problem(
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
        if unit is not None and unit_factor(unit, table) is None:
            problems.append(unknown_unit(field, label, unit, table))
    dt = options.sample_interval_s
    if dt is not None and not (math.isfinite(dt) and 1e-13 <= dt <= 1.0):
        problems.append(
            problem(
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
            problem(
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


def parse_capture(text: str, options: CaptureOptions = CaptureOptions()) -> Capture:
    """Read a capture (module docstring). Bad input raises BusInputError naming the field, value and range."""
    check_options(options)
    table = read_table(text)
    warnings: list[str] = []
    items = header_items(table.header, table.separator)
    header_dt = header_interval(items)
    header_time_unit, header_voltage_unit = header_units(items)
    layout = column_layout(table, options.signal, options.sample_interval_s is not None or header_dt is not None)
    n = table.rows.shape[0]
    if n < MIN_SAMPLES:
        raise file_error(
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
                    problem(
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
        t0, dt = uniform_time(table, layout.time_column, time_factor or 1.0)
        if options.sample_interval_s is not None and abs(options.sample_interval_s / dt - 1.0) > 0.01:
            warnings.append(
                f"The time column steps by {dt:.4g} s, not the {options.sample_interval_s:.4g} s entered; the time "
                "column is used."
            )
    signal, v = differential(table, layout, options.signal)
    v = v * (voltage_factor or 1.0) * options.probe_attenuation
    time_s = t0 + dt * np.arange(n)
    noise_v = noise_sigma_v(v)
    swing_v = float(np.percentile(v, 99.5) - np.percentile(v, 0.5))
    if swing_v < EDGE_NOISE_RATIO * noise_v or swing_v == 0.0:
        raise file_error(
            f"swing {swing_v:.3g} V",
            {"min_swing_v": EDGE_NOISE_RATIO * noise_v},
            f"The trace stays within {swing_v * 1e3:.3g} mV (noise about {noise_v * 1e3:.2g} mV): it holds no edge. "
            "Trigger on a transmitted edge and capture again.",
        )
    clipped = _clipped(v)
    share = float(np.count_nonzero(clipped)) / n
    if share > MAX_CLIPPED_FRACTION:
        raise file_error(
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
        return unit_factor(chosen, table)
    if from_names is not None:
        return from_names
    return None if from_header is None else unit_factor(from_header, table)


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
    "SIGNALS",
    "TIME_UNITS",
    "VOLTAGE_UNITS",
    "check_options",
    "decode_capture",
    "noise_sigma_v",
    "parse_capture",
]
