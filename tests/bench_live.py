"""Benchmark: server time of POST /api/check for a 32-receiver plan, the request the editor's live verdict sends
(target: median < 60 ms).

Run: python tests/bench_live.py   (from the repository root). Each request checks a slightly different plan (one
node moved by a centimetre), as typing makes it, so no answer can come from a cache. Server time is measured
inside the app, from the request's arrival to the last byte of the answer; the client's own time is shown
beside it. Prints the numbers and exits 0 always: speed is reported, not asserted.
"""

import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

with warnings.catch_warnings():
    warnings.filterwarnings("ignore", message=".*httpx2.*")
    from fastapi.testclient import TestClient

from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.allocator import keep_freed_memory
from pairline.server.app import create_app
from pairline.server.forms import form_from_plan
from starlette.types import ASGIApp, Message, Receive, Scope, Send

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run as a script: the repository root
from tests.bench_web import thirty_two_receiver_plan  # noqa: E402

REQUESTS = 40
TARGET_S = 0.060


class ServerTimer:
    """ASGI wrapper recording each HTTP request's time inside the app."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app
        self.times_s: list[float] = []

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        start = time.perf_counter()

        async def timed_send(message: Message) -> None:
            await send(message)
            if message["type"] == "http.response.body" and not message.get("more_body"):
                self.times_s.append(time.perf_counter() - start)

        await self.app(scope, receive, timed_send)


def moved(plan: dict, k: int) -> dict:
    nodes = [dict(n) for n in plan["nodes"]]
    nodes[k % len(nodes)]["position_m"] += 0.01 * (k + 1)
    return plan | {"nodes": nodes}


def measure(client: TestClient, timer: ServerTimer, bodies: list[dict]) -> tuple[list[float], list[float]]:
    client.post("/api/check", json=bodies[0]).raise_for_status()  # warm-up: imports, first solve
    timer.times_s.clear()
    wall = []
    for body in bodies[1:]:
        start = time.perf_counter()
        client.post("/api/check", json=body).raise_for_status()
        wall.append(time.perf_counter() - start)
    return timer.times_s[:], wall


def report(name: str, server_s: list[float], wall_s: list[float]) -> None:
    p50 = statistics.median(server_s)
    p90 = statistics.quantiles(server_s, n=10)[-1]
    print(
        f"{name}: server p50 {p50 * 1e3:.1f} ms, p90 {p90 * 1e3:.1f} ms (min {min(server_s) * 1e3:.1f}, "
        f"max {max(server_s) * 1e3:.1f}); client p50 {statistics.median(wall_s) * 1e3:.1f} ms over "
        f"{len(server_s)} requests; target p50 < {TARGET_S * 1e3:.0f} ms: {'met' if p50 < TARGET_S else 'NOT met'}"
    )


def main() -> int:
    keep_freed_memory()  # as the check workers and the command line run checks (server.allocator)
    plan = thirty_two_receiver_plan()
    with tempfile.TemporaryDirectory() as tmp:
        timer = ServerTimer(create_app(Path(tmp) / "bench.db", load_samples=False))
        with TestClient(timer) as client:
            plans = [moved(plan, k) for k in range(REQUESTS + 1)]
            report("POST /api/check, plan JSON, 32 receivers", *measure(client, timer, plans))
            # other moves than the plans above, or every answer would come from the cache
            others = [moved(plan, REQUESTS + 1 + k) for k in range(REQUESTS + 1)]
            forms = [{"form": form_from_plan(plan_to_dict(load_plan(p))).values} for p in others]
            report("POST /api/check, editor fields, 32 receivers", *measure(client, timer, forms))
    quick_s, engine_s = [], []
    for p in plans[1:]:
        start = time.perf_counter()
        check_plan(p, simulate_advice=False)  # what POST /api/check runs (server.results.quick_check)
        quick_s.append(time.perf_counter() - start)
        start = time.perf_counter()
        check_plan(p)
        engine_s.append(time.perf_counter() - start)
    print(f"of which the engine's quick check_plan alone: p50 {statistics.median(quick_s) * 1e3:.1f} ms")
    print(f"the engine's full check_plan (a saved plan's page): p50 {statistics.median(engine_s) * 1e3:.1f} ms")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
