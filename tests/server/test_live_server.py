"""A real server under load: cheap pages stay fast while checks fill every worker, and a kill -9 in the middle
of saves loses no acknowledged plan."""

import http.client
import json
import os
import signal
import subprocess
import sys
import threading
import time

from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.app import create_app
from pairline.server.settings import Settings

from tests.bench_cost import invented_plan
from tests.server.live import free_port, live_server
from tests.server.test_checks_bounded import costliest_plan
from tests.server.test_pages import PLAN_DOC


def slow_plan(title: str) -> dict:
    """An invented 32-node bus, 4 km long, some nodes on 100 m stubs: accepted by the estimate, several seconds
    of simulation."""
    return invented_plan(32, 0, 100e-9, 115_200.0, 0, 2) | {"title": title}


def request(host: str, port: int, method: str, path: str, body: dict | None = None) -> tuple[int, bytes, float]:
    connection = http.client.HTTPConnection(host, port, timeout=120)
    try:
        start = time.perf_counter()
        headers = {"content-type": "application/json"} if body is not None else {}
        connection.request(method, path, body=json.dumps(body) if body is not None else None, headers=headers)
        resp = connection.getresponse()
        data = resp.read()
        return resp.status, data, time.perf_counter() - start
    finally:
        connection.close()


def test_cheap_pages_answer_within_a_second_while_every_worker_checks_a_costly_plan(tmp_path):
    app = create_app(tmp_path / "plans.db", load_samples=False, settings=Settings(check_time_limit_s=6.0))
    with live_server(app) as (host, port):
        status, body, _ = request(host, port, "POST", "/api/plans", PLAN_DOC)
        saved = json.loads(body)["url"]
        paths = ("/", "/index.json", saved, saved + ".json", "/plans/new")
        assert all(request(host, port, "GET", path)[0] == 200 for path in paths)  # checked once, now cached
        # two saved plans whose first view is a full check of several seconds, one for each worker
        slow = [json.loads(request(host, port, "POST", "/api/plans", slow_plan(t))[1])["url"] for t in ("a", "b")]
        heavy = []
        threads = [threading.Thread(target=lambda u=u: heavy.append(request(host, port, "GET", u))) for u in slow]
        for t in threads:
            t.start()
        time.sleep(1.0)  # both workers are simulating now
        cheap = [request(host, port, "GET", path) for path in paths]
        refused = request(host, port, "POST", "/api/check", costliest_plan())
        for t in threads:
            t.join()
    # generous bounds: the point is seconds of simulation on every worker against pages that need none
    assert all(status == 200 for status, _, _ in cheap)
    assert max(elapsed for _, _, elapsed in cheap) < 1.0, [
        (p, round(c[2], 2)) for p, c in zip(paths, cheap, strict=True)
    ]
    assert refused[0] == 422 and refused[2] < 1.0  # refused from its estimate, before simulating
    assert all(status in (200, 422) for status, _, _ in heavy)
    assert min(elapsed for _, _, elapsed in heavy) > 2.0


def _serve(port: int, db: str) -> subprocess.Popen:
    env = dict(os.environ, PAIRLINE_SAVES_PER_MINUTE="100000", PAIRLINE_SAVES_PER_DAY="1000000")
    code = f"from pairline.server.cli import main; main(['serve', '--port', '{port}', '--db', {db!r}])"
    process = subprocess.Popen(
        [sys.executable, "-c", code], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
    )
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            if request("127.0.0.1", port, "GET", "/index.json")[0] == 200:
                return process
        except OSError:
            time.sleep(0.1)
    process.kill()
    raise RuntimeError("the server did not start")


def test_a_kill_9_during_saves_loses_no_acknowledged_plan(tmp_path):
    db = str(tmp_path / "plans.db")
    port = free_port()
    server = _serve(port, db)
    acknowledged: dict[str, dict] = {}
    lock = threading.Lock()

    def save_many(worker: int) -> None:
        for k in range(200):
            doc = PLAN_DOC | {"title": f"crash test {worker}-{k}"}
            try:
                status, body, _ = request("127.0.0.1", port, "POST", "/api/plans", doc)
            except (OSError, http.client.HTTPException):
                return  # the server is gone, perhaps halfway through an answer
            if status == 201:
                with lock:
                    acknowledged[json.loads(body)["id"]] = doc

    threads = [threading.Thread(target=save_many, args=(w,)) for w in range(4)]
    for t in threads:
        t.start()
    while len(acknowledged) < 100:
        time.sleep(0.01)
    os.kill(server.pid, signal.SIGKILL)
    server.wait()
    for t in threads:
        t.join()
    server = _serve(port, db)
    try:
        for plan_id, doc in acknowledged.items():
            status, body, _ = request("127.0.0.1", port, "GET", f"/api/plans/{plan_id}")
            assert status == 200
            assert json.loads(body)["plan"] == plan_to_dict(load_plan(doc))
    finally:
        server.kill()
        server.wait()
