"""Field checks at the edge: what the user sent (a JSON body, a form, command-line options) read into one
request, checked against the plan all at once, run, and the result as one plain dict for JSON and pages.

Inputs share their names across the JSON API, the form and the engine: `capture_csv`, `at`, `at_position_m`,
`sent`, `bits`, `signal`, `time_unit`, `voltage_unit`, `sample_interval_s`, `probe_attenuation`. JSON numbers
are SI; text (from a form) may carry a unit ("2 ns", "120 m", "394 ft"), a bare number being read in the unit
the form shows (nanoseconds, the plan's length unit).
"""

import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from pairline.engine.capture import SIGNALS, Capture, CaptureOptions, check_options, parse_capture
from pairline.engine.fieldcheck import REGIONS, FieldCheck, check_capture
from pairline.engine.fieldmodel import PROBE_NAME, SENT, FieldSetup, field_setup
from pairline.engine.plan import BusInputError, BusPlan, Problem, plan_to_dict
from pairline.server.plots import decimate
from pairline.server.quantities import QuantityError, UnitSystem, parse_quantity

FIELD_KEYS = (
    "at",
    "at_position_m",
    "sent",
    "bits",
    "signal",
    "time_unit",
    "voltage_unit",
    "sample_interval_s",
    "probe_attenuation",
)
OVERLAY_POINTS = 800  # samples of each overlay curve in the JSON (min/max pairs keep the peaks)


@dataclass(frozen=True, slots=True)
class FieldRequest:
    capture_csv: str
    options: CaptureOptions
    at: str | None
    at_position_m: float | None
    sent: str
    bits: str | None
    setup: FieldSetup
    capture: Capture

    def settings(self) -> dict[str, Any]:
        """The settings as JSON values (SI), as stored beside a capture and echoed in results."""
        o = self.options
        return {
            "at": self.at,
            "at_position_m": self.at_position_m,
            "sent": self.sent,
            "bits": self.bits,
            "signal": o.signal,
            "time_unit": o.time_unit,
            "voltage_unit": o.voltage_unit,
            "sample_interval_s": o.sample_interval_s,
            "probe_attenuation": o.probe_attenuation,
        }


def _text(raw: Any) -> str | None:
    if raw is None:
        return None
    text = str(raw).strip()
    return text or None


def _number(
    raw: Any, field: str, label: str, kind: str, units: UnitSystem, problems: list[Problem], hint: str
) -> float | None:
    """A JSON number as it is, or typed text read as a quantity of `kind`; None when blank."""
    if raw is None or (isinstance(raw, str) and not raw.strip()):
        return None
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        problems.append(Problem(field, label, str(raw)[:40], {"type": "number"}, f"{label} must be a number."))
        return None
    if isinstance(raw, int | float):
        if not math.isfinite(raw):
            problems.append(Problem(field, label, None, {"type": "finite number"}, f"{label} must be finite."))
            return None
        return float(raw)
    text = raw.strip().lower().removesuffix(":1").removesuffix("x") if kind == "plain" else raw
    try:
        return parse_quantity(text, kind, units)
    except QuantityError as exc:
        problems.append(
            Problem(
                field, label, raw[:40], {"type": "number"}, f"{label} '{raw[:40]}' is not understood: {exc} ({hint})."
            )
        )
        return None


def field_request(raw: Mapping[str, Any], plan: BusPlan) -> FieldRequest:
    """Read a request (JSON object or form fields), check it against the plan and read its capture;
    BusInputError lists every problem found."""
    units = plan.display_units
    problems: list[Problem] = []
    capture_csv = raw.get("capture_csv")
    if not isinstance(capture_csv, str) or not capture_csv.strip():
        problems.append(
            Problem(
                "capture_csv",
                "Capture file",
                None if capture_csv is None else str(capture_csv)[:40],
                {"type": "CSV text"},
                "Choose a capture file (CSV of time and A-B, or of time, A and B) or paste its rows.",
            )
        )
        capture_csv = ""
    attenuation = _number(
        raw.get("probe_attenuation"), "probe_attenuation", "Probe attenuation", "plain", units, problems, "e.g. 10"
    )
    options = CaptureOptions(
        signal=_text(raw.get("signal")) or "auto",  # type: ignore[arg-type]
        time_unit=_text(raw.get("time_unit")),
        voltage_unit=_text(raw.get("voltage_unit")),
        sample_interval_s=_number(
            raw.get("sample_interval_s"), "sample_interval_s", "Sample interval", "time", units, problems, "e.g. 2 ns"
        ),
        probe_attenuation=1.0 if attenuation is None else attenuation,
    )
    position = _number(
        raw.get("at_position_m"),
        "at_position_m",
        "Probe position on the trunk",
        "length",
        units,
        problems,
        "e.g. 120 m",
    )
    at, sent, bits = _text(raw.get("at")), _text(raw.get("sent")) or "edge", _text(raw.get("bits"))
    setup = capture = None
    try:
        setup = field_setup(plan, at, position, sent, bits)
    except BusInputError as exc:
        problems += exc.problems
    try:
        check_options(options)
        if capture_csv:
            capture = parse_capture(capture_csv, options)
    except BusInputError as exc:
        problems += exc.problems
    if problems or setup is None or capture is None:
        raise BusInputError(problems)
    return FieldRequest(capture_csv, options, at, position, sent, bits, setup, capture)


def run_field_check(plan: BusPlan, request: FieldRequest) -> FieldCheck:
    """Align, compare and fit (engine.fieldcheck); a capture with too few samples near the edge raises."""
    return check_capture(plan, request.capture, request.setup)


def field_data(result: FieldCheck, request: FieldRequest) -> dict[str, Any]:
    """The result as plain JSON values: verdict, differences, quantities, residuals, the overlay (thinned) and
    the fitted plan as a draft document."""
    o = result.overlay
    times, measured = decimate(o.time_s, o.measured_v, OVERLAY_POINTS // 2)
    _, predicted = decimate(o.time_s, o.predicted_v, OVERLAY_POINTS // 2)
    _, fitted = decimate(o.time_s, o.fitted_v, OVERLAY_POINTS // 2)
    a = result.alignment
    return {
        "verdict": "matches" if result.matches else "differs",
        "settings": request.settings(),
        "probe": "a point on the trunk" if result.setup.at == PROBE_NAME else result.setup.at,
        "bits_sent": result.setup.bits,
        "capture": {
            "samples": result.samples,
            "sample_interval_s": result.sample_interval_s,
            "signal": result.signal,
            "noise_v": result.noise_v,
        },
        "alignment": {
            "time_offset_s": a.time_offset_s,
            "scale": a.scale,
            "level_offset_v": a.level_offset_v,
            "inverted": bool(a.inverted),
        },
        "residuals": [asdict(r) for r in result.residuals],
        "fitted_residuals": [asdict(r) for r in result.fitted_residuals],
        "differences": [{"key": d.key, "sentence": d.sentence} for d in result.differences],
        "quantities": [
            {
                "key": q.key,
                "label": q.label,
                "unit": q.unit,
                "planned": _finite(q.planned),
                "fitted": _finite(q.fitted),
                "low": _finite(q.low),
                "high": _finite(q.high),
                "differs": q.differs,
            }
            for q in result.quantities
        ],
        "warnings": list(result.warnings),
        "fitted_plan": None if result.fitted_plan is None else plan_to_dict(result.fitted_plan),
        "overlay": {
            "regions": list(REGIONS),
            "time_s": _floats(times),
            "measured_v": _floats(measured),
            "predicted_v": _floats(predicted),
            "fitted_v": _floats(fitted),
        },
    }


def _finite(value: float | None) -> float | None:
    return value if value is not None and math.isfinite(value) else None


def _floats(values: np.ndarray) -> list[float]:
    return [float(f"{x:.6g}") for x in values]


__all__ = ["FIELD_KEYS", "FieldRequest", "SENT", "SIGNALS", "field_data", "field_request", "run_field_check"]
