"""The editor in daily use: drafts come back, node tables paste in, decimal commas, blank and cleared inputs."""

import re

import pytest
from pairline.engine.library import TRANSCEIVERS
from pairline.server.node_table import read_node_table
from pairline.server.quantities import QuantityError, parse_quantity

from tests.server.html_dom import parse_html
from tests.server.test_pages import FIVE_NODE_FORM


def _inputs(dom) -> dict[str, str]:
    """What the form sends for its text inputs: row templates and unticked remove boxes left out."""
    return {
        e.attrs["name"]: e.attrs.get("value", "")
        for e in dom.find_all("input")
        if "name" in e.attrs
        and "__i__" not in e.attrs["name"]
        and e.attrs.get("type") not in ("checkbox", "file")
        and (e.attrs.get("type") != "radio" or "checked" in e.attrs)
    }


@pytest.mark.parametrize(
    ("text", "metres"),
    [
        # common practice: a decimal comma (ISO 80000-1 allows either comma or point as the decimal sign).
        ("12,5", 12.5),
        ("0,125", 0.125),
        ("12,5 m", 12.5),
        ("12,50", 12.5),
    ],
)
def test_a_decimal_comma_is_a_decimal_point(text, metres):
    assert parse_quantity(text, "length", "metric") == pytest.approx(metres, rel=1e-12)


@pytest.mark.parametrize(("text", "readings"), [("1,500", ("1.5", "1500")), ("2,250", ("2.25", "2250"))])
def test_a_comma_that_could_group_thousands_is_an_error_showing_both_readings(text, readings):
    with pytest.raises(QuantityError) as err:
        parse_quantity(text, "length", "metric")
    assert all(r in err.value.reason for r in readings)


@pytest.mark.parametrize("text", ["1,234,567", "1,500.5"])
def test_a_comma_is_never_a_silent_thousands_separator(text):
    with pytest.raises(QuantityError) as err:
        parse_quantity(text, "length", "metric")
    assert text.replace(",", "") in err.value.reason


def test_the_form_reads_a_decimal_comma_and_names_both_readings_of_an_ambiguous_one(client):
    form = FIVE_NODE_FORM | {"nodes.0.stub_length_m": "1,5", "action": "save"}
    saved = client.post("/plans", data=form, follow_redirects=False)
    assert saved.status_code == 303
    plan = client.get(saved.headers["location"] + ".json").json()["plan"]
    # common practice: "1,5" with a decimal comma is one and a half.
    assert plan["nodes"][0]["stub_length_m"] == pytest.approx(1.5, rel=1e-12)
    bad = client.post("/plans", data=FIVE_NODE_FORM | {"nodes.0.position_m": "1,200", "action": "check"})
    assert bad.status_code == 422
    message = parse_html(bad.text).by_id("e-nodes.0.position_m").text()
    assert "1.2" in message and "1200" in message


def test_a_cleared_supply_is_an_error_beside_it(client):
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"supply_v": "", "action": "check"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    box = dom.find("input", name="supply_v")
    assert box.attrs.get("aria-invalid") == "true"
    message = dom.by_id("e-supply_v")
    assert message.parent is box.parent
    # Source: the plan model's supply bounds (1.5 V to 15 V), as the JSON API reports them.
    assert "empty" in message.text() and "1.5 V to 15 V" in message.text()


def test_an_empty_form_says_so_beside_the_node_table_and_keeps_its_blank_rows(client):
    editor = parse_html(client.get("/plans/new").text)
    fields = _inputs(editor)
    for select in editor.find_all("select"):
        if "__i__" not in select.attrs["name"]:
            chosen = select.find("option", selected="") or select.find("option")
            fields[select.attrs["name"]] = chosen.attrs["value"]
    blank_rows = sum(1 for name in fields if name.startswith("nodes.") and name.endswith(".name"))
    resp = client.post("/plans", data=fields | {"action": "check"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    message = dom.by_id("e-nodes")
    table = dom.by_id("node-rows")
    assert message is not None and "no nodes" in message.text()
    assert any(a is message.parent for a in table.ancestors())  # in the node table's fieldset
    assert dom.find("a", href="#node-rows") is not None  # the list at the top links to the table
    again = sum(1 for name in _inputs(dom) if name.startswith("nodes.") and name.endswith(".name"))
    assert again == blank_rows == 5


def test_the_new_plan_driver_class_suits_the_new_plan_rate(client):
    data = client.get("/plans/new.json").json()
    key = data["values"]["driver.transceiver"]
    rate = float(data["values"]["bit_rate_bps"].split()[0]) * 1e3  # "115.2 kbit/s"
    driver = TRANSCEIVERS[key]
    # common practice: a driver's 10-90 % rise time at most 30 % of a bit, and the slowest class that does,
    # since slower edges reflect less on stubs.
    assert driver.rise_time_s <= 0.3 / rate
    faster_than_needed = [t for t in TRANSCEIVERS.values() if rate <= t.max_bit_rate_bps < driver.max_bit_rate_bps]
    assert faster_than_needed == []


def test_edit_this_draft_returns_the_editor_as_typed(client):
    form = FIVE_NODE_FORM | {"nodes.0.stub_length_m": "0,5", "action": "check"}
    report = parse_html(client.post("/plans", data=form).text)
    button = report.by_id("edit-draft")
    assert button is not None and "Edit this draft" in button.text()
    hidden = {e.attrs["name"]: e.attrs["value"] for e in button.parent.find_all("input")}
    editor = client.post("/plans", data=hidden)
    assert editor.status_code == 200
    values = _inputs(parse_html(editor.text))
    for name in ("title", "bit_rate_bps", "nodes.4.name", "nodes.0.stub_length_m", "bias.pull_up_ohm"):
        assert values[name] == form[name]


TWENTY_ROWS = "\n".join(f"probe-{k + 1}\t{18 * (k + 1)},5\t0,5\t1/2" for k in range(20))


def test_a_pasted_twenty_row_table_fills_twenty_node_rows(client):
    fields = {k: v for k, v in FIVE_NODE_FORM.items() if not k.startswith("nodes.")}
    fields |= {"node_table": "Name\tPosition\tStub\tUnit loads\n" + TWENTY_ROWS, "action": "paste_nodes"}
    resp = client.post("/plans", data=fields)
    assert resp.status_code == 200
    values = _inputs(parse_html(resp.text))
    names = [values[f"nodes.{k}.name"] for k in range(20)]
    assert names == [f"probe-{k + 1}" for k in range(20)] and "nodes.20.name" not in values
    assert values["nodes.19.position_m"] == "360,5" and values["nodes.3.unit_loads"] == "1/2"
    checked = client.post("/plans", data={**fields, **values, "action": "save"}, follow_redirects=False)
    plan = client.get(checked.headers["location"] + ".json").json()["plan"]
    assert len(plan["nodes"]) == 20
    # common practice: "360,5" with a decimal comma is 360.5 m; 1/2 UL is TIA-485-A's half unit load.
    assert plan["nodes"][19]["position_m"] == pytest.approx(360.5, rel=1e-12)
    assert plan["nodes"][0]["unit_loads"] == 0.5


def test_pasted_rows_follow_the_rows_already_typed_unless_they_replace_them(client):
    fields = FIVE_NODE_FORM | {"node_table": "extra-1\t390\nextra-2\t395", "action": "paste_nodes"}
    kept = _inputs(parse_html(client.post("/plans", data=fields).text))
    assert [kept[f"nodes.{k}.name"] for k in range(7)] == [f"valve-{k}" for k in range(1, 6)] + ["extra-1", "extra-2"]
    replaced = _inputs(parse_html(client.post("/plans", data=fields | {"node_table_replace": "1"}).text))
    assert replaced["nodes.0.name"] == "extra-1" and "nodes.2.name" not in replaced


def test_a_bad_paste_names_row_and_column_and_loses_nothing(client):
    text = "name,position,stub\ngate-1,40,0.5\ngate-2,lots,1\n,60,1\ngate-4,80,1,200"
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"node_table": text, "action": "paste_nodes"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    assert dom.find("textarea", name="node_table").text() == text
    messages = [li.text() for li in dom.by_id("e-node_table").find_all("li")]
    assert any(m.startswith("Row 3, position: 'lots'") for m in messages)
    assert any(m.startswith("Row 4, name") for m in messages)
    assert any(m.startswith("Row 5:") and "4 cells" in m for m in messages)
    assert _inputs(dom)["nodes.4.name"] == "valve-5"  # the typed table is untouched


def test_a_header_may_reorder_columns_and_state_their_unit():
    table = read_node_table("Stub (ft);Node;Position (ft)\n10;far;1000", "metric")
    assert table.problems == []
    assert table.rows == [{"stub_length_m": "10 ft", "name": "far", "position_m": "1000 ft"}]


def test_a_csv_file_pastes_like_text(client):
    body = ("\ufeffname;position;stub;unit loads\n" + TWENTY_ROWS.replace("\t", ";")).encode("utf-8")
    fields = {k: v for k, v in FIVE_NODE_FORM.items() if not k.startswith("nodes.")} | {"action": "paste_nodes"}
    resp = client.post("/plans", data=fields, files={"node_table_file": ("probes.csv", body, "text/csv")})
    assert resp.status_code == 200
    assert _inputs(parse_html(resp.text))["nodes.19.name"] == "probe-20"


def test_a_saved_plan_names_its_parent_by_title_and_a_readable_date_and_never_lists_copies(client):
    from tests.server.test_pages import PLAN_DOC

    parent = client.post("/api/plans", json=PLAN_DOC | {"title": "Boiler room"}).json()["id"]
    child = client.post(f"/api/plans?parent={parent}", json=PLAN_DOC | {"title": "Boiler room, pump moved"}).json()
    parent_text = client.get(f"/plans/{parent}").text
    # a shared link does not lead to the copies others made of it
    assert child["id"] not in parent_text and "pump moved" not in parent_text
    child_page = parse_html(client.get(child["url"]).text)
    assert {a.attrs.get("href"): a.text() for a in child_page.find_all("a")}[f"/plans/{parent}"] == "“Boiler room”"
    saved = child_page.find("time")
    # common practice: a date people read, "2 December 2026, 08:06 UTC", not an ISO 8601 timestamp.
    assert re.fullmatch(r"\d{1,2} [A-Z][a-z]+ \d{4}, \d{2}:\d{2} UTC", saved.text())
    assert "T" in saved.attrs["datetime"]  # the machine-readable time stays in the attribute


def test_counts_of_findings_agree_with_their_nouns():
    from pairline.server.wording import counts_text

    # common practice: English agreement, one check breaks, two checks break.
    assert counts_text({"breaks": 1, "tight": 0, "holds": 1}) == "1 check breaks · 1 holds"
    assert counts_text({"breaks": 2, "tight": 1, "holds": 61}) == "2 checks break · 1 close to the limit · 61 hold"
    assert counts_text({"breaks": 0, "tight": 0, "holds": 5}) == "5 checks hold"
