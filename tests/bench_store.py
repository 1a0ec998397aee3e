"""Benchmark: save and read back a 32-receiver plan, SQLite against PostgreSQL on the same machine.

Both stores keep their durable defaults: SQLite in WAL mode with synchronous=FULL, PostgreSQL with fsync and
synchronous commit on, reached through its Unix socket from a pool. A throwaway PostgreSQL cluster is started
for the run (Debian's postgresql server programs; as root the server runs as the `postgres` user).

Run: python -m tests.bench_store   (from the repository root). Prints medians and the ratio against the target
(PostgreSQL within 2x of SQLite); exits 0 always, since speed is reported, not asserted.
"""

import platform
import statistics
import tempfile
import time
from pathlib import Path

from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.store import PlanStore, open_store

from tests.bench_web import thirty_two_receiver_plan
from tests.postgres_cluster import Cluster, missing_reason

ROUNDS = 300
WARM_UP = 30
TARGET_RATIO = 2.0


def save_and_read_s(store: PlanStore, plan: dict) -> list[float]:
    """Seconds per save-then-read, one value per round."""
    times = []
    for n in range(WARM_UP + ROUNDS):
        start = time.perf_counter()
        plan_id = store.save_plan(plan, engine_version="bench", client="192.0.2.10")
        saved = store.get_plan(plan_id)
        elapsed = time.perf_counter() - start
        assert saved is not None and saved.plan == plan
        if n >= WARM_UP:
            times.append(elapsed)
    return times


def describe(name: str, times: list[float]) -> float:
    median = statistics.median(times)
    p90 = statistics.quantiles(times, n=10)[-1]
    print(f"{name:<11} median {median * 1e3:6.2f} ms   p90 {p90 * 1e3:6.2f} ms   ({len(times)} rounds)")
    return median


def main() -> None:
    plan = plan_to_dict(load_plan(thirty_two_receiver_plan()))
    print(
        f"Save + read of a 32-receiver plan ({len(str(plan))} characters of JSON) on {platform.node()}, "
        f"{platform.processor() or platform.machine()}, Python {platform.python_version()}"
    )
    with tempfile.TemporaryDirectory() as folder:
        sqlite = open_store(Path(folder) / "bench.db")
        sqlite_s = describe("SQLite", save_and_read_s(sqlite, plan))
    reason = missing_reason()
    if reason:
        print(f"PostgreSQL not measured: {reason}")
        return
    cluster = Cluster(durable=True)
    cluster.start()
    try:
        postgres = open_store(cluster.create_database())
        postgres_s = describe("PostgreSQL", save_and_read_s(postgres, plan))
        postgres.close()
    finally:
        cluster.stop()
    ratio = postgres_s / sqlite_s
    verdict = "within" if ratio <= TARGET_RATIO else "OVER"
    print(f"PostgreSQL / SQLite = {ratio:.2f} ({verdict} the {TARGET_RATIO:g}x target)")


if __name__ == "__main__":
    main()
