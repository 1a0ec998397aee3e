"""Advice benchmark (a script, not a test): python tests/bench_advise.py

Times `pairline advise PLAN.json -o OUT.json` (through the command's own entry point, file in and file out) on
invented buses of 32 and 128 receivers, each in two forms:
- "needs advice": no bias network and a 100 Ohm terminator at one end, so the advice sizes a bias and a
  terminator together, re-checks every fix, checks the advised plan in full (a second simulation) and counts
  how many more receivers fit;
- "with bias": the same bus with a 560 Ohm bias and 120 Ohm at both ends, which the advice leaves as it is on
  32 receivers (one simulation); on 128 the bias takes the budget over 32 UL and no bias fits, which the
  advice says (exit 1: failsafe receivers).
Targets: 32 receivers under 1 s, 128 receivers under 3 s. Each time is the best of a few runs (other work on the
machine only slows a run down).
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import platform
import re
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np
from pairline.server.cli import main as pairline


def plan_doc(n_receivers: int, *, by_the_book: bool) -> dict[str, Any]:
    """Receivers of 1/8 UL spread over the trunk (3 m each, 60 m at least) on 30 cm drops, 115.2 kbit/s."""
    trunk_m = max(60.0, 3.0 * n_receivers)
    positions = np.linspace(trunk_m / n_receivers, trunk_m, n_receivers)
    doc: dict[str, Any] = {
        "title": f"{n_receivers} receivers",
        "standard": "rs485",
        "bit_rate_bps": 115_200.0,
        "trunk_length_m": trunk_m,
        "driver": {"name": "head", "position_m": 0.0, "stub_length_m": 0.3, "transceiver": "slew-2500ns"},
        "nodes": [
            {"name": f"rx-{i + 1:03d}", "position_m": float(p), "stub_length_m": 0.3, "unit_loads": 0.125}
            for i, p in enumerate(positions)
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0 if by_the_book else 100.0},
            {"position_m": trunk_m, "resistance_ohm": 120.0},
        ],
    }
    if by_the_book:
        doc["bias"] = {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0}
    return doc


def advise_once(plan_path: Path, out_path: Path) -> tuple[float, int, str]:
    """One `pairline advise` run: (seconds, exit status, the printed change list)."""
    printed = io.StringIO()
    t0 = time.perf_counter()
    with contextlib.redirect_stdout(printed):
        status = pairline(["advise", str(plan_path), "-o", str(out_path)])
    return time.perf_counter() - t0, status, printed.getvalue()


def machine() -> str:
    model = "unknown CPU"
    with contextlib.suppress(OSError):
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    return f"{model}; nproc {os.cpu_count()}; Python {platform.python_version()}; numpy {np.__version__}"


def main() -> None:
    print(f"machine: {machine()}")
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    targets = {32: 1.0, 128: 3.0}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for n, target_s in targets.items():
            for by_the_book in (False, True):
                plan_path = folder / f"plan-{n}-{by_the_book}.json"
                plan_path.write_text(json.dumps(plan_doc(n, by_the_book=by_the_book)), encoding="utf-8")
                runs = [advise_once(plan_path, folder / "out.json") for _ in range(3)]
                best = min(t for t, _, _ in runs)
                status, printed = runs[0][1], runs[0][2]
                changes = len(re.findall(r"^\s+\d+\. ", printed, flags=re.MULTILINE))
                label = "with bias" if by_the_book else "needs advice"
                verdict = "within" if best < target_s else "OVER"
                print(
                    f"{n:4d} receivers, {label:13s}: {best * 1e3:7.0f} ms "
                    f"(target < {target_s * 1e3:.0f} ms, {verdict}); exit {status}, {changes} change(s)"
                )


if __name__ == "__main__":
    main()
