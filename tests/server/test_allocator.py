"""A check process keeps the memory it frees for its next arrays (server.allocator)."""

import platform
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
# Counts the pages a process faults in over three checks of a sample bus, after one to warm up.
FAULTS = """
import json, resource, sys
from pairline.server.allocator import keep_freed_memory
if sys.argv[1] == "keep":
    assert keep_freed_memory()
from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan
from pairline.server.samples import sample_file
plan = load_plan(json.loads(sample_file("vineyard-row-probes").read_text()))
check_plan(plan, simulate_advice=False)
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(3):
    check_plan(plan, simulate_advice=False)
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def page_faults(mode: str) -> int:
    out = subprocess.run(
        [sys.executable, "-c", FAULTS, mode], cwd=ROOT, capture_output=True, text=True, check=True, timeout=120
    )
    return int(out.stdout.split()[-1])


@pytest.mark.skipif(platform.libc_ver()[0] != "glibc", reason="mallopt is glibc's")
def test_checks_after_the_first_reuse_the_pages_it_touched():
    # Each check frees and makes again thousands of arrays of up to a few MB; with glibc's defaults every one
    # above its mmap or trim threshold costs fresh pages.
    default, kept = page_faults("default"), page_faults("keep")
    assert kept < default / 10, (default, kept)
