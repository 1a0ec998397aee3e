"""The advice on the web: how many more receivers beside the verdict, the change list, the button that opens the
advised plan in the editor as a new unsaved draft (saved plans and drafts), and the JSON twins that carry it."""

import json

import pytest
from pairline.engine.plan import load_plan
from pairline.server.app import create_app

from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html

# An unterminated 600 m bus at 115.2 kbit/s with a 4.7 kOhm bias: three round trips outlast half a bit, so the
# line needs terminators, and with them the 4.7 kOhm pair no longer holds the idle level (it must change too).
NEEDS_TWO_CHANGES = {
    "title": "Quarry conveyor",
    "bit_rate_bps": 115_200,
    "trunk_length_m": 600.0,
    "driver": {"name": "crusher", "position_m": 0.0, "transceiver": "slew-2500ns"},
    "nodes": [{"name": f"belt-{i}", "position_m": 50.0 * i, "unit_loads": 0.25} for i in range(1, 13)],
    "terminations": [],
    "bias": {"position_m": 0.0, "pull_up_ohm": 4700.0, "pull_down_ohm": 4700.0},
}


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    with TestClient(create_app(tmp_path_factory.mktemp("db") / "plans.db")) as c:
        yield c


@pytest.fixture(scope="module")
def saved_id(client):
    resp = client.post("/api/plans", json=NEEDS_TWO_CHANGES)
    assert resp.status_code == 201
    return resp.json()["id"]


def test_report_shows_capacity_beside_the_verdict_and_lists_the_changes(client, saved_id):
    page = parse_html(client.get(f"/plans/{saved_id}").text)
    data = client.get(f"/plans/{saved_id}.json").json()
    capacity = page.by_id("more-receivers")
    assert capacity is not None and data["capacity"]["text"] in capacity.text()
    assert data["capacity"]["text"] == data["report"]["capacity"]["text"]
    assert page.by_id("key-figures") is not None and page.by_id("advised-verdict") is not None
    changes = page.by_id("advice-changes")
    assert changes is not None
    texts = [li.text() for li in changes.find_all("li")]
    assert any("terminator" in t for t in texts) and any("bias" in t for t in texts)
    assert len(texts) == len(data["advice"]["changes"])


def test_json_twin_carries_the_advised_plan_and_its_change_list(client, saved_id):
    data = client.get(f"/plans/{saved_id}.json").json()
    advised = load_plan(data["advice"]["plan"])  # a plan document like any other
    assert len(advised.terminations) == 2 and advised.bias is not None
    assert advised.bias.pull_up_ohm < 4700.0
    assert data["report"]["advice"]["plan"] == data["advice"]["plan"]
    assert {c["part"] for c in data["report"]["advice"]["changes"]} == {"terminator", "bias"}
    # The fix of the missing-terminator finding names both changes (terminators and the bias they need).
    may_omit = next(f for f in data["report"]["findings"] if f["rule_id"] == "termination.may_omit")
    assert "terminators at" in may_omit["fix"] and "bias" in may_omit["fix"]


def test_button_opens_the_advised_plan_in_the_editor_as_a_new_draft(client, saved_id):
    page = parse_html(client.get(f"/plans/{saved_id}").text)
    button = page.by_id("open-advised")
    assert button is not None and button.attrs["href"] == f"/plans/{saved_id}/advised"
    editor = client.get(f"/plans/{saved_id}/advised")
    assert editor.status_code == 200
    dom = parse_html(editor.text)
    form = dom.by_id("editor")
    assert form is not None and form.attrs["action"] == "/plans"
    # Filled with the advised plan: the terminator rows hold the advised values; nothing was saved.
    inputs = {e.attrs.get("name"): e.attrs.get("value") for e in form.find_all("input")}
    assert inputs.get("terminations.0.resistance_ohm") and inputs.get("terminations.1.resistance_ohm")
    assert inputs.get("parent_id") == saved_id
    assert dom.by_id("advice-changes") is not None
    twin = client.get(f"/plans/{saved_id}/advised.json").json()
    assert twin["advice"]["changes"] and twin["values"]["terminations.0.resistance_ohm"]


def test_a_checked_draft_opens_its_advice_too(client):
    draft = client.post("/api/check", json=NEEDS_TWO_CHANGES).json()
    assert (
        draft["advice"]["open_url"] is None and json.loads(draft["advice"]["draft_json"])["title"] == "Quarry conveyor"
    )
    resp = client.post("/plans/advised", data={"plan_json": draft["advice"]["draft_json"]})
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    assert dom.by_id("editor") is not None and dom.by_id("advice-changes") is not None


def test_a_draft_with_bad_json_is_refused_with_the_envelope(client):
    resp = client.post("/plans/advised", data={"plan_json": "{not json"}, headers={"accept": "application/json"})
    assert resp.status_code == 422
