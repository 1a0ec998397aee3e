"""Scale-out: two server processes on one PostgreSQL database, each listening on a Unix socket of its own.

They take 500 saves at once, and every save that was acknowledged reads back identical through either process;
and they share what each would otherwise keep to itself: the results cache and the per-client save counts."""

import json
import os
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

import httpx
import pytest
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.samples import sample_file
from pairline.server.store import open_store

pytestmark = pytest.mark.slow

SAVES = 500


def sample_plan(name: str) -> dict:
    return plan_to_dict(load_plan(json.loads(sample_file(name).read_text(encoding="utf-8"))))


def start_server(socket_path: Path, database_url: str, log_path: Path, settings: dict[str, str]) -> subprocess.Popen:
    # One check worker each is plenty here; the socket peer is a trusted proxy, so X-Forwarded-For names the client.
    env = os.environ | {"PAIRLINE_DB": database_url, "PAIRLINE_CHECK_WORKERS": "1"} | settings
    command = [sys.executable, "-m", "uvicorn", "--factory", "pairline.server.serve:app_from_env"]
    command += ["--uds", str(socket_path), "--log-level", "warning", "--proxy-headers", "--forwarded-allow-ips", "*"]
    with log_path.open("wb") as log:
        return subprocess.Popen(command, env=env, stdout=log, stderr=subprocess.STDOUT)


def wait_until_up(socket_path: Path, process: subprocess.Popen, log_path: Path) -> None:
    """Wait until the server accepts connections (probed with a plain socket: httpx leaks one on a refusal)."""
    deadline = time.monotonic() + 60.0
    while time.monotonic() < deadline:
        if process.poll() is not None:
            pytest.fail(f"server exited with {process.returncode}: {log_path.read_text(errors='replace')}")
        with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as probe:
            try:
                probe.connect(str(socket_path))
                return
            except OSError:
                pass
        time.sleep(0.2)
    pytest.fail(f"server did not answer within 60 s: {log_path.read_text(errors='replace')}")


@contextmanager
def two_servers(
    database_url: str, folder: Path, settings: tuple[dict[str, str], dict[str, str]]
) -> Iterator[tuple[httpx.Client, httpx.Client]]:
    """Processes a and b on one database (migrated first, as `pairline seed` would), each with its own settings;
    yields an HTTP client for each."""
    open_store(database_url).close()
    servers, clients = [], []
    try:
        for name, extra in zip(("a", "b"), settings, strict=True):
            socket_path, log_path = folder / f"{name}.sock", folder / f"{name}.log"
            servers.append((start_server(socket_path, database_url, log_path, extra), log_path))
            transport = httpx.HTTPTransport(uds=str(socket_path))
            clients.append(httpx.Client(transport=transport, base_url="http://pairline", timeout=60.0))
        for name, (process, log_path) in zip(("a", "b"), servers, strict=True):
            wait_until_up(folder / f"{name}.sock", process, log_path)
        yield clients[0], clients[1]
    finally:
        for client in clients:
            client.close()
        for process, _ in servers:
            process.terminate()
        for process, _ in servers:
            process.wait(timeout=30)


def test_two_processes_on_one_database_keep_every_acknowledged_save(postgres_url, tmp_path):
    template = sample_plan("vineyard-row-probes")
    # Every save comes from one address (the socket has none): the quota must not be what refuses them.
    roomy = {"PAIRLINE_SAVES_PER_MINUTE": str(SAVES), "PAIRLINE_SAVES_PER_DAY": str(SAVES)}
    with two_servers(postgres_url, tmp_path, (roomy, roomy)) as clients:
        lock = threading.Lock()
        acknowledged: dict[str, dict] = {}

        def save(n: int) -> None:
            plan = template | {"title": f"Scale-out plan {n:03d}", "bit_rate_bps": 9600 + 100 * n}
            reply = clients[n % 2].post("/api/plans", json=plan)
            if reply.status_code == 201:
                with lock:
                    acknowledged[reply.json()["id"]] = plan

        with ThreadPoolExecutor(max_workers=8) as pool:
            list(pool.map(save, range(SAVES)))

        assert len(acknowledged) == SAVES  # no save was refused or lost on the way
        for plan_id, plan in acknowledged.items():
            for client in clients:
                reply = client.get(f"/api/plans/{plan_id}")
                assert reply.status_code == 200
                assert reply.json()["plan"] == plan


def test_two_processes_on_one_database_share_the_results_cache_and_the_save_quota(postgres_url, tmp_path):
    costly, cheap = sample_plan("vineyard-row-probes"), sample_plan("workshop-to-store-ground-offset")
    quota = {"PAIRLINE_SAVES_PER_MINUTE": "3"}
    # b's time limit is below the costly plan's estimated check time, so b can never check that plan itself.
    with two_servers(postgres_url, tmp_path, (quota, quota | {"PAIRLINE_CHECK_TIME_LIMIT_S": "0.1"})) as (a, b):
        saved = a.post("/api/plans", json=costly)
        assert saved.status_code == 201
        page = f"/plans/{saved.json()['id']}.json"
        assert b.get(page).status_code == 422  # refused before simulating: nothing in the cache yet
        checked = a.get(page)
        assert checked.status_code == 200
        from_cache = b.get(page)  # checked through a, so a hit through b
        assert from_cache.status_code == 200
        assert from_cache.content == checked.content

        # One client's saves spread over both processes count against one quota of 3 a minute.
        client, other = {"X-Forwarded-For": "198.51.100.23"}, {"X-Forwarded-For": "203.0.113.40"}
        for server in (a, a, b):
            assert server.post("/api/plans", json=cheap, headers=client).status_code == 201
        refused = b.post("/api/plans", json=cheap, headers=client)  # b itself has taken only one of them
        assert refused.status_code == 429
        assert 1 <= int(refused.headers["Retry-After"]) <= 60
        assert b.post("/api/plans", json=cheap, headers=other).status_code == 201  # other addresses go on

    store = open_store(postgres_url)
    try:
        # Each save kept the client's address, not the proxy's (the socket's, which has none).
        assert store.saves_since("198.51.100.23", datetime(2000, 1, 1, tzinfo=UTC)).saves == 3
        assert store.saves_since("203.0.113.40", datetime(2000, 1, 1, tzinfo=UTC)).saves == 1
    finally:
        store.close()
