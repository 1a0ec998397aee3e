"""Devices, bias networks and ground wiring through the editor and the JSON API: bad input lands beside its input
with the typed text kept; format-1 plans come back as format 2."""

import json

import pytest
from pairline.server.app import create_app

from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html
from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC, assert_problem


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", load_samples=False)
    with TestClient(app) as c:
        yield c


def _editor(client, form):
    resp = client.post("/plans", data=form | {"action": "check"})
    return resp, parse_html(resp.text)


def _error(dom, path):
    node = dom.by_id(f"e-{path}")
    assert node is not None, f"no message beside {path}"
    return node.text()


def test_an_isolated_custom_device_without_its_rating_is_named_beside_the_input(client):
    form = FIVE_NODE_FORM | {"nodes.2.device.class_key": "custom", "nodes.2.device.isolated": "true"}
    resp, dom = _editor(client, form)
    assert resp.status_code == 422
    assert "isolated" in _error(dom, "nodes.2.device.isolation_rating_vrms")
    # what was typed stays: the picker, the isolation choice and the other rows
    picker = dom.find("select", name="nodes.2.device.class_key")
    assert picker.find("option", value="custom").attrs.get("selected") is not None
    assert (
        dom.find("select", name="nodes.2.device.isolated").find("option", value="true").attrs.get("selected")
        is not None
    )
    assert dom.find("input", name="nodes.4.name").attrs["value"] == "valve-5"


def test_a_window_that_is_not_a_window_is_named_with_both_thresholds(client):
    form = FIVE_NODE_FORM | {"nodes.0.device.threshold_low_v": "-50 mV", "nodes.0.device.threshold_high_v": "-0.1"}
    resp, dom = _editor(client, form)
    assert resp.status_code == 422
    message = _error(dom, "nodes.0.device.threshold_high_v")
    assert "not a window" in message and "-0.05 V" in message and "-0.1 V" in message
    assert dom.find("input", name="nodes.0.device.threshold_low_v").attrs["value"] == "-50 mV"


def test_a_node_that_may_drive_on_rs422_is_refused_beside_its_select(client):
    resp, dom = _editor(client, FIVE_NODE_FORM | {"standard": "rs422", "nodes.1.may_drive": "true"})
    assert resp.status_code == 422
    assert "RS-422" in _error(dom, "nodes.1.may_drive")


def test_an_unknown_class_in_json_names_the_classes_allowed(client):
    doc = PLAN_DOC | {"format_version": 2, "nodes": [{"name": "a", "position_m": 10.0, "device": "edge-1ns"}]}
    problem = assert_problem(client.post("/api/check", json=doc), field="nodes.0.device")
    assert problem["value"] == "edge-1ns" and "slew-2500ns" in problem["allowed"]["choices"]
    problem = assert_problem(client.post("/api/check", json=doc | {"default_device": 7}), field="default_device")
    assert "edge-100ns" in problem["allowed"]["choices"]


def test_device_values_open_on_request_and_a_custom_device_opens_itself(client):
    dom = parse_html(client.post("/plans", data=FIVE_NODE_FORM | {"action": "device_values:nodes.3.device"}).text)
    assert dom.find("input", name="nodes.3.device.rise_time_s") is not None
    assert dom.find("input", name="nodes.2.device.rise_time_s") is None  # the others stay folded
    form = FIVE_NODE_FORM | {"nodes.1.device.class_key": "custom", "action": "add_node"}
    dom = parse_html(client.post("/plans", data=form).text)
    assert dom.find("input", name="nodes.1.device.unit_loads") is not None


def test_bias_networks_and_ground_wiring_from_the_form_reach_the_plan(client):
    form = FIVE_NODE_FORM | {
        "bias.1.position_m": "400",
        "bias.1.pull_up_ohm": "1k",
        "bias.1.pull_down_ohm": "1k",
        "grounding.signal_ground": "conductor",
        "grounding.ground_series_ohm": "100",
        "grounding.shield": "one_end",
        "nodes.4.device.class_key": "isolated-eighth-slew",
        "nodes.4.ground_offset_v": "9",
        "action": "save",
    }
    resp = client.post("/plans", data=form, follow_redirects=False)
    assert resp.status_code == 303
    plan = client.get(resp.headers["location"] + ".json").json()["plan"]
    assert [(b["position_m"], b["pull_up_ohm"]) for b in plan["bias"]] == [(0.0, 620.0), (400.0, 1000.0)]
    assert plan["grounding"] == {
        "signal_ground": "conductor",
        "ground_conductor_ohm_per_m": None,
        "ground_series_ohm": 100.0,
        "shield": "one_end",
    }
    assert plan["nodes"][4]["device"] == "isolated-eighth-slew"
    edit = parse_html(client.get(resp.headers["location"] + "/edit").text)
    assert edit.find("input", name="bias.1.pull_up_ohm").attrs["value"] == "1 kΩ"
    shield = edit.find("select", name="grounding.shield")
    assert shield.find("option", value="one_end").attrs.get("selected") is not None


def test_a_format_1_plan_comes_back_as_the_newest_format_in_the_twin_and_the_download(client):
    store = client.app.state.store
    from pairline.engine import ENGINE_VERSION

    v1 = PLAN_DOC | {"format_version": 1, "bias": {"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0}}
    plan_id = store.save_plan(v1, engine_version=ENGINE_VERSION, parent_id=None, client="test")
    twin = client.get(f"/plans/{plan_id}.json").json()
    assert twin["plan"]["format_version"] == 3 and twin["plan"]["bias"][0]["pull_up_ohm"] == 620.0
    download = json.loads(client.get(f"/plans/{plan_id}/download").content)
    assert download == twin["plan"]
    edit = parse_html(client.get(f"/plans/{plan_id}/edit").text)
    assert edit.find("input", name="bias.0.pull_up_ohm").attrs["value"] == "620 Ω"


def test_the_page_lists_each_device_and_states_what_a_unit_load_is(client):
    doc = PLAN_DOC | {
        "format_version": 2,
        "default_device": "failsafe-eighth-slew",
        "nodes": [{"name": "left", "position_m": 50.0}, {"name": "right", "position_m": 100.0, "device": "edge-25ns"}],
    }
    plan_id = client.post("/api/plans", json=doc).json()["id"]
    data = client.get(f"/plans/{plan_id}.json").json()
    # Source: TIA-485-A unit load, 12 kOhm per line: 1/8 UL is 96 kOhm per line, 192 kOhm across the pair.
    eighth = next(d for d in data["devices"] if d["label"].startswith("Idle-bus failsafe"))
    assert "192 kΩ across the pair" in eighth["unit_loads_text"] and eighth["count"] == 2  # the driver and 'left'
    assert "-200 .. -10 mV" in eighth["failsafe_text"]
    page = parse_html(client.get(f"/plans/{plan_id}").text)
    assert "1 UL = 24 kΩ across the pair" in page.by_id("unit-load").text()
    assert len(page.by_id("devices").find_all("tr")) == 1 + 2
