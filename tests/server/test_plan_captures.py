"""A saved plan's page and its JSON twin list the captures saved with it, newest first: a new capture shows at
once, while the checked plan stays in the results cache; a plan with none invites one instead of an empty table."""

import re
from datetime import datetime

import pytest
from pairline.engine import ENGINE_VERSION
from pairline.server.app import create_app

from tests.engine.field_buses import DRIVER, PLAN_DOC, capture_text
from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html

# Source: ngspice transients of the plan with its far terminator removed, and as planned (tests/engine/field_buses).
MISSING_TERMINATOR_CSV = capture_text("far_missing", seed=51)
PLANNED_CSV = capture_text("planned", seed=52)
# from memory: the site writes times as "2 December 2025, 08:06 UTC"
HUMAN_DATE = re.compile(
    r"^\d{1,2} (January|February|March|April|May|June|July|August|September|October|November|December) \d{4}, "
    r"\d{2}:\d{2} UTC$"
)
NOTE = "Anyone who has this plan's link can check a scope capture against it, and see every capture"


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", load_samples=False)
    with TestClient(app) as c:
        yield c


def _new_plan(client, **changes) -> str:
    resp = client.post("/api/plans", json=PLAN_DOC | changes)
    assert resp.status_code == 201
    return resp.json()["id"]


def test_a_plan_without_captures_invites_one_and_shows_no_table(client):
    plan_id = _new_plan(client)
    page = parse_html(client.get(f"/plans/{plan_id}").text)
    section = page.by_id("captures")
    assert section is not None and section.find("table") is None
    assert NOTE in page.by_id("captures-note").text()
    assert page.by_id("no-captures").find("a").attrs["href"] == f"/plans/{plan_id}/field"
    twin = client.get(f"/plans/{plan_id}.json").json()
    assert twin["captures"]["listed"] == [] and twin["captures"]["total"] == 0
    assert twin["captures"]["add_url"] == f"/plans/{plan_id}/field"


def test_a_new_capture_shows_on_the_plan_page_at_once_while_the_checked_plan_stays_cached(client):
    plan_id = _new_plan(client)
    url = f"/plans/{plan_id}"
    assert parse_html(client.get(url).text).by_id("no-captures") is not None
    assert client.get(url + ".json").json()["captures"]["total"] == 0
    checker = client.app.state.checker
    cached_html, cached_json = checker.cached_html(plan_id, None), checker.cached_json(plan_id, None)
    assert cached_html is not None and cached_json is not None

    files = {"capture_file": ("scope.csv", MISSING_TERMINATOR_CSV.encode(), "text/csv")}
    sent = client.post(f"{url}/field", data={"at": "crusher"}, files=files, follow_redirects=False)
    assert sent.status_code == 303
    first_url = sent.headers["location"]
    first_id = first_url.rsplit("/", 1)[1]

    page = parse_html(client.get(url).text)
    assert page.by_id("no-captures") is None
    row = page.by_id(f"capture-{first_id}")
    assert row.find("a").attrs["href"] == first_url
    assert "node 'crusher'" in row.text()
    shown = row.find("time")
    assert HUMAN_DATE.match(shown.text()) and datetime.fromisoformat(shown.attrs["datetime"]).utcoffset() is not None
    assert NOTE in page.by_id("captures-note").text()
    assert client.get(first_url).status_code == 200  # the link opens the capture's own check

    api = client.post(f"/api/plans/{plan_id}/field", json={"capture_csv": PLANNED_CSV, "at": DRIVER})
    assert api.status_code == 201
    second_url = api.headers["location"]
    twin = client.get(url + ".json").json()
    assert twin["id"] == plan_id and twin["verdict"]  # the checked plan is all there, the list beside it
    listed = twin["captures"]["listed"]
    assert [c["url"] for c in listed] == [second_url, first_url]  # newest first
    assert listed[0]["probe_text"] == f"the driver's terminal ({DRIVER})" and listed[1]["at"] == "crusher"
    assert twin["captures"]["total"] == 2 and twin["captures"]["not_listed"] == 0
    rows = parse_html(client.get(url).text).by_id("capture-list").find("tbody").find_all("tr")
    assert [r.find("a").attrs["href"] for r in rows] == [second_url, first_url]

    # Every view of the plan lists them: another receiver's, and one naming no receiver of this bus.
    for query in ("?receiver=stacker", "?receiver=nobody"):
        found = parse_html(client.get(url + query).text)
        assert found.by_id(f"capture-{first_id}") is not None, query
    # The checked plan was not checked or rendered again: the list is filled into the cached page on each view.
    assert checker.cached_html(plan_id, None) == cached_html
    assert checker.cached_json(plan_id, None) == cached_json


def test_the_list_shows_the_newest_fifty_and_counts_the_rest_in_the_plans_units(client):
    plan_id = _new_plan(client, display_units="imperial")
    store = client.app.state.store
    # Source: 1 ft = 0.3048 m exactly (international foot, 1959), so 30.48 m is 100 ft.
    capture = {"capture_csv": "t,v\n", "at": None, "at_position_m": 30.48, "sent": "edge", "probe_attenuation": 1.0}
    ids = [store.save_capture(plan_id, capture, engine_version=ENGINE_VERSION) for _ in range(52)]
    page = parse_html(client.get(f"/plans/{plan_id}").text)
    rows = page.by_id("capture-list").find("tbody").find_all("tr")
    # common practice: a page lists a bounded number of entries; the newest 50 here
    assert [r.attrs["id"] for r in rows] == [f"capture-{i}" for i in ids[::-1][:50]]
    assert "a point on the trunk at 100 ft" in rows[0].text()
    assert page.by_id("captures-not-listed").text().startswith("2 older captures are not listed")
    twin = client.get(f"/plans/{plan_id}.json").json()["captures"]  # from the cache: the plan is read for its units
    assert (len(twin["listed"]), twin["total"], twin["not_listed"]) == (50, 52, 2)
    assert twin["listed"][0]["probe_text"] == "a point on the trunk at 100 ft"
