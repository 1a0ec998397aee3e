"""Benchmark: server time for the checked-plan page of a 32-receiver bus, median of 50 requests (target < 150 ms).

Run: python tests/bench_web.py   (from the repository root). Prints the median and spread; exits 0 always,
since speed is reported, not asserted.
"""

import statistics
import tempfile
import time
import warnings
from pathlib import Path

with warnings.catch_warnings():
    warnings.filterwarnings("ignore", message=".*httpx2.*")
    from fastapi.testclient import TestClient

from pairline.server.app import create_app

REQUESTS = 50
TARGET_S = 0.150


def thirty_two_receiver_plan() -> dict:
    """An invented 32-receiver RS-485 bus: 600 m trunk, a node every 18 m, short stubs, both ends terminated."""
    return {
        "title": "Benchmark: 32 receivers on 600 m",
        "standard": "rs485",
        "bit_rate_bps": 115_200,
        "trunk_length_m": 600.0,
        "driver": {"name": "head-end", "position_m": 0.0, "transceiver": "slew-2500ns"},
        "nodes": [
            {"name": f"rx-{k + 1:02d}", "position_m": 18.0 * (k + 1) + 12.0, "stub_length_m": 0.5, "unit_loads": 0.5}
            for k in range(32)
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0},
            {"position_m": 600.0, "resistance_ohm": 120.0},
        ],
        "bias": {"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0},
    }


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app(Path(tmp) / "bench.db", load_samples=False)
        with TestClient(app) as client:
            saved = client.post("/api/plans", json=thirty_two_receiver_plan())
            saved.raise_for_status()
            url = saved.json()["url"]
            client.get(url).raise_for_status()  # warm-up: imports, template compilation
            times = []
            for _ in range(REQUESTS):
                start = time.perf_counter()
                resp = client.get(url)
                times.append(time.perf_counter() - start)
                resp.raise_for_status()
    median = statistics.median(times)
    print(
        f"checked-plan page, 32 receivers: median {median * 1e3:.1f} ms over {REQUESTS} requests "
        f"(min {min(times) * 1e3:.1f}, max {max(times) * 1e3:.1f}); target < {TARGET_S * 1e3:.0f} ms: "
        f"{'met' if median < TARGET_S else 'NOT met'}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
