"""Command line: `pairline check PLAN.json [--json]`, `pairline check --sample NAME`, `pairline samples`,
`pairline advise PLAN.json [-o OUT.json]`, `pairline serve [--host] [--port] [--db]`, `pairline seed [--db]` and
`pairline field PLAN.json CAPTURE.csv` (server/fieldcli.py).

Exit status of check: 0 when no rule breaks, 1 when at least one rule breaks; of advise: 0 when the advised plan
breaks no rule, 1 when some rule cannot be met with terminators and bias alone (each said why). Both exit 2 when
the input cannot be checked (unreadable file, bad JSON, or a plan that fails validation; every problem is printed
with its field, value and allowed range). Subcommands hang off one argparse parser (build_parser()).
"""

import argparse
import json
import math
import re
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, TextIO

from pairline.engine.check import PlanReport, check_plan, report_to_dict
from pairline.engine.devices import UNIT_LOAD_TEXT
from pairline.engine.findings import Finding, Verdict, worst
from pairline.engine.network import NetworkReport, advised_plan, advised_verdict, check_network, network_to_dict
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan, plan_to_dict
from pairline.engine.rules.power import rating_text
from pairline.engine.units import length_text, si_format
from pairline.server.allocator import keep_freed_memory
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.samples import UnknownSampleError, sample_file, sample_files, seed_samples
from pairline.server.wording import METRIC_LENGTH, metres_of

EXIT_OK = 0
EXIT_BREAKS = 1
EXIT_INVALID = 2
MAX_PLAN_BYTES = 5_000_000
_SI_UNITS = {"V", "W", "Ω", "Ohm", "s", "Hz", "bit/s", "F", "A"}
_MARK = {Verdict.HOLDS: "holds ", Verdict.TIGHT: "TIGHT ", Verdict.BREAKS: "BREAKS"}
SAFETY_NOTE = (
    "Pairline checks signals, not installation safety. Runs between buildings or outdoors pick up ground "
    "offsets and surges: isolate, surge-protect and follow your local electrical codes and licensed practice."
)


class PlanFileError(ValueError):
    """The plan file could not be read or parsed; carries the problems in the plan's error shape."""

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        super().__init__("; ".join(p.message for p in problems))


# --- reading ---------------------------------------------------------------------------------------------


def read_plan_document(path: str, stdin: TextIO | None = None) -> Any:
    """The JSON document in a file ('-' reads standard input). Raises PlanFileError naming what went wrong."""
    try:
        if path == "-":
            text = (stdin or sys.stdin).read(MAX_PLAN_BYTES + 1)
        else:
            file = Path(path)
            size = file.stat().st_size
            if size > MAX_PLAN_BYTES:
                raise PlanFileError(
                    [
                        Problem(
                            "file",
                            "Plan file",
                            size,
                            {"max": MAX_PLAN_BYTES, "unit": "bytes"},
                            f"{path} holds {size} bytes; a plan file may hold at most {MAX_PLAN_BYTES} bytes.",
                        )
                    ]
                )
            text = file.read_text(encoding="utf-8")
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise PlanFileError(
            [Problem("file", "Plan file", path, {"type": "readable JSON file"}, f"Cannot read {path}: {reason}.")]
        ) from None
    except UnicodeDecodeError:
        raise PlanFileError(
            [Problem("file", "Plan file", path, {"encoding": "UTF-8"}, f"{path} is not UTF-8 text.")]
        ) from None
    if len(text) > MAX_PLAN_BYTES:
        raise PlanFileError(
            [
                Problem(
                    "file",
                    "Plan file",
                    len(text),
                    {"max": MAX_PLAN_BYTES, "unit": "bytes"},
                    f"The plan on standard input exceeds {MAX_PLAN_BYTES} bytes.",
                )
            ]
        )
    shown = "standard input" if path == "-" else path
    try:
        return load_json(text)
    except JsonInputError as exc:
        raise PlanFileError(
            [Problem("file", "Plan file", shown, {"type": "JSON object"}, f"{shown} cannot be read: {exc}.")]
        ) from None


# --- formatting -------------------------------------------------------------------------------------------


def quantity_text(value: float | None, unit: str) -> str:
    """A number with its unit for people: SI prefixes for electrical units, 3 significant digits."""
    if value is None:
        return "n/a"
    if unit in _SI_UNITS:
        return si_format(value, "Ω" if unit == "Ohm" else unit)
    return f"{number_text(value)} {unit}".strip()


def number_text(value: float, digits: int = 3) -> str:
    """A plain number to `digits` significant digits, never in exponent form: 10416.7 -> '10400', 0.0424 -> '0.0424'."""
    if value == 0.0 or not math.isfinite(value):
        return f"{value:g}"
    if abs(value) >= 10.0 ** (digits - 1):
        return f"{round(value, digits - 1 - math.floor(math.log10(abs(value)))):.0f}"
    return f"{value:.{digits}g}"


def allowed_text(allowed: dict[str, Any]) -> str:
    """The allowed range or choices of a problem, for people: '50 bit/s .. 100 Mbit/s', 'one of a, b'."""
    unit = str(allowed.get("unit", ""))
    parts = []
    if "min" in allowed or "max" in allowed:
        lo, hi = (allowed.get(k) for k in ("min", "max"))
        if unit in _SI_UNITS and all(isinstance(v, int | float) or v is None for v in (lo, hi)):
            lo_text = quantity_text(float(lo), unit) if lo is not None else "-inf"
            hi_text = quantity_text(float(hi), unit) if hi is not None else f"inf {unit}"
            parts.append(f"{lo_text} .. {hi_text}")
        else:
            parts.append(f"{_num_text(lo) or '-inf'} .. {_num_text(hi) or 'inf'} {unit}".strip())
    if "min_length" in allowed or "max_length" in allowed:
        lo, hi = (_num_text(allowed.get(k)) for k in ("min_length", "max_length"))
        parts.append(f"{lo or '0'} .. {hi or 'any number of'} items")
    if "choices" in allowed:
        parts.append("one of " + ", ".join(str(c) for c in allowed["choices"]))
    shown = {"min", "max", "unit", "choices", "min_exclusive", "min_length", "max_length"}
    parts += [f"{k}: {v}" for k, v in allowed.items() if k not in shown]
    return "; ".join(parts) or "see message"


def _num_text(value: Any) -> str:
    if value is None:
        return ""
    return f"{value:g}" if isinstance(value, float | int) and not isinstance(value, bool) else str(value)


def problems_text(problems: Sequence[Problem]) -> str:
    lines = [f"The plan cannot be checked: {len(problems)} problem(s)."]
    for p in problems:
        lines.append(f"  {p.field or '(plan)'}: {p.message}")
        value = json.dumps(p.value, ensure_ascii=False, default=str)
        lines.append(f"      value: {value}; allowed: {allowed_text(p.allowed)}")
    return "\n".join(lines)


def problems_envelope(problems: Sequence[Problem]) -> dict[str, Any]:
    """The same error shape the JSON API uses: status 422 and every problem."""
    return {
        "status": 422,
        "problems": [
            {"field": p.field, "label": p.label, "value": p.value, "allowed": p.allowed, "message": p.message}
            for p in problems
        ],
    }


# How a limit reads beside its value: "max" value <= limit, "min" value >= limit, "none" for information.
_LIMIT_SIGN = {"max": "≤ ", "min": "≥ ", "none": "for reference: "}


def finding_lines(f: Finding, indent: str) -> list[str]:
    head = f"{indent}[{_MARK[f.verdict]}] " + (f"node '{f.node}': " if f.node else "") + f.title
    if f.value is not None:
        head += f": {quantity_text(f.value, f.unit)}"
    if f.limit is not None:
        head += f" ({_LIMIT_SIGN.get(f.limit_kind, 'limit ')}{quantity_text(f.limit, f.unit)})"
    lines = [head]
    if f.verdict is not Verdict.HOLDS:
        lines.append(f"{indent}          criterion: {f.criterion}")
        if f.fix:
            lines.append(f"{indent}          fix: {f.fix}")
        lines.append(f"{indent}          source: {f.source}")
    return lines


def _terminator_summary(report: PlanReport) -> list[str]:
    s = report.summary
    if not s.terminators:
        return ["  Terminators: none (the line may stay unterminated)"]
    parts = []
    for t in s.terminators:
        parts.append(
            f"{quantity_text(t.resistance_ohm, 'Ω')}"
            + (f" + {quantity_text(t.capacitance_f, 'F')}" if t.capacitance_f else "")
            + f" at {t.position_m:g} m ({rating_text(t.power_rating_w)})"
        )
    return [f"  Terminators: {'; '.join(parts)}"]


def _bias_summary(report: PlanReport) -> list[str]:
    networks = report.summary.bias
    if not networks:
        return [f"  Failsafe bias: {report.summary.bias_note}"] if report.summary.bias_note else []
    with_terms = "with the terminators above" if report.summary.terminators else "with no terminators"
    parts = [
        f"{quantity_text(b.pull_up_ohm, 'Ω')} pull-up / {quantity_text(b.pull_down_ohm, 'Ω')} pull-down at "
        f"{b.position_m:g} m from {b.supply_v:g} V ({rating_text(b.power_rating_w)} each)"
        for b in networks
    ]
    b = networks[0]
    return [
        f"  Failsafe bias: {'; '.join(parts)}; every receiver that needs bias idles at >= "
        f"{quantity_text(b.idle_v, 'V')} ({quantity_text(b.idle_corner_v, 'V')} at the worst corner of the "
        f"tolerances) {with_terms}."
    ]


def rate_text(report: PlanReport) -> str:
    """The highest bit rate with the longest path the loss allows at any rate: both limits, never 'no rate'."""
    s = report.summary
    text = (
        f"{quantity_text(s.max_bit_rate_bps, 'bit/s')} for the longest path, {s.path_m:.4g} m; the cable's loss "
        f"allows at most {s.max_path_m:.4g} m at any rate"
    )
    return text + (f" ({s.rate_note})" if s.rate_note else "")


def capacity_line(report: PlanReport) -> str:
    return f"How many more receivers (on the advised plan): {report.capacity.text}"


def change_lines(report: PlanReport, indent: str = "  ") -> list[str]:
    """The advice's change list: what changes, from what to what, why, and what it re-checks."""
    advice = report.advice
    lines = []
    for i, c in enumerate(advice.changes, start=1):
        rules = f"; re-checked: {', '.join(c.rule_ids)}" if c.rule_ids else ""
        lines.append(f"{indent}{i}. {c.text[:1].upper() + c.text[1:]}.")
        lines.append(f"{indent}   from {c.before_text} to {c.after_text}: {c.why}{rules}")
    if not advice.changes:
        lines.append(f"{indent}No change: the plan's terminators and bias are already what Pairline advises.")
    if advice.unmet:
        lines.append(f"{indent}Cannot be met with terminators and bias alone:")
        for u in advice.unmet:
            where = f" ({', '.join(u.nodes)})" if u.nodes else ""
            lines.append(f"{indent}  - {u.rule_id}{where}: {u.text}")
    return lines


def advice_head(report: PlanReport) -> str:
    advice = report.advice
    counts = {v: sum(1 for f in advice.findings if f.verdict is v) for v in Verdict}
    return (
        f"Advised plan: {advice.verdict.value.upper()} after {len(advice.changes)} change(s) "
        f"({counts[Verdict.HOLDS]} holds, {counts[Verdict.TIGHT]} tight, {counts[Verdict.BREAKS]} breaks)"
    )


def report_text(report: PlanReport, path: str = "") -> str:
    """The readable report: the plan in one line, the verdict with how many more receivers fit, verdict per rule
    and per node, fixes, the advice's change list, the summary."""
    plan, bus = report.plan, report.bus
    out = [
        f"Pairline check: {plan.title or '(untitled plan)'}" + (f"  [{path}]" if path else ""),
        f"  {plan.standard.upper().replace('RS', 'RS-')}, {quantity_text(plan.bit_rate_bps, 'bit/s')}, trunk "
        f"{plan.trunk_length_m:g} m, {len(plan.nodes)} node(s); cable: {bus.cable.label}; driver: {bus.driver.label}",
        *branch_lines(plan),
        f"  {UNIT_LOAD_TEXT}.",
        "",
        *report_body(report, "Overall"),
        "",
        SAFETY_NOTE,
    ]
    text = "\n".join(out)
    return lengths_in_feet(text) if plan.display_units == "imperial" else text


def branch_lines(plan: BusPlan, indent: str = "  ") -> list[str]:
    """One line per branch: where it leaves the trunk, its length, and its nodes with their distances along it."""
    out = []
    for b in plan.branches:
        on = [f"'{n.name}' at {n.position_m:g} m" for n in plan.nodes if n.branch == b.name]
        out.append(
            f"{indent}branch '{b.name}': {b.length_m:g} m from the trunk at {b.junction_position_m:g} m; "
            + (", ".join(on) if on else "no node on it")
        )
    return out


def verdict_line(head: str, verdict: Verdict, findings: Sequence[Finding]) -> str:
    """ "Overall: HOLDS  (12 holds, 0 tight, 0 breaks)"."""
    counts = {v: sum(1 for f in findings if f.verdict is v) for v in Verdict}
    return (
        f"{head}: {verdict.value.upper()}  ({counts[Verdict.HOLDS]} holds, {counts[Verdict.TIGHT]} tight, "
        f"{counts[Verdict.BREAKS]} breaks)"
    )


def report_body(report: PlanReport, head: str) -> list[str]:
    """One bus's verdict line (headed `head`), how many more receivers fit, verdict per rule and per node, fixes,
    the advice's change list and the summary."""
    plan, s = report.plan, report.summary
    out = [
        verdict_line(head, report.verdict, report.findings),
        capacity_line(report),
        advice_head(report),
        "",
        "By rule",
    ]
    by_rule: dict[str, list[Finding]] = {}
    for f in report.findings:
        by_rule.setdefault(f.rule_id, []).append(f)
    for rule_id, group in by_rule.items():
        verdict = worst([f.verdict for f in group])
        per_node = [f for f in group if f.node is not None]
        whole = [f for f in group if f.node is None]
        label = f"  {rule_id}: {verdict.value}"
        if per_node:
            label += f" ({len(per_node)} node(s), {sum(f.verdict is not Verdict.HOLDS for f in per_node)} not holding)"
        out.append(label)
        for f in whole:
            out += finding_lines(f, "    ")
        for f in per_node:
            if f.verdict is not Verdict.HOLDS:
                out += finding_lines(f, "    ")
    out += ["", "By node"]
    names = [plan.driver.name] + [n.name for n in plan.nodes]
    holding = []
    for name in names:
        mine = [f for f in report.findings if f.node == name]
        if not mine:
            continue
        verdict = worst([f.verdict for f in mine])
        if verdict is Verdict.HOLDS:
            holding.append(name)
            continue
        notes = ", ".join(f"{f.rule_id} {f.verdict.value}" for f in mine if f.verdict is not Verdict.HOLDS)
        out.append(f"  {name}: {verdict.value} ({notes})")
    if holding:
        shown = ", ".join(holding) if len(holding) <= 12 else ", ".join(holding[:10]) + f", ... {holding[-1]}"
        out.append(f"  {len(holding)} node(s) hold every rule: {shown}")
    out += ["", "Advice (the plan as Pairline would build it, checked by the same rules; `pairline advise` writes it)"]
    out += change_lines(report)
    out += ["", "Summary (the advised plan)"]
    out += _terminator_summary(report)
    out += _bias_summary(report)
    out.append(f"  Highest bit rate the rules allow: {rate_text(report)}")
    if plan.standard == "rs422":
        spare = int(s.spare_unit_loads)
        out.append(
            f"  Spare receivers: {spare} (one RS-422 driver feeds at most 10)"
            if spare >= 0
            else f"  Spare receivers: none; {-spare} receiver(s) over the 10 one RS-422 driver feeds"
        )
    else:
        out.append(f"  Spare unit loads: {max(s.spare_unit_loads, 0.0):.3g}; {report.capacity.text}")
    if s.bom:
        out.append("  Bill of materials:")
        for item in s.bom:
            out.append(f"    {item.quantity} x {item.item}, {item.value}, {item.rating}: {item.note}")
    return out


# "<number> m" (cm, mm) as the engine writes a length; not m inside units such as mΩ/m, m·bit/s or 10^8 m.
_METRES_IN_TEXT = re.compile(r"(?<![\w.^/])" + METRIC_LENGTH)


def lengths_in_feet(text: str) -> str:
    """Every "<number> m" (cm, mm) in a report restated for an imperial plan: feet (or inches) first, the metric
    length in brackets."""
    return _METRES_IN_TEXT.sub(lambda m: length_text(metres_of(m), "imperial"), text)


# --- commands ---------------------------------------------------------------------------------------------


def run_check(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    try:
        path = str(sample_file(args.sample)) if args.sample else args.plan
        document = read_plan_document(path)
        plan = load_plan(document)
        report: PlanReport | NetworkReport = check_plan(plan) if plan.is_one_bus else check_network(plan)
    except UnknownSampleError as exc:
        problem = Problem("sample", "Sample bus", exc.name, {"choices": exc.allowed}, str(exc))
        if args.json:
            print(json.dumps(problems_envelope([problem]), indent=2, ensure_ascii=False), file=out)
        print(problems_text([problem]), file=err)
        return EXIT_INVALID
    except (PlanFileError, BusInputError) as exc:
        if args.json:
            print(json.dumps(problems_envelope(exc.problems), indent=2, ensure_ascii=False, default=str), file=out)
        print(problems_text(exc.problems), file=err)
        return EXIT_INVALID
    except Exception as exc:  # whatever else a file can do to the checker, it is still input that cannot be checked
        print(
            f"pairline check: {args.sample or args.plan} cannot be checked: {type(exc).__name__}: {exc}".splitlines()[
                0
            ],
            file=err,
        )
        return EXIT_INVALID
    from pairline.server.networktext import network_text  # it builds on this module's formats

    shown = args.sample or args.plan
    if args.json:
        data = report_to_dict(report) if isinstance(report, PlanReport) else network_to_dict(report)
        print(json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False), file=out)
    else:
        print(report_text(report, shown) if isinstance(report, PlanReport) else network_text(report, shown), file=out)
    return EXIT_BREAKS if report.verdict is Verdict.BREAKS else EXIT_OK


def run_samples(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """List the sample buses shipped with Pairline: name and title, one a line."""
    files = sample_files()
    width = max((len(path.stem) for path in files), default=0)
    for path in files:
        title = json.loads(path.read_text(encoding="utf-8")).get("title", "")
        print(f"{path.stem:<{width}}  {title}", file=out)
    print(f"\nCheck one with: pairline check --sample {files[0].stem if files else 'NAME'}", file=out)
    return EXIT_OK


def advise_text(report: PlanReport, path: str = "") -> str:
    """What `pairline advise` prints: the verdicts before and after, how many more receivers, the change list."""
    lines = [
        f"Pairline advice: {report.plan.title or '(untitled plan)'}" + (f"  [{path}]" if path else ""),
        f"  The plan as laid out: {report.verdict.value.upper()}",
        f"  {advice_head(report)}",
        f"  {capacity_line(report)}",
        "",
        "Changes",
        *change_lines(report),
    ]
    text = "\n".join(lines)
    return lengths_in_feet(text) if report.plan.display_units == "imperial" else text


def run_advise(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Write the advised plan (to -o, else standard output) and print the change list (to standard output when
    the plan goes to a file, else to standard error, so the plan can be piped on)."""
    from pairline.server.networktext import network_advise_text  # it builds on this module's formats

    try:
        plan = load_plan(read_plan_document(args.plan))
        report: PlanReport | NetworkReport = check_plan(plan) if plan.is_one_bus else check_network(plan)
    except (PlanFileError, BusInputError) as exc:
        print(problems_text(exc.problems), file=err)
        return EXIT_INVALID
    if isinstance(report, PlanReport):
        advised, text, verdict = report.advice.plan, advise_text(report, args.plan), report.advice.verdict
    else:
        advised, text, verdict = advised_plan(report), network_advise_text(report, args.plan), advised_verdict(report)
    document = json.dumps(plan_to_dict(advised), indent=2, ensure_ascii=False) + "\n"
    if args.output:
        try:
            Path(args.output).write_text(document, encoding="utf-8")
        except OSError as exc:
            print(f"pairline advise: cannot write {args.output}: {exc.strerror or type(exc).__name__}.", file=err)
            return EXIT_INVALID
        print(text, file=out)
        print(f"\nAdvised plan written to {args.output}.", file=out)
    else:
        print(document, end="", file=out)
        print(text, file=err)
    return EXIT_BREAKS if verdict is Verdict.BREAKS else EXIT_OK


def run_serve(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Serve the web planner until interrupted; options override PAIRLINE_HOST, PAIRLINE_PORT, PAIRLINE_DB."""
    from pairline.server.serve import run, settings_from_env
    from pairline.server.store import StoreError, target_for_people

    try:
        settings = settings_from_env(args.host, args.port, args.db)
        where = target_for_people(settings.db)
        print(f"Pairline planner on http://{settings.host}:{settings.port}/ (plans in {where})", file=out)
        run(settings)
    except (ValueError, StoreError) as exc:
        print(f"pairline serve: {exc}", file=err)
        return EXIT_INVALID
    return EXIT_OK


def run_seed(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Bring the database's schema up to date and load the sample buses: once per database, before the workers."""
    from pairline.server.serve import db_from_env
    from pairline.server.store import StoreError, open_store

    try:
        store = open_store(db_from_env(args.db))
    except (ValueError, StoreError) as exc:
        print(f"pairline seed: {exc}", file=err)
        return EXIT_INVALID
    try:
        count = seed_samples(store)
        print(f"{count} sample buses in {store.target} (schema version {store.schema_version()})", file=out)
    finally:
        store.close()
    return EXIT_OK


Command = Callable[[argparse.Namespace, TextIO, TextIO], int]
DB_HELP = "SQLite file or postgresql://user@host/database URL for saved plans (default ./pairline.db)"


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="pairline", description="Plan and check RS-485 / RS-422 multidrop buses.")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    check = commands.add_parser(
        "check",
        help="check a bus plan file and print every rule's verdict",
        description="Check a bus plan. Exit status 0: nothing breaks; 1: a rule breaks; 2: invalid input.",
    )
    source = check.add_mutually_exclusive_group(required=True)
    source.add_argument("plan", nargs="?", metavar="PLAN.json", help="the bus plan file ('-' reads standard input)")
    source.add_argument("--sample", metavar="NAME", help="a sample bus shipped with Pairline (see: pairline samples)")
    check.add_argument("--json", action="store_true", help="print the full report as JSON")
    check.set_defaults(run=run_check)
    samples = commands.add_parser("samples", help="list the sample buses shipped with Pairline")
    samples.set_defaults(run=run_samples)
    advise = commands.add_parser(
        "advise",
        help="write the plan as Pairline advises it and list the changes",
        description="Build the advised plan (terminators and bias chosen together, checked by every rule) and list "
        "what changes, from what to what, and why. Exit status 0: the advised plan breaks no rule; 1: some rule "
        "cannot be met with terminators and bias alone (said why); 2: invalid input. Without -o the advised plan "
        "goes to standard output and the change list to standard error.",
    )
    advise.add_argument("plan", metavar="PLAN.json", help="the bus plan file ('-' reads standard input)")
    advise.add_argument("-o", "--output", metavar="OUT.json", help="write the advised plan to this file")
    advise.set_defaults(run=run_advise)
    serve = commands.add_parser(
        "serve",
        help="run the web planner (loopback only unless --host says otherwise)",
        description="Serve the web planner. Options fall back to PAIRLINE_HOST, PAIRLINE_PORT and PAIRLINE_DB, "
        "then to 127.0.0.1, 8485 and ./pairline.db.",
    )
    serve.add_argument("--host", default=None, help="interface to listen on (default 127.0.0.1)")
    serve.add_argument("--port", type=int, default=None, help="TCP port (default 8485)")
    serve.add_argument("--db", default=None, metavar="PATH|URL", help=DB_HELP)
    serve.set_defaults(run=run_serve)
    seed = commands.add_parser(
        "seed",
        help="create or upgrade the database and load the sample buses (once, before several workers start)",
        description="Apply the database's schema migrations and load the sample buses. --db falls back to "
        "PAIRLINE_DB, then to ./pairline.db.",
    )
    seed.add_argument("--db", default=None, metavar="PATH|URL", help=DB_HELP)
    seed.set_defaults(run=run_seed)
    from pairline.server.fieldcli import add_field_command  # it builds on this module's readers and formats

    add_field_command(commands)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the `pairline` command; returns the exit status."""
    args = build_parser().parse_args(argv)
    keep_freed_memory()  # the commands check in this process (serve's check workers set it themselves)
    run: Command = args.run
    return run(args, sys.stdout, sys.stderr)


if __name__ == "__main__":
    sys.exit(main())
