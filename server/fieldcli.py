"""`pairline field PLAN.json CAPTURE.csv [--at NODE] [--json]`: hold a scope capture against the plan.

Exit status: 0 when the capture matches the plan, 1 when a difference is found, 2 when the input cannot be
checked (an unreadable or invalid plan or capture file, or settings out of range; every problem is printed
with its field, value and allowed range).
"""

import argparse
import json
from pathlib import Path
from typing import Any, TextIO

from pairline.engine.capture import MAX_CAPTURE_BYTES, SIGNALS, decode_capture
from pairline.engine.capturefile import file_error
from pairline.engine.fieldcheck import FieldCheck
from pairline.engine.fieldmodel import SENT
from pairline.engine.plan import BusInputError, load_plan
from pairline.engine.units import length_text
from pairline.server.cli import (
    EXIT_BREAKS,
    EXIT_INVALID,
    EXIT_OK,
    SAFETY_NOTE,
    PlanFileError,
    problems_envelope,
    problems_text,
    quantity_text,
    read_plan_document,
)
from pairline.server.field import field_data, field_request, run_field_check

_REGION_LABELS = {"edge": "first edge", "reflections": "reflections", "settled": "settled level"}


def add_field_command(commands: "argparse._SubParsersAction[argparse.ArgumentParser]") -> None:
    field = commands.add_parser(
        "field",
        help="hold a scope capture of the installed bus against the plan and say what differs",
        description="Compare a capture (CSV of time and A-B, or time, A and B) with the plan's prediction where it "
        "was taken, and fit what in the installation differs. Exit status 0: matches the plan; 1: a difference is "
        "found; 2: invalid input.",
    )
    field.add_argument("plan", metavar="PLAN.json", help="the bus plan file")
    field.add_argument("capture", metavar="CAPTURE.csv", help="the capture file")
    where = field.add_mutually_exclusive_group()
    where.add_argument("--at", metavar="NODE", help="where the probe was: a node's name or the driver's (default)")
    where.add_argument("--at-position", metavar="METRES", help="or a point on the trunk, e.g. 120 or '394 ft'")
    field.add_argument("--sent", choices=SENT, default="edge", help="one edge (default), the plan's pattern, or --bits")
    field.add_argument("--bits", help="the bits the driver sent, 0s and 1s, at the plan's bit rate")
    field.add_argument("--signal", choices=SIGNALS, default="auto", help="A-B, or A and B in two columns")
    field.add_argument("--time-unit", help="unit of the time column when the file does not say (s, ms, us, ns)")
    field.add_argument("--voltage-unit", help="unit of the voltage columns when the file does not say (V, mV)")
    field.add_argument("--sample-interval", help="time between samples when the file has no time column, e.g. 2ns")
    field.add_argument("--probe-attenuation", default=None, help="bus volts per volt in the file (10 for 10:1)")
    field.add_argument("--fitted-plan", metavar="OUT.json", help="write the plan as fitted to the capture here")
    field.add_argument("--json", action="store_true", help="print the full result as JSON")
    field.set_defaults(run=run_field)


def _read_capture(path: str) -> str:
    try:
        size = Path(path).stat().st_size
        if size > MAX_CAPTURE_BYTES:
            raise file_error(
                size,
                {"max": MAX_CAPTURE_BYTES, "unit": "bytes"},
                f"{path} holds {size} bytes; a capture file may hold at most {MAX_CAPTURE_BYTES} bytes.",
            )
        return decode_capture(Path(path).read_bytes())
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise file_error(path, {"type": "readable CSV file"}, f"Cannot read {path}: {reason}.") from None


def run_field(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    try:
        plan = load_plan(read_plan_document(args.plan))
        raw = {
            "capture_csv": _read_capture(args.capture),
            "at": args.at,
            "at_position_m": args.at_position,
            "sent": args.sent,
            "bits": args.bits,
            "signal": args.signal,
            "time_unit": args.time_unit,
            "voltage_unit": args.voltage_unit,
            "sample_interval_s": args.sample_interval,
            "probe_attenuation": args.probe_attenuation,
        }
        request = field_request(raw, plan)
        result = run_field_check(plan, request)
    except (PlanFileError, BusInputError) as exc:
        if args.json:
            print(json.dumps(problems_envelope(exc.problems), indent=2, ensure_ascii=False, default=str), file=out)
        print(problems_text(exc.problems).replace("The plan cannot be checked", "Nothing to compare"), file=err)
        return EXIT_INVALID
    data = field_data(result, request)
    if args.fitted_plan and data["fitted_plan"] is not None:
        Path(args.fitted_plan).write_text(json.dumps(data["fitted_plan"], indent=2, ensure_ascii=False) + "\n")
    if args.json:
        print(json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False), file=out)
    else:
        print(field_text(result, data, args, plan.display_units), file=out)
    return EXIT_OK if result.matches else EXIT_BREAKS


def field_text(result: FieldCheck, data: dict[str, Any], args: argparse.Namespace, display_units: str) -> str:
    """The readable report: the capture, the alignment, residuals by region, differences, fitted quantities.
    Lengths read in the plan's display units (the engine's sentences already do)."""

    def value_text(value: float, unit: str) -> str:
        return length_text(value, display_units) if unit == "m" else quantity_text(value, unit)

    cap, a = data["capture"], result.alignment
    where = "a point on the trunk" if data["settings"]["at_position_m"] is not None else f"'{data['probe']}'"
    sent = {"edge": "one edge", "pattern": f"the plan's pattern ({len(result.setup.bits)} bits)"}.get(
        result.setup.sent, f"bits {result.setup.bits[:40]}"
    )
    out = [
        f"Pairline field check  [{args.plan} against {args.capture}]",
        f"  Capture: {cap['samples']} samples every {quantity_text(cap['sample_interval_s'], 's')} "
        f"({'A and B' if cap['signal'] == 'lines' else 'A-B'}), noise about {quantity_text(cap['noise_v'], 'V')}; "
        f"probe at {where}; sent: {sent}",
        f"  Alignment: the driver starts sending {quantity_text(a.time_offset_s, 's')} into the capture; level "
        f"scale {a.scale:.3g}, level offset {quantity_text(a.level_offset_v, 'V')}"
        + (" (compared upside down)" if a.inverted else ""),
        "  Residual by region, rms / largest (share of the swing): plan | fitted installation",
    ]
    for plan_r, fit_r in zip(result.residuals, result.fitted_residuals, strict=True):
        out.append(
            f"    {_REGION_LABELS[plan_r.region]:14s} {quantity_text(plan_r.rms_v, 'V')} / "
            f"{quantity_text(plan_r.max_abs_v, 'V')} ({100 * plan_r.rms_fraction:.2g} %)  |  "
            f"{quantity_text(fit_r.rms_v, 'V')} / {quantity_text(fit_r.max_abs_v, 'V')} "
            f"({100 * fit_r.rms_fraction:.2g} %)"
        )
    out.append("")
    if result.matches:
        out.append("Result: MATCHES THE PLAN (no difference found within the tolerances)")
    else:
        out.append(f"Result: DIFFERS FROM THE PLAN ({len(result.differences)} difference(s))")
        out += [f"  - {d.sentence}" for d in result.differences]
    out += ["", "Fitted quantities (95 % range):"]
    for q in result.quantities:
        planned = "none" if q.planned is None else value_text(q.planned, q.unit)
        fitted = "none (missing)" if q.fitted is None else value_text(q.fitted, q.unit)
        low = value_text(q.low, q.unit) if q.low is not None else "?"
        high = value_text(q.high, q.unit) if q.high is not None else "open"
        mark = "DIFFERS" if q.differs else "as planned"
        out.append(f"  {q.label}: planned {planned}, fitted {fitted} ({low} to {high}) {mark}")
    if data["fitted_plan"] is not None:
        saved = f"written to {args.fitted_plan}" if args.fitted_plan else "save it with --fitted-plan OUT.json"
        out.append(f"  The plan as installed (fitted) is a draft to check: {saved}.")
    if result.warnings:
        out += ["", "Notes:"] + [f"  ! {w}" for w in result.warnings]
    out += ["", SAFETY_NOTE]
    return "\n".join(out)
