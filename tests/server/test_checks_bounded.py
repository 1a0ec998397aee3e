"""Checks run in bounded worker processes; costly plans are refused before simulating; results are cached."""

import json
import threading
import time

import numpy as np
import pytest
from pairline.engine.plan import load_plan
from pairline.server.app import create_app
from pairline.server.cost import check_work, cost_problems, estimated_check_s
from pairline.server.settings import Settings
from pairline.server.workers import CheckOverLimit, CheckPool, PoolBusy

from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html
from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC, assert_problem

FAST_DEVICE = {"class_key": None, "rise_time_s": 0.5e-9, "open_circuit_v": 5.0, "source_ohm": 30.0}


def costliest_plan() -> dict:
    """The most the plan model accepts of everything that makes a check slow: 512 nodes of which 32 may drive,
    0.5 ns edges, 50 bit/s, a 512-bit pattern, 16 RC terminators, on the longest trunk."""
    trunk_m = 4000.0
    return {
        "title": "Every limit at once",
        "standard": "rs485",
        "bit_rate_bps": 50.0,
        "trunk_length_m": trunk_m,
        "format_version": 2,
        "driver": {"name": "head", "device": FAST_DEVICE},
        "nodes": [
            {
                "name": f"n{k}",
                "position_m": trunk_m * (k + 1) / 512,
                "stub_length_m": 100.0 if k % 7 == 0 else 1.0,
                "device": FAST_DEVICE | {"unit_loads": 0.0625},
                "may_drive": k < 32,
            }
            for k in range(512)
        ],
        "terminations": [
            {"position_m": trunk_m * k / 15, "kind": "rc", "resistance_ohm": 120.0, "capacitance_f": 1e-9}
            for k in range(16)
        ],
        "test_pattern": "01101001" * 64,
    }


def costly_plan(nodes: int = 256) -> dict:
    """The costliest plan cut to a few nodes, spread over the same trunk: over the limit, but each of fewer bits,
    fewer transceivers or fewer nodes alone brings its estimate within it."""
    doc = costliest_plan()
    doc["nodes"] = [node | {"position_m": 4000.0 * (k + 1) / nodes} for k, node in enumerate(doc["nodes"][:nodes])]
    return doc


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", load_samples=False)
    with TestClient(app) as c:
        yield c


def no_worker(*args, **kwargs):
    raise AssertionError("a cached result must not start a check")


# --- cost, refused before simulating ------------------------------------------------------------------------


def test_the_costliest_plan_is_refused_before_simulating_naming_what_to_change(client, monkeypatch):
    monkeypatch.setattr(client.app.state.pool, "run", no_worker)
    resp = client.post("/api/check", json=costliest_plan())
    head = assert_problem(resp, field="")
    assert head["allowed"] == {"max": 30.0, "unit": "s"} and "30 s" in head["message"]
    fields = {p["field"]: p for p in resp.json()["problems"]}
    assert fields["nodes"]["allowed"]["max_length"] < 512
    fields = {p["field"]: p for p in client.post("/api/check", json=costly_plan()).json()["problems"]}
    assert fields["test_pattern"]["value"] == 512 and fields["test_pattern"]["allowed"]["max_length"] < 512
    assert fields["nodes.0.may_drive"]["value"] == 32 and fields["nodes.0.may_drive"]["allowed"]["max"] < 32
    assert fields["nodes"]["allowed"]["max_length"] < 256
    # the editor shows the same refusal as form errors beside the inputs, keeping what was typed
    saved = client.post("/api/plans", json=costly_plan())
    assert_problem(saved, field="test_pattern")


def test_each_suggested_change_alone_brings_the_estimate_within_the_limit():
    plan = load_plan(costly_plan())
    work = check_work(plan)
    limit_s = 30.0
    problems = {p.field: p for p in cost_problems(plan, limit_s)}
    fewer_bits = dict(costly_plan(), test_pattern="01" * (problems["test_pattern"].allowed["max_length"] // 2))
    assert estimated_check_s(check_work(load_plan(fewer_bits))) <= limit_s
    most = problems["nodes.0.may_drive"].allowed["max"]
    doc = costly_plan()
    for k, node in enumerate(doc["nodes"]):
        node["may_drive"] = k < most
    assert estimated_check_s(check_work(load_plan(doc))) <= limit_s
    doc["nodes"][most]["may_drive"] = True
    assert estimated_check_s(check_work(load_plan(doc))) > limit_s  # one more would not fit
    assert estimated_check_s(work) > limit_s


def test_the_estimate_grows_with_each_thing_that_makes_a_check_slow():
    base = load_plan(PLAN_DOC | {"bit_rate_bps": 115_200})
    work = check_work(base)
    cost = estimated_check_s(work)
    import dataclasses

    for change in (
        {"transceivers": 1},
        {"receivers": work.receivers * 4},
        {"pattern_bits": work.pattern_bits * 4},
        {"edge_s": work.edge_s / 10, "rise_time_s": work.rise_time_s / 10},
    ):
        assert estimated_check_s(dataclasses.replace(work, **change)) > cost


def test_every_sample_bus_is_estimated_well_within_the_default_limit():
    from pairline import data_dir

    for path in sorted(data_dir("sample_buses").glob("*.json")):
        plan = load_plan(json.loads(path.read_text(encoding="utf-8")))
        assert cost_problems(plan, Settings().check_time_limit_s) == [], path.name


# --- the worker pool ---------------------------------------------------------------------------------------


def test_a_job_over_its_time_or_memory_limit_is_stopped_and_the_pool_carries_on():
    pool = CheckPool(workers=1, time_limit_s=0.5, memory_limit_mb=64, queue_limit=0)
    try:
        with pytest.raises(CheckOverLimit) as slow:
            pool.run(time.sleep, 30.0)
        assert slow.value.limit == "time"
        with pytest.raises(CheckOverLimit) as big:
            pool.run(np.ones, 10**9)  # 8 GB of float64
        assert big.value.limit == "memory"
        assert pool.run(sum, [1, 2, 3]) == 6
    finally:
        pool.close()


def test_a_check_that_runs_past_the_limit_is_a_422_and_its_refusal_is_remembered(tmp_path, monkeypatch):
    # the estimate lets this 5-node plan through, but a 50 ms limit stops any real check
    app = create_app(tmp_path / "plans.db", load_samples=False, settings=Settings(check_time_limit_s=0.05))
    with TestClient(app) as c:
        plan_id = c.post("/api/plans", json=PLAN_DOC).json()["id"]
        problem = assert_problem(c.get(f"/plans/{plan_id}.json"), field="")
        assert "took longer than 0.05 s" in problem["message"]
        monkeypatch.setattr(app.state.pool, "run", no_worker)
        again = c.get(f"/plans/{plan_id}.json")
        assert again.json() == {"status": 422, "problems": again.json()["problems"]}
        page = c.get(f"/plans/{plan_id}")
        assert page.status_code == 422 and "took longer than 0.05 s" in page.text


def test_the_editor_shows_a_refusal_beside_the_inputs(client, monkeypatch):
    form = FIVE_NODE_FORM | {"test_pattern": "01" * 256, "default_device": "edge-3ns"}
    form |= {"driver.device.class_key": "custom", "driver.device.rise_time_s": "0.5 ns"}
    form |= {"bit_rate_bps": "50", "trunk_length_m": "4000", "terminations.1.position_m": "4000"}
    form |= {"driver.device.open_circuit_v": "5", "driver.device.source_ohm": "30"}
    rows = {f"nodes.{i}.{k}": v for i in range(5, 256) for k, v in (("name", f"x{i}"), ("position_m", str(i * 15)))}
    roles = {f"nodes.{i}.may_drive": "true" if i < 32 else "false" for i in range(256)}
    monkeypatch.setattr(client.app.state.pool, "run", no_worker)
    resp = client.post("/plans", data=form | rows | roles | {"action": "check"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    assert "would take at least" in dom.by_id("problems").text()
    assert "bits" in dom.by_id("e-test_pattern").text()
    assert dom.find("input", name="test_pattern").attrs["value"] == "01" * 256


# --- the results cache ---------------------------------------------------------------------------------------


def test_a_saved_plan_is_checked_once_then_served_byte_identical_from_the_cache(client, monkeypatch):
    plan_id = client.post("/api/plans", json=PLAN_DOC | {"title": "Cached"}).json()["id"]
    first_page, first_json = client.get(f"/plans/{plan_id}"), client.get(f"/plans/{plan_id}.json")
    assert first_page.status_code == 200 and first_json.status_code == 200
    monkeypatch.setattr(client.app.state.pool, "run", no_worker)
    assert client.get(f"/plans/{plan_id}").content == first_page.content
    assert client.get(f"/plans/{plan_id}.json").content == first_json.content
    assert client.get(f"/plans/{plan_id}/bom.csv").status_code == 200


def test_another_receiver_is_another_view_and_an_unknown_one_is_not_a_new_check(client, monkeypatch):
    plan_id = client.post("/api/plans", json=PLAN_DOC | {"title": "Views"}).json()["id"]
    plain = client.get(f"/plans/{plan_id}.json").json()
    chosen = client.get(f"/plans/{plan_id}.json?receiver=left").json()
    assert chosen["waveforms"]["chosen"] == "left" and plain["waveforms"]["chosen"] is None
    monkeypatch.setattr(client.app.state.pool, "run", no_worker)
    unknown = client.get(f"/plans/{plan_id}.json?receiver=nobody").json()
    assert unknown["waveforms"]["chosen_unknown"] == "nobody"
    assert client.get(f"/plans/{plan_id}?receiver=left").status_code == 200


def test_a_draft_is_cached_by_its_content(client, monkeypatch):
    doc = PLAN_DOC | {"title": "Draft"}
    first = client.post("/api/check", json=doc)
    monkeypatch.setattr(client.app.state.pool, "run", no_worker)
    assert client.post("/api/check", json=dict(reversed(list(doc.items())))).content == first.content
    assert client.post("/api/check", json=doc | {"title": "Other"}).status_code == 500  # another key: a check


def test_one_check_per_plan_at_a_time(client, monkeypatch):
    plan_id = client.post("/api/plans", json=PLAN_DOC | {"title": "Once"}).json()["id"]
    calls = []
    real = client.app.state.pool.run

    def counting(*args):
        calls.append(args)
        return real(*args)

    monkeypatch.setattr(client.app.state.pool, "run", counting)
    threads = [threading.Thread(target=client.get, args=(f"/plans/{plan_id}.json",)) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert len(calls) == 1


def test_a_full_queue_refuses_at_once_and_the_server_answers_503_with_retry_after(client, monkeypatch):
    pool = CheckPool(workers=1, time_limit_s=5.0, memory_limit_mb=256, queue_limit=0)
    try:
        busy = threading.Thread(target=pool.run, args=(time.sleep, 1.0))
        busy.start()
        time.sleep(0.3)
        with pytest.raises(PoolBusy):
            pool.run(sum, [1])
        busy.join()
        assert pool.run(sum, [1, 2]) == 3  # room again
    finally:
        pool.close()

    def full(*args):
        raise PoolBusy(30.0)

    monkeypatch.setattr(client.app.state.pool, "run", full)
    resp = client.post("/api/check", json=PLAN_DOC | {"title": "Queue full"})
    assert resp.status_code == 503 and resp.headers["retry-after"] == "30"
    assert resp.json()["status"] == 503 and resp.json()["problems"][0]["allowed"] == {"retry_after_s": 30}


def test_a_refusal_for_time_or_memory_names_the_limit_and_the_size():
    from pairline.server.cost import over_limit_problems

    plan = load_plan(PLAN_DOC)
    slow = over_limit_problems(plan, "time", 30.0, 1024)[0]
    big = over_limit_problems(plan, "memory", 30.0, 1024)[0]
    assert "took longer than 30 s" in slow.message and "1024 MB" in big.message
    for problem in (slow, big):
        assert "2 receiver(s)" in problem.message and "9.6 kbit/s" in problem.message
