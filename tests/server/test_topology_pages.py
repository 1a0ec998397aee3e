"""Plans of several parts on the web: the page puts the plan-level verdict on top and groups the report per
segment or pair; the editor lays out segments, repeaters and the four-wire return pair in forms (no script needed)
and loses nothing of a plan opened in it."""

import copy
import csv
import io
import json
from collections import Counter

import pytest
from pairline.engine.plan import load_plan

from tests.engine.topology_plans import four_wire, two_segments
from tests.server.html_dom import parse_html


def _form(dom) -> dict[str, str]:
    """What the editor form sends: text inputs, checked radios, selected options, text areas."""
    form = dom.by_id("editor")
    out = {}
    for e in form.find_all("input"):
        name, kind = e.attrs.get("name"), e.attrs.get("type")
        if (
            not name
            or "__i__" in name
            or kind in ("checkbox", "file")
            or (kind == "radio" and "checked" not in e.attrs)
        ):
            continue
        out[name] = e.attrs.get("value", "")
    for e in form.find_all("select"):
        options = e.find_all("option")
        chosen = next((o for o in options if "selected" in o.attrs), options[0] if options else None)
        out[e.attrs["name"]] = chosen.attrs.get("value", "") if chosen else ""
    for e in form.find_all("textarea"):
        out[e.attrs["name"]] = e.text()
    return out


def _rich_segments() -> dict:
    doc = two_segments(response_budget_s=20e-6)
    doc["repeaters"][0].update(
        device={"class_key": "isolated-eighth-slew", "isolation_rating_vrms": 3750.0},
        downstream_ground_offset_v=11.0,
        upstream_stub_m=0.3,
    )
    store = doc["segments"][0]
    store["cable"] = {"class_key": "pair-22awg-120"}
    store["grounding"] = {"signal_ground": "conductor", "shield": "one_end"}
    for node in store["nodes"]:
        node["ground_offset_v"] = 11.0
    store["nodes"][1]["device"] = {"class_key": "edge-100ns", "unit_loads": 0.5}
    return doc


@pytest.fixture(scope="module")
def saved(client):
    ids = {}
    for name, doc in (("segments", _rich_segments()), ("four_wire", four_wire())):
        resp = client.post("/api/plans", json=doc)
        assert resp.status_code == 201, resp.text
        ids[name] = resp.json()["id"]
    return ids


def test_the_page_puts_the_plan_level_verdict_on_top_then_each_segment(client, saved):
    resp = client.get(f"/plans/{saved['segments']}")
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    badge = dom.by_id("overall-verdict")
    whole = dom.by_id("h-whole")
    parts = [dom.by_id("part-1"), dom.by_id("part-2")]
    assert badge is not None and whole is not None and all(parts)
    html = resp.text
    assert (
        html.index('id="overall-verdict"')
        < html.index('id="h-whole"')
        < html.index('id="part-1"')
        < html.index('id="part-2"')
    )
    assert "Segment 'main'" in parts[0].text() and "Segment 'store'" in parts[1].text()
    assert "driven by repeater 'gate'" in parts[1].text().lower()
    rules = [li.attrs["data-rule"] for li in dom.by_id("plan-findings").find_all("li")]
    assert "network.delay" in rules and "repeater.isolation" in rules
    ids = Counter(e.attrs["id"] for e in dom.iter() if "id" in e.attrs)
    assert [i for i, n in ids.items() if n > 1] == []  # every part's anchors are its own
    links = [e.attrs["href"][1:] for e in dom.find_all("a") if e.attrs.get("href", "").startswith("#")]
    assert [target for target in links if target not in ids] == []


def test_the_overview_draws_every_segment_to_one_scale_with_its_repeater(client, saved):
    data = client.get(f"/plans/{saved['segments']}.json").json()
    rows = data["drawing"]["rows"]
    (link,) = data["drawing"]["links"]
    # common practice: one scale for the whole drawing, so 400 m of segment draws 4/3 as long as 300 m
    spans = [r["x1"] - r["x0"] for r in rows]
    assert spans[1] / spans[0] == pytest.approx(400.0 / 300.0, rel=1e-9)
    assert link["name"] == "gate" and link["isolated"] is True
    assert link["x_up"] == pytest.approx(rows[0]["x1"]) and link["x_down"] == pytest.approx(rows[1]["x0"])


def test_the_json_twin_holds_the_whole_report(client, saved):
    data = client.get(f"/plans/{saved['segments']}.json").json()
    assert data["page"] == "network" and data["plan"]["format_version"] == 3
    assert [p["name"] for p in data["report"]["parts"]] == ["main", "store"]
    assert [p["name"] for p in data["parts"]] == ["main", "store"]
    assert data["verdict"] == data["report"]["verdict"]


@pytest.mark.parametrize("plan", ["segments", "four_wire"])
def test_the_bill_of_materials_lists_each_parts_materials_under_its_label(client, saved, plan):
    data = client.get(f"/plans/{saved[plan]}.json").json()
    resp = client.get(f"/plans/{saved[plan]}/bom.csv")
    assert resp.status_code == 200 and resp.headers["content-type"].startswith("text/csv")
    items = [row[0] for row in csv.reader(io.StringIO(resp.text.lstrip("\ufeff")))][1:]
    expected = [f"{p['label']}: {row['item']}" for p in data["parts"] for row in p["data"]["summary"]["bom"]]
    assert len(data["parts"]) == 2 and items == expected


def test_a_four_wire_page_shows_both_pairs(client, saved):
    dom = parse_html(client.get(f"/plans/{saved['four_wire']}").text)
    assert "The transmit pair" in dom.by_id("part-1").text() and "The return pair" in dom.by_id("part-2").text()


def test_the_api_check_of_a_plan_of_segments_names_each_part(client):
    resp = client.post("/api/check", json=two_segments())
    assert resp.status_code == 200
    body = resp.json()
    assert [p["name"] for p in body["parts"]] == ["main", "store"]
    assert "main:" in body["capacity"]["unit_loads_text"] and "store:" in body["capacity"]["unit_loads_text"]


def test_the_editor_keeps_every_segment_repeater_and_value(client, saved):
    dom = parse_html(client.get(f"/plans/{saved['segments']}/edit").text)
    fields = _form(dom)
    assert fields["repeaters.0.name"] == "gate" and fields["segments.0.name"] == "store"
    assert fields["segments.0.nodes.1.device.unit_loads"] == "0.5"
    resp = client.post("/plans", data=fields | {"action": "check"})
    assert resp.status_code == 200, resp.text[:2000]
    page = parse_html(resp.text)
    sent = page.find("input", name="plan_json").attrs["value"]
    assert load_plan(json.loads(sent)) == load_plan(_rich_segments())


def test_the_editor_keeps_a_four_wire_plan(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['four_wire']}/edit").text))
    assert fields["four_wire.master"] == "master"
    resp = client.post("/plans", data=fields | {"action": "check"})
    sent = parse_html(resp.text).find("input", name="plan_json").attrs["value"]
    assert load_plan(json.loads(sent)) == load_plan(four_wire())


def test_adding_a_segment_and_its_rows_needs_no_script(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['segments']}/edit").text))
    dom = parse_html(client.post("/plans", data=fields | {"action": "add_row:segments"}).text)
    assert dom.find("input", name="segments.1.name") is not None
    fields = _form(dom)
    dom = parse_html(client.post("/plans", data=fields | {"action": "add_row:segments.1.nodes"}).text)
    assert dom.find("input", name="segments.1.nodes.0.name") is not None
    dom = parse_html(client.post("/plans", data=_form(dom) | {"action": "add_row:repeaters"}).text)
    assert dom.find("input", name="repeaters.1.name") is not None


def test_a_crossed_pair_comes_back_beside_its_input(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['four_wire']}/edit").text))
    fields["nodes.1.drives_pair"] = "transmit"
    resp = client.post("/plans", data=fields | {"action": "check"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    error = dom.by_id("e-nodes.1.drives_pair")
    assert error is not None and "crossed pair" in error.text()
    assert _form(dom)["nodes.1.drives_pair"] == "transmit"  # nothing typed is lost


def test_a_bad_repeater_segment_comes_back_beside_its_input(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['segments']}/edit").text))
    fields["repeaters.0.downstream_segment"] = "annex"
    dom = parse_html(client.post("/plans", data=fields | {"action": "check"}).text)
    error = dom.by_id("e-repeaters.0.downstream_segment")
    assert error is not None and "main, store" in error.text()


def test_a_segments_own_plan_is_not_changed_by_a_copy(client, saved):
    before = copy.deepcopy(_rich_segments())
    client.get(f"/plans/{saved['segments']}/edit")
    assert load_plan(before) == load_plan(_rich_segments())


def test_a_costly_plan_of_segments_is_refused_naming_each_parts_share():
    from pairline.server.cost import cost_problems, estimated_check_s

    plan = load_plan(two_segments())
    (head, *_rest) = cost_problems(plan, 1e-3)
    assert head.field == "" and "segment 'main'" in head.message and "segment 'store'" in head.message
    # common practice: the parts are checked one after the other, so their estimated times add
    from pairline.engine.segments import plan_parts
    from pairline.server.cost import check_work

    total = sum(estimated_check_s(check_work(p.plan)) for p in plan_parts(plan))
    assert head.value == pytest.approx(round(total, 1), abs=0.051)
    assert cost_problems(plan, 60.0) == []


def test_a_receiver_of_a_further_segment_can_be_chosen(client, saved):
    resp = client.get(f"/plans/{saved['segments']}.json", params={"receiver": "b1"})
    store = next(p for p in resp.json()["parts"] if p["name"] == "store")
    assert store["data"]["waveforms"]["chosen"] == "b1"
