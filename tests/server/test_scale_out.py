"""Scale-out: two server processes on one PostgreSQL database take 500 saves at once, and every save that was
acknowledged reads back identical through either process. Each server listens on a Unix socket of its own."""

import json
import os
import socket
import subprocess
import sys
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import httpx
import pytest
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.samples import sample_file
from pairline.server.store import open_store

pytestmark = pytest.mark.slow

SAVES = 500


def start_server(socket_path: Path, database_url: str, log_path: Path) -> subprocess.Popen:
    env = os.environ | {"PAIRLINE_DB": database_url}
    command = [sys.executable, "-m", "uvicorn", "--factory", "pairline.server.serve:app_from_env"]
    command += ["--uds", str(socket_path), "--log-level", "warning"]
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


def test_two_processes_on_one_database_keep_every_acknowledged_save(postgres_url, tmp_path):
    template = plan_to_dict(load_plan(json.loads(sample_file("vineyard-row-probes").read_text(encoding="utf-8"))))
    open_store(postgres_url).close()  # migrate once here, as `pairline seed` would before the workers start
    servers, clients = [], []
    try:
        for name in ("a", "b"):
            socket_path, log_path = tmp_path / f"{name}.sock", tmp_path / f"{name}.log"
            servers.append((start_server(socket_path, postgres_url, log_path), log_path))
            transport = httpx.HTTPTransport(uds=str(socket_path))
            clients.append(httpx.Client(transport=transport, base_url="http://pairline", timeout=60.0))
        for name, (process, log_path) in zip(("a", "b"), servers, strict=True):
            wait_until_up(tmp_path / f"{name}.sock", process, log_path)

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
    finally:
        for client in clients:
            client.close()
        for process, _ in servers:
            process.terminate()
        for process, _ in servers:
            process.wait(timeout=30)
