"""Security headers, methods, media types, links, quotas and the published schema."""

import http.client
import json
import re

import pytest
from pairline.server.app import create_app
from pairline.server.middleware import CONTENT_SECURITY_POLICY
from pairline.server.settings import Settings

from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html
from tests.server.live import live_server
from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC, assert_problem


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    settings = Settings(public_base_url="https://plans.example.org")
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", settings=settings)
    with TestClient(app) as c:
        yield c


@pytest.fixture(scope="module")
def saved_id(client):
    return client.post("/api/plans", json=PLAN_DOC).json()["id"]


def pages(saved_id: str) -> list[str]:
    """Every GET page and its JSON twin, the downloads, the schema and a static file."""
    return [
        "/",
        "/index.json",
        "/plans/new",
        "/plans/new.json",
        f"/plans/{saved_id}",
        f"/plans/{saved_id}.json",
        f"/plans/{saved_id}/edit",
        f"/plans/{saved_id}/edit.json",
        f"/plans/{saved_id}/download",
        f"/plans/{saved_id}/bom.csv",
        f"/api/plans/{saved_id}",
        "/openapi.json",
        "/static/pairline.css",
        "/plans/AAAAAAAAAAAAAAAA",
    ]


def test_every_page_carries_the_security_headers(client, saved_id):
    for path in pages(saved_id):
        resp = client.get(path)
        assert resp.status_code in (200, 404), path
        # Source: the header names and values as the Fetch standard (nosniff), CSP Level 3 (frame-ancestors) and
        # Referrer Policy define them.
        assert resp.headers["x-content-type-options"] == "nosniff", path
        assert "frame-ancestors 'none'" in resp.headers["content-security-policy"], path
        assert resp.headers["referrer-policy"] == "no-referrer", path
    for resp in (
        client.post("/api/check", json={"nodes": 3}),
        client.post("/plans", data=FIVE_NODE_FORM | {"trunk_length_m": "-1", "action": "check"}),
    ):
        assert resp.headers["x-content-type-options"] == "nosniff"


def test_pages_satisfy_their_content_security_policy(client, saved_id):
    # script only from the site's own files: no inline script, no event-handler attributes, no javascript: URLs
    assert "script-src 'self'" in CONTENT_SECURITY_POLICY and "unsafe-inline" not in CONTENT_SECURITY_POLICY
    form_check = client.post("/plans", data=FIVE_NODE_FORM | {"action": "check"})
    for text in [client.get(p).text for p in pages(saved_id) if not p.endswith((".json", ".css", ".csv"))] + [
        form_check.text
    ]:
        dom = parse_html(text)
        for script in dom.find_all("script"):
            assert script.attrs.get("src", "").startswith("/static/") or script.attrs.get("type") == "application/json"
        for element in dom.iter():
            assert not any(name.startswith("on") for name in element.attrs), element.tag
            assert "style" not in element.attrs, element.tag
            assert not element.attrs.get("href", "").startswith("javascript:")


def test_links_come_from_the_public_base_url_never_the_host_header(client, saved_id):
    resp = client.get(f"/plans/{saved_id}", headers={"host": "evil.example.net"})
    assert "evil.example.net" not in resp.text
    assert parse_html(resp.text).by_id("share-url").attrs["value"] == f"https://plans.example.org/plans/{saved_id}"
    saved = client.post("/api/plans", json=PLAN_DOC, headers={"host": "evil.example.net"})
    assert "evil" not in saved.headers["location"] and "evil" not in saved.text
    for path in ("/plans/new/", "/static", "/api/check/", f"/plans/{saved_id}/"):
        moved = client.get(path, headers={"host": "evil.example.net"}, follow_redirects=False)
        assert "evil" not in moved.headers.get("location", "") and "evil" not in moved.text


def test_without_a_public_base_url_links_are_relative(tmp_path):
    with TestClient(create_app(tmp_path / "plans.db", load_samples=False)) as c:
        plan_id = c.post("/api/plans", json=PLAN_DOC).json()["id"]
        share = parse_html(c.get(f"/plans/{plan_id}", headers={"host": "evil.example.net"}).text).by_id("share-url")
        assert share.attrs["value"] == f"/plans/{plan_id}"


def test_the_api_takes_only_json(client):
    body = json.dumps(PLAN_DOC)
    for headers in ({"content-type": "text/plain"}, {"content-type": "application/x-www-form-urlencoded"}, {}):
        resp = client.post("/api/check", content=body, headers=headers)
        problem = assert_problem(resp, field="") if resp.status_code == 422 else resp.json()["problems"][0]
        assert resp.status_code == 415 and problem["allowed"] == {"choices": ["application/json"]}
    assert client.post("/api/plans", content=body, headers={"content-type": "text/plain"}).status_code == 415
    ok = client.post("/api/check", content=body, headers={"content-type": "application/json; charset=utf-8"})
    assert ok.status_code == 200


def test_405_names_the_allowed_methods(client, saved_id):
    for method, path, allowed in (
        ("DELETE", f"/plans/{saved_id}", {"GET", "HEAD"}),
        ("PUT", "/api/check", {"POST"}),
        ("GET", "/api/check", {"POST"}),
        ("POST", "/", {"GET", "HEAD"}),
    ):
        resp = client.request(method, path)
        assert resp.status_code == 405, (method, path)
        assert {m.strip() for m in resp.headers["allow"].split(",")} == allowed
        assert resp.json()["status"] == 405


def test_head_is_answered_on_every_get_page(client, saved_id):
    for path in pages(saved_id):
        got, head = client.get(path), client.head(path)
        assert head.status_code == got.status_code, path
        assert head.content == b""
        assert head.headers["content-type"] == got.headers["content-type"]
        assert head.headers.get("content-length") == str(len(got.content)), path


def test_openapi_publishes_the_plan_request_schema(client):
    doc = client.get("/openapi.json").json()
    plan_schema = doc["components"]["schemas"]["BusPlan"]
    assert plan_schema["properties"]["trunk_length_m"]["maximum"] == 4000.0
    plan_ref = {"$ref": "#/components/schemas/BusPlan"}
    assert doc["paths"]["/api/plans"]["post"]["requestBody"]["content"] == {"application/json": {"schema": plan_ref}}
    check_body = doc["paths"]["/api/check"]["post"]["requestBody"]["content"]["application/json"]["schema"]
    assert plan_ref in check_body["oneOf"]  # a plan, or the editor's typed fields
    for path in ("/api/check", "/api/plans"):
        refused = doc["paths"][path]["post"]["responses"]["422"]["content"]["application/json"]["schema"]
        assert refused == {"$ref": "#/components/schemas/ErrorEnvelope"}
    assert "application/x-www-form-urlencoded" in doc["paths"]["/plans"]["post"]["requestBody"]["content"]


def test_saves_over_the_quota_get_429_with_retry_after(tmp_path):
    app = create_app(tmp_path / "plans.db", load_samples=False, settings=Settings(saves_per_minute=3))
    with TestClient(app) as c:
        for _ in range(3):
            assert c.post("/api/plans", json=PLAN_DOC).status_code == 201
        refused = c.post("/api/plans", json=PLAN_DOC)
        assert refused.status_code == 429 and refused.json()["status"] == 429
        assert 1 <= int(refused.headers["retry-after"]) <= 60
        form = c.post("/plans", data=FIVE_NODE_FORM | {"action": "save"}, headers={"accept": "text/html"})
        assert form.status_code == 429 and "Retry-After" in form.headers and "save limit" in form.text
        assert parse_html(form.text).find("input", name="title").attrs["value"] == FIVE_NODE_FORM["title"]
        draft = c.post("/plans", data={"plan_json": json.dumps(PLAN_DOC)}, headers={"accept": "text/html"})
        assert draft.status_code == 429 and "save limit" in draft.text
        # an invalid plan is refused for its values and does not count; checking does not count either
        assert c.post("/api/check", json=PLAN_DOC).status_code == 200


def test_a_500_is_logged_answered_with_the_envelope_and_the_connection_stays_usable(tmp_path, caplog):
    app = create_app(tmp_path / "plans.db", load_samples=False)

    def broken() -> None:
        raise RuntimeError("a bug, not the user's input")

    app.add_api_route("/broken", broken)
    with live_server(app) as (host, port):
        connection = http.client.HTTPConnection(host, port, timeout=10)
        connection.request("GET", "/broken")
        failed = connection.getresponse()
        envelope = json.loads(failed.read())
        assert failed.status == 500 and envelope["status"] == 500 and envelope["problems"][0]["message"]
        assert failed.getheader("x-content-type-options") == "nosniff"
        connection.request("GET", "/index.json")  # the same connection
        after = connection.getresponse()
        assert after.status == 200 and json.loads(after.read())["page"] == "start"
        connection.close()
    logged = [r for r in caplog.records if r.levelname == "ERROR" and envelope["request_id"] in r.getMessage()]
    assert logged and logged[0].exc_info and "a bug, not the user's input" in str(logged[0].exc_info[1])


def test_share_ids_come_from_a_secure_random_source_not_the_clock(tmp_path, monkeypatch):
    import datetime as real_datetime
    import random
    import time

    from pairline.server.store import open_store

    # With the clock frozen and the ordinary random generator reseeded before every save, ids must still differ
    # and look like fair coin flips: an id derived from time or from `random` would repeat or lean.
    monkeypatch.setattr(time, "time", lambda: 1_700_000_000.0)
    monkeypatch.setattr(time, "time_ns", lambda: 1_700_000_000_000_000_000)
    monkeypatch.setattr(time, "monotonic", lambda: 42.0)
    monkeypatch.setattr(time, "perf_counter", lambda: 42.0)

    class FrozenDatetime(real_datetime.datetime):
        @classmethod
        def now(cls, tz=None):
            return real_datetime.datetime(2024, 1, 1, tzinfo=tz)

    monkeypatch.setattr(real_datetime, "datetime", FrozenDatetime)
    store = open_store(tmp_path / "plans.db", clock=lambda: 1_700_000_000.0)
    ids = []
    for _ in range(300):
        random.seed(7)
        ids.append(store.save_plan(PLAN_DOC, engine_version="t"))
    assert len(set(ids)) == len(ids)
    bits = "".join(
        format(b, "08b") for i in ids for b in __import__("base64").urlsafe_b64decode(i + "=" * (-len(i) % 4))
    )
    ones = bits.count("1")
    # Source: binomial distribution; n = 300 ids x 96 bits, p = 1/2: mean n/2, sd sqrt(n)/2 = 84.9; 6 sd bound.
    assert abs(ones - len(bits) / 2) < 6 * (len(bits) ** 0.5) / 2
    assert all(re.fullmatch(r"[A-Za-z0-9_-]{16}", i) for i in ids)
    assert len({i[:4] for i in ids}) > 250  # no shared prefix as a timestamp would give
