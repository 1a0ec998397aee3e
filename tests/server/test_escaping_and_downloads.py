"""Free text is shown as text everywhere (drawing, tables, editor inputs), and downloads keep every row."""

import csv
import io
import json

from tests.server.html_dom import parse_html
from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC

# quotes of both kinds, angle brackets, an event handler and an entity: everything that escapes an attribute or
# starts an element if written out raw
PAYLOAD = "\"'><svg onload=alert(1)>&amp;</textarea>"


def hostile_plan() -> dict:
    return PLAN_DOC | {
        "title": PAYLOAD,
        "notes": PAYLOAD,
        "driver": {"name": PAYLOAD + "d"},
        "nodes": [{"name": PAYLOAD + "1", "position_m": 50.0}, {"name": PAYLOAD + "2", "position_m": 100.0}],
    }


def test_every_free_text_field_is_escaped_on_the_checked_plan_and_in_its_drawing(client):
    plan_id = client.post("/api/plans", json=hostile_plan()).json()["id"]
    text = client.get(f"/plans/{plan_id}").text
    assert "<svg onload" not in text
    dom = parse_html(text)
    for element in dom.iter():
        assert not any(name.startswith("on") for name in element.attrs), (element.tag, element.attrs)
    assert dom.find("h1").text() == PAYLOAD
    drawing = dom.find("svg", class_="bus-svg")
    labels = [t.text() for t in drawing.find_all("text")]
    assert f"{PAYLOAD}d (driver)" in labels
    titles = [t.text() for t in drawing.find_all("title")]
    assert any(t.startswith(f"Driver {PAYLOAD}d") for t in titles)
    names = [th.text() for th in dom.find_all("th", class_="node-name")]
    assert names == [PAYLOAD + "1", PAYLOAD + "2"]


def test_every_free_text_field_keeps_its_exact_value_in_the_editor_inputs(client):
    plan_id = client.post("/api/plans", json=hostile_plan()).json()["id"]
    text = client.get(f"/plans/{plan_id}/edit").text
    assert "<svg onload" not in text
    dom = parse_html(text)
    values = {e.attrs["name"]: e.attrs.get("value") for e in dom.find_all("input") if "name" in e.attrs}
    assert values["title"] == PAYLOAD
    assert values["driver.name"] == PAYLOAD + "d"
    assert values["nodes.0.name"] == PAYLOAD + "1" and values["nodes.1.name"] == PAYLOAD + "2"
    notes = dom.find(name="notes")
    assert (notes.attrs.get("value") if notes.tag == "input" else notes.text()) == PAYLOAD


def test_the_checked_draft_carries_the_plan_in_one_attribute(client):
    names = {f"nodes.{i}.name": f"{PAYLOAD}{i}" for i in range(5)}
    form = (
        FIVE_NODE_FORM | names | {"title": PAYLOAD, "notes": PAYLOAD, "driver.name": PAYLOAD + "d", "action": "check"}
    )
    resp = client.post("/plans", data=form)
    assert resp.status_code == 200 and "<svg onload" not in resp.text
    draft = json.loads(parse_html(resp.text).find("input", name="plan_json").attrs["value"])
    assert draft["title"] == PAYLOAD and draft["nodes"][1]["name"] == PAYLOAD + "1"


def test_the_bill_of_materials_csv_has_every_row_of_the_page(client):
    doc = PLAN_DOC | {"bias": {"position_m": 0.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0}}
    plan_id = client.post("/api/plans", json=doc).json()["id"]
    bom = client.get(f"/plans/{plan_id}.json").json()["summary"]["bom"]
    resp = client.get(f"/plans/{plan_id}/bom.csv")
    assert resp.status_code == 200 and resp.text.startswith("\ufeff")  # UTF-8 byte-order mark for spreadsheets
    rows = list(csv.reader(io.StringIO(resp.text.lstrip("\ufeff"))))
    assert rows[0] == ["item", "value", "quantity", "rating", "note"]
    assert [r[0] for r in rows[1:]] == [b["item"] for b in bom]
    assert [int(r[2]) for r in rows[1:]] == [b["quantity"] for b in bom]
    # Source: the plan itself: two terminators (one at each end), a pull-up and a pull-down, the cable, the
    # driver's transceiver and one row for the two receivers of one class.
    terminators = [r for r in rows[1:] if r[0].startswith("Terminator")]
    assert sum(int(r[2]) for r in terminators) == 2
    assert sorted(r[0].split(" (")[0] for r in rows[1:] if r[0].startswith("Bias")) == [
        "Bias pull-down resistor",
        "Bias pull-up resistor",
    ]
    assert sum(r[0].startswith("Cable") for r in rows[1:]) == 1
    assert sum(int(r[2]) for r in rows[1:] if "transceiver" in r[0].lower() or r[0] == "Receiver") == 3
