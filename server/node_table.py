"""A node table pasted from a spreadsheet (or uploaded as CSV) into the editor's node rows.

Rows hold name, position, stub and unit loads, in that order, or in any order under a header row naming them
(any node column the editor has may be named: device class, may drive, ground offset, and the device's values
such as input C or isolated). Cells are tab-, semicolon- or comma-separated; a bare number is in the plan's
units, a header may name another ("Position (ft)"), and a cell may carry its own unit ("12 ft"). Every cell is
read the way the editor reads it, so a decimal comma means what it means there. Any problem is reported by its
row and column and nothing is placed in the table, so the pasted text comes back whole beside the messages.

New node columns reach the paste by their FieldSpec in `server.forms.NODE`; the positional order (for a table
without a header) is `POSITIONAL`.
"""

import csv
import io
import re
from dataclasses import dataclass

from pairline.engine.plan import Problem
from pairline.server.forms import NODE, FieldSpec, FormState
from pairline.server.quantities import KINDS, QuantityError, UnitSystem, parse_quantity

FIELD = "node_table"  # the text area's name; problems of the paste carry it as their field
POSITIONAL = ("name", "position_m", "stub_length_m", "device.unit_loads")
MAX_ROWS = 512
# Header words beyond each column's key and label.
ALIASES: dict[str, tuple[str, ...]] = {
    "name": ("node", "node name", "id"),
    "position_m": ("position", "pos", "distance", "at", "location", "position on trunk"),
    "stub_length_m": ("stub", "stub length", "drop", "drop length"),
    "branch": ("spur", "on branch"),
    "device.class_key": ("device", "device class", "class", "transceiver"),
    "may_drive": ("may drive", "drives", "talker"),
    "device.unit_loads": ("unit loads", "unit load", "ul", "load", "loads"),
    "ground_offset_v": ("ground offset", "offset"),
    "device.input_capacitance_f": ("input c", "input capacitance", "capacitance"),
    "device.isolated": ("isolated", "isolation"),
}
_YES = {"yes", "y", "true", "1"}
_NO = {"no", "n", "false", "0"}
_UNIT_IN_HEADER = re.compile(r"^(.*?)\s*[\(\[]\s*([^\)\]]*?)\s*[\)\]]\s*$")
_SPEC = {s.key: s for s in NODE}


@dataclass(frozen=True, slots=True)
class PastedTable:
    rows: list[dict[str, str]]  # cell text by node key, as the editor's inputs will hold it
    problems: list[Problem]


def _words(text: str) -> str:
    return " ".join(text.lower().replace("_", " ").replace("-", " ").split())


def _column_for(header: str) -> tuple[str | None, str]:
    """The node key a header cell names, and the unit it states in brackets ("" when none)."""
    m = _UNIT_IN_HEADER.match(header)
    name, unit = (m.group(1), m.group(2)) if m else (header, "")
    word = _words(name)
    for key, spec in _SPEC.items():
        field = key.rsplit(".", 1)[-1]
        names = {_words(field), _words(field.rsplit("_", 1)[0]), _words(spec.label), *ALIASES.get(key, ())}
        if word in names:
            return key, unit.strip()
    return None, ""


def _delimiter(text: str) -> str:
    if "\t" in text:
        return "\t"
    return ";" if ";" in text else ","


def _label(key: str) -> str:
    return _SPEC[key].label.lower()


def read_node_table(text: str, units: UnitSystem) -> PastedTable:
    """Rows of node cells from pasted text, or the problems that keep it out of the table."""
    delimiter = _delimiter(text)
    lines = [(n, row) for n, row in enumerate(csv.reader(io.StringIO(text.strip("\ufeff")), delimiter=delimiter), 1)]
    lines = [(n, [c.strip() for c in row]) for n, row in lines if any(c.strip() for c in row)]
    problems: list[Problem] = []
    if not lines:
        message = "paste a table first: one node per row (name, position, stub, unit loads)."
        return PastedTable([], [_problem(0, "", "", message)])
    columns: list[str | None] = list(POSITIONAL)
    header_units: dict[str, str] = {}
    first_line, first = lines[0]
    named = [_column_for(c) for c in first]
    if sum(1 for key, _ in named if key) >= min(2, len(first)):
        lines = lines[1:]
        columns = []
        for position, (cell, (key, unit)) in enumerate(zip(first, named, strict=True), 1):
            if key is None and cell:
                known = ", ".join(_label(k) for k in _SPEC)
                problems.append(
                    _problem(first_line, f"column {position}", cell, f"'{cell}' is not a node column; known: {known}.")
                )
            elif key in columns:
                problems.append(_problem(first_line, f"column {position}", cell, f"'{cell}' names a column twice."))
            columns.append(key)
            if key and unit:
                header_units[key] = unit
    if len(lines) > MAX_ROWS:
        problems.append(_problem(0, "", str(len(lines)), f"The table has {len(lines)} rows; at most {MAX_ROWS} fit."))
        return PastedTable([], problems)
    rows = []
    for line, cells in lines:
        if len(cells) > len(columns) and any(cells[len(columns) :]):
            extra = (
                "; in a comma-separated table a decimal comma splits a number: put such cells in quotes "
                "or separate cells with tabs or semicolons"
                if delimiter == ","
                else ""
            )
            problems.append(
                _problem(
                    line,
                    "",
                    delimiter.join(cells),
                    f"{len(cells)} cells, more than the {len(columns)} columns "
                    f"({', '.join(_label(k) for k in columns if k)}){extra}.",
                )
            )
            continue
        row = {}
        for key, cell in zip(columns, cells, strict=False):
            if key is None or not cell:
                continue
            row[key] = _with_unit(_yes_no(cell, _SPEC[key]), header_units.get(key, ""), _SPEC[key])
            problem = _cell_problem(line, key, row[key], units)
            if problem:
                problems.append(problem)
        if not row.get("name"):
            problems.append(_problem(line, _label("name"), "", "no name; every node needs one."))
        rows.append(row)
    return PastedTable([] if problems else rows, problems)


def _yes_no(cell: str, spec: FieldSpec) -> str:
    """A yes / no cell ("yes", "y", "1", "true" and their opposites) as the select's value."""
    if not spec.boolean:
        return cell
    word = cell.strip().lower()
    return "true" if word in _YES else "false" if word in _NO else cell


def _with_unit(cell: str, unit: str, spec: FieldSpec) -> str:
    """A bare number under a header that states its unit gets that unit written after it."""
    if unit and spec.kind and re.fullmatch(r"[-+]?[\d.,]+", cell):
        return f"{cell} {unit}"
    return cell


def _cell_problem(line: int, key: str, cell: str, units: UnitSystem) -> Problem | None:
    spec = _SPEC[key]
    if spec.choices:
        values = [value for value, _ in spec.choices]
        if cell not in values:
            return _problem(line, _label(key), cell, f"'{cell}' is not one of {', '.join(values)}.")
        return None
    if spec.kind is None:
        return None
    try:
        parse_quantity(cell, spec.kind, units, spec.bare)
    except QuantityError as exc:
        if exc.reason:
            return _problem(line, _label(key), cell, f"'{cell}': {exc.reason}.")
        unit = spec.unit_label(units) or KINDS[spec.kind].si_unit
        return _problem(line, _label(key), cell, f"'{cell}' is not a number; write a number in {unit or 'figures'}.")
    return None


def _problem(line: int, column: str, value: str, message: str) -> Problem:
    """A problem of the paste, placed by its row (line of the pasted text) and column: "Row 4, stub: ..."."""
    where = ", ".join(part for part in (f"Row {line}" if line else "", column) if part) or "Node table"
    return Problem(FIELD, where, value, {"columns": list(POSITIONAL)}, f"{where}: {message}")


def with_pasted_rows(state: FormState, filled: int, rows: list[dict[str, str]], replace: bool) -> FormState:
    """The editor with the pasted rows after its `filled` node rows (or instead of them); blank rows go."""
    start = 0 if replace else filled
    values = {k: v for k, v in state.values.items() if not _is_node_row(k, start)}
    for i, row in enumerate(rows[: MAX_ROWS - start], start):
        for spec in NODE:
            values[f"nodes.{i}.{spec.key}"] = row.get(spec.key, spec.choices[0][0] if spec.choices else "")
    values.pop(FIELD, None)
    state.values = values
    state.n_nodes = start + len(rows[: MAX_ROWS - start])
    state.problems = []
    return state


def _is_node_row(name: str, first_dropped: int) -> bool:
    parts = name.split(".")
    return len(parts) == 3 and parts[0] == "nodes" and parts[1].isdigit() and int(parts[1]) >= first_dropped
