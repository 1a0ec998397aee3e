"""Field checks over HTTP: the capture form, the saved capture's page and its twins, the save-the-fitted-plan
button, the JSON API."""

import pytest
from pairline.server.app import create_app
from pairline.server.settings import Settings

from tests.engine.field_buses import PLAN_DOC, capture_text
from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html

BAD_ROWS = "Time,V\n" + "\n".join(f"{k * 1e-9},{'oops' if k == 7 else k % 9}" for k in range(300))


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", load_samples=False)
    with TestClient(app) as c:
        yield c


@pytest.fixture(scope="module")
def plan_id(client):
    resp = client.post("/api/plans", json=PLAN_DOC)
    assert resp.status_code == 201
    return resp.json()["id"]


MISSING_TERMINATOR_CSV = capture_text("far_missing", seed=31)


@pytest.fixture(scope="module")
def capture_url(client, plan_id):
    # Source: ngspice transient with the far terminator removed (tests/engine/field_buses.py).
    files = {"capture_file": ("scope.csv", MISSING_TERMINATOR_CSV.encode(), "text/csv")}
    resp = client.post(
        f"/plans/{plan_id}/field", data={"at": "control-room", "sent": "edge"}, files=files, follow_redirects=False
    )
    assert resp.status_code == 303, resp.text[:2000]
    return resp.headers["location"]


@pytest.fixture(scope="module")
def missing_terminator_page(client, capture_url):
    resp = client.get(capture_url)
    assert resp.status_code == 200
    return parse_html(resp.text)


def _assert_problem(resp, field: str) -> dict:
    assert resp.status_code == 422
    body = resp.json()
    found = [p for p in body["problems"] if p["field"] == field]
    assert found, body
    assert set(found[0]) == {"field", "label", "value", "allowed", "message"}
    return found[0]


def test_the_plan_page_links_to_the_capture_form(client, plan_id):
    page = parse_html(client.get(f"/plans/{plan_id}").text)
    assert page.by_id("check-capture").attrs["href"] == f"/plans/{plan_id}/field"


def test_the_capture_form_has_every_input_and_a_json_twin(client, plan_id):
    url = f"/plans/{plan_id}/field"
    page = parse_html(client.get(url).text)
    names = {e.attrs.get("name") for e in page.iter() if e.tag in ("input", "select", "textarea")}
    assert {"capture_file", "capture_csv", "at", "at_position_m", "sent", "bits", "signal"} <= names
    assert {"time_unit", "voltage_unit", "sample_interval_s", "probe_attenuation"} <= names
    twin = page.find("link", rel="alternate").attrs["href"]
    assert twin == url + ".json"
    data = client.get(twin).json()
    assert data["page"] == "field" and data["values"]["at"] == PLAN_DOC["driver"]["name"]


def test_a_capture_shows_the_difference_the_overlay_and_the_residuals(missing_terminator_page):
    page = missing_terminator_page
    assert page.by_id("field-verdict").attrs["data-verdict"] == "breaks"
    items = page.by_id("differences").find_all("li")
    assert [li.attrs["data-key"] for li in items] == ["end_siemens"]
    assert "probably missing" in items[0].text()
    svg = page.find("figure", class_="plot overlay").find("svg")
    assert {p.attrs["class"] for p in svg.find_all("polyline")} == {"measured", "predicted", "fitted"}
    assert {r.attrs["data-region"] for r in page.by_id("residuals").find_all("tr") if "data-region" in r.attrs} == {
        "edge",
        "reflections",
        "settled",
    }


def test_the_fitted_plan_saves_as_a_new_plan_linked_to_the_checked_one(client, plan_id, missing_terminator_page):
    form = missing_terminator_page.by_id("save-fitted").parent
    fields = {e.attrs["name"]: e.attrs["value"] for e in form.find_all("input")}
    assert fields["parent_id"] == plan_id
    resp = client.post(form.attrs["action"], data=fields, follow_redirects=False)
    assert resp.status_code == 303
    new_id = resp.headers["location"].rsplit("/", 1)[1]
    saved = client.get(f"/api/plans/{new_id}").json()
    assert saved["parent_id"] == plan_id
    assert [t["position_m"] for t in saved["plan"]["terminations"]] == [0.0]


def test_bad_input_comes_back_422_with_everything_typed_and_messages_in_place(client, plan_id):
    typed = {"capture_csv": BAD_ROWS, "at": "", "at_position_m": "9 km", "probe_attenuation": "lots", "bits": ""}
    resp = client.post(f"/plans/{plan_id}/field", data=typed | {"sent": "bits"})
    assert resp.status_code == 422
    page = parse_html(resp.text)
    assert page.by_id("f-capture_csv").text() == BAD_ROWS
    assert page.by_id("f-probe_attenuation").attrs["value"] == "lots"
    assert page.by_id("f-at_position_m").attrs["value"] == "9 km"
    for field in ("capture_csv", "probe_attenuation", "at_position_m", "bits"):
        assert page.by_id(f"e-{field}") is not None, field
    assert "Line 9" in page.by_id("e-capture_csv").text()


def test_an_uploaded_file_that_fails_comes_back_as_text(client, plan_id):
    files = {"capture_file": ("scope.csv", BAD_ROWS.encode(), "text/csv")}
    resp = client.post(f"/plans/{plan_id}/field", data={"sent": "edge"}, files=files)
    assert resp.status_code == 422
    assert parse_html(resp.text).by_id("f-capture_csv").text() == BAD_ROWS


def test_a_saved_capture_has_its_own_link_json_twin_and_file(client, plan_id, capture_url, missing_terminator_page):
    page = missing_terminator_page
    capture_id = capture_url.rsplit("/", 1)[1]
    assert capture_url == f"/plans/{plan_id}/captures/{capture_id}" and capture_id != plan_id
    assert page.by_id("share-url").attrs["value"] == capture_url
    twin_url = page.find("link", rel="alternate").attrs["href"]
    assert twin_url == capture_url + ".json"
    twin = client.get(twin_url).json()
    assert twin["saved_capture"]["id"] == capture_id and twin["saved_capture"]["url"] == capture_url
    assert [d["key"] for d in twin["differences"]] == ["end_siemens"]
    assert twin["settings"]["at"] == "control-room" and twin["settings"]["sent"] == "edge"
    # The file comes back exactly as it was sent.
    file = client.get(page.by_id("capture-file").attrs["href"])
    assert file.status_code == 200 and file.headers["content-type"].startswith("text/csv")
    assert file.text == MISSING_TERMINATOR_CSV


def test_a_capture_opens_only_under_its_own_plan(client, plan_id, capture_url):
    capture_id = capture_url.rsplit("/", 1)[1]
    other = client.post("/api/plans", json=PLAN_DOC).json()["id"]
    for url in (
        f"/plans/{other}/captures/{capture_id}",
        f"/plans/{plan_id}/captures/AAAAAAAAAAAAAAAA",
        f"/plans/{plan_id}/captures/{capture_id}.xml",
        f"/plans/AAAAAAAAAAAAAAAA/captures/{capture_id}",
    ):
        assert client.get(url).status_code == 404, url
    assert client.get(f"/plans/{other}/captures/{capture_id}.json").json()["status"] == 404


def test_json_api_against_a_saved_plan_saves_the_capture_and_a_plan_sent_along_does_not(client, plan_id):
    # Source: ngspice transient of the plan itself: no difference.
    capture = capture_text("planned", seed=32, lines=True)
    saved = client.post(f"/api/plans/{plan_id}/field", json={"capture_csv": capture, "signal": "lines"})
    assert saved.status_code == 201
    body = saved.json()
    assert body["verdict"] == "matches" and body["differences"] == [] and body["fitted_plan"] is None
    assert body["capture"]["signal"] == "lines" and len(body["overlay"]["time_s"]) > 100
    assert saved.headers["location"] == body["saved_capture"]["url"]
    assert client.get(body["saved_capture"]["json_url"]).json() == body  # the twin answers what the save answered
    inline = client.post("/api/field", json={"plan": PLAN_DOC, "capture_csv": capture})
    assert inline.status_code == 200 and inline.json()["verdict"] == "matches"
    assert "saved_capture" not in inline.json()  # nothing saved


def test_json_api_errors_use_the_one_envelope(client, plan_id):
    url = f"/api/plans/{plan_id}/field"
    _assert_problem(client.post(url, json={"capture_csv": BAD_ROWS}), "capture_csv")
    _assert_problem(client.post(url, json={"capture_csv": BAD_ROWS, "at": "attic"}), "at")
    problem = _assert_problem(
        client.post(url, json={"capture_csv": BAD_ROWS, "probe_attenuation": 5000}), "probe_attenuation"
    )
    assert problem["allowed"]["max"] == 1000.0
    _assert_problem(client.post(url, content=b"{nope", headers={"content-type": "application/json"}), "")
    _assert_problem(client.post("/api/field", json={"capture_csv": BAD_ROWS}), "")
    assert client.post("/api/plans/AAAAAAAAAAAAAAAA/field", json={}).status_code == 404
    assert client.get("/plans/AAAAAAAAAAAAAAAA/field").status_code == 404


def test_a_capture_over_the_size_cap_is_refused_with_its_size(client, plan_id):
    files = {"capture_file": ("huge.csv", b"0,1\n" * 400_000, "text/csv")}  # 1.6 MB, under the body limit
    resp = client.post(f"/plans/{plan_id}/field", data={"sent": "edge"}, files=files)
    assert resp.status_code == 422
    assert "1600000 bytes" in parse_html(resp.text).by_id("e-capture_csv").text()


def test_the_json_api_takes_json_only(client, plan_id):
    resp = client.post(f"/api/plans/{plan_id}/field", content=BAD_ROWS.encode(), headers={"content-type": "text/csv"})
    assert resp.status_code == 415
    assert resp.json()["problems"][0]["field"] == ""


def test_a_fit_over_the_time_limit_is_refused_naming_the_capture(tmp_path):
    from pairline.server.settings import Settings

    # The plan is saved under the usual limit (a save refuses a plan whose check would not fit its own limit);
    # the server that fits the capture has the short one.
    with TestClient(create_app(tmp_path / "plans.db", load_samples=False)) as saver:
        plan_id = saver.post("/api/plans", json=PLAN_DOC).json()["id"]
    app = create_app(tmp_path / "plans.db", load_samples=False, settings=Settings(check_time_limit_s=0.05))
    with TestClient(app) as c:
        capture = capture_text("far_missing", seed=34)
        problem = _assert_problem(c.post(f"/api/plans/{plan_id}/field", json={"capture_csv": capture}), "capture_csv")
        assert "longer than the 0.05 s" in problem["message"]


@pytest.mark.parametrize("kind", ["sqlite", "postgresql"])
def test_a_saved_capture_is_fitted_again_by_another_server_on_the_same_database(kind, tmp_path, request):
    # Two apps stand for two server processes, or one restarted: the second's cache is empty, so its page is fitted
    # again from the capture as stored.
    target = str(tmp_path / "plans.db") if kind == "sqlite" else request.getfixturevalue("postgres_url")
    # Source: ngspice transient of a 150 Ohm cable installed instead of the 120 Ohm one (tests/engine/field_buses.py).
    capture = capture_text("cable_150", seed=35)
    with TestClient(create_app(target, load_samples=False)) as first:
        plan_id = first.post("/api/plans", json=PLAN_DOC).json()["id"]
        saved = first.post(f"/api/plans/{plan_id}/field", json={"capture_csv": capture, "probe_attenuation": 1})
        assert saved.status_code == 201
    with TestClient(create_app(target, load_samples=False)) as second:
        again = second.get(saved.json()["saved_capture"]["json_url"])
        assert again.status_code == 200
        assert [d["key"] for d in again.json()["differences"]] == ["z0_ohm"]
        assert again.json()["differences"] == saved.json()["differences"]
        assert second.get(saved.json()["saved_capture"]["csv_url"]).text == capture


def test_captures_count_against_the_save_quota_and_the_form_keeps_what_was_typed(tmp_path):
    app = create_app(tmp_path / "plans.db", load_samples=False, settings=Settings(saves_per_minute=1))
    with TestClient(app) as c:
        plan_id = c.post("/api/plans", json=PLAN_DOC).json()["id"]  # the one save this minute allows
        # Source: ngspice transient of the plan itself.
        capture = capture_text("planned", seed=36)
        resp = c.post(f"/plans/{plan_id}/field", data={"capture_csv": capture, "probe_attenuation": "1"})
        assert resp.status_code == 429 and int(resp.headers["retry-after"]) >= 1
        page = parse_html(resp.text)
        assert page.by_id("f-capture_csv").text() == capture
        assert "save limit" in page.by_id("problems").text()
        api = c.post(f"/api/plans/{plan_id}/field", json={"capture_csv": capture})
        assert api.status_code == 429 and api.json()["problems"][0]["field"] == ""
