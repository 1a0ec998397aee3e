"""JSON from outside (request bodies, pasted and uploaded plans, plan files), read defensively.

Nesting is measured before parsing, so a body of 50 000 brackets is refused without recursing; integers too
long for a float are read as floats (an absurd value the plan model then refuses with its range) instead of
tripping the interpreter's digit limit; NaN and Infinity, which JSON does not have, are refused, and so are
escapes of lone surrogates ("\\ud800"), which are no characters and could not be written back out as UTF-8.
"""

import json
import re
from typing import Any

import numpy as np

MAX_DEPTH = 16  # a bus plan nests 4 deep (plan, nodes, node, value)
LONGEST_EXACT_INT = 18  # digits; longer integers become floats

_STRINGS = re.compile(rb'"(?:[^"\\]|\\.)*"', re.DOTALL)
_NOT_BRACKETS = re.compile(rb"[^\[\]{}]+")


class JsonInputError(ValueError):
    """The text is not a JSON document this server reads; the message says why and where."""


def nesting_depth(raw: bytes) -> int:
    """The deepest nesting of arrays and objects in a JSON text (brackets inside strings do not count)."""
    brackets = np.frombuffer(_NOT_BRACKETS.sub(b"", _STRINGS.sub(b"", raw)), dtype=np.uint8)
    if brackets.size == 0:
        return 0
    opening = (brackets == ord("[")) | (brackets == ord("{"))
    return int(np.cumsum(np.where(opening, 1, -1)).max())


def _number(text: str) -> int | float:
    return int(text) if len(text.lstrip("-")) <= LONGEST_EXACT_INT else float(text)


def _not_json(name: str) -> Any:
    raise JsonInputError(f"{name} is not a number JSON allows; write a finite number")


def load_json(text: str | bytes, max_depth: int = MAX_DEPTH) -> Any:
    """Parse one JSON document. Raises JsonInputError naming what is wrong (and where, for syntax errors)."""
    raw = text.encode("utf-8", errors="surrogatepass") if isinstance(text, str) else text
    depth = nesting_depth(raw)
    if depth > max_depth:
        raise JsonInputError(f"the JSON nests {depth} levels deep; a bus plan needs 4, at most {max_depth} are read")
    try:
        doc = json.loads(raw, parse_int=_number, parse_constant=_not_json)
    except json.JSONDecodeError as exc:
        raise JsonInputError(f"it is not valid JSON ({exc.msg} at line {exc.lineno}, column {exc.colno})") from None
    except UnicodeDecodeError:
        raise JsonInputError("it is not UTF-8 text") from None
    try:
        json.dumps(doc, ensure_ascii=False).encode("utf-8")
    except UnicodeEncodeError as exc:
        bad = exc.object[exc.start : exc.end].encode("utf-8", errors="backslashreplace").decode("ascii")
        raise JsonInputError(f"it holds {bad}, half of a surrogate pair, which is no character") from None
    return doc
