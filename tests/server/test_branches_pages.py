"""Branches on the web and in the terminal: the editor keeps every branch and every node's place on it, a bad
branch lands beside its field, the drawing draws each branch to the stubs' scale with its nodes along it, the report
and the CLI say where each branch's nodes are, and the bill of materials counts the branch's cable once."""

import json
from pathlib import Path

import pytest
from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.cli import main
from pairline.server.diagram import bus_drawing
from pairline.server.forms import form_from_plan, parse_form
from pairline.server.node_table import read_node_table

from tests.engine.topology_plans import with_spur
from tests.server.html_dom import parse_html
from tests.server.test_topology_pages import _form

SAMPLE = Path(__file__).resolve().parents[2] / "sample_buses" / "print-shop-ink-room-spur.json"


def _sample() -> dict:
    return json.loads(SAMPLE.read_text(encoding="utf-8"))


@pytest.mark.parametrize("doc", [_sample(), with_spur()], ids=["one bus", "segments"])
def test_the_editor_keeps_every_branch_and_every_node_on_it(doc):
    plan = load_plan(doc)
    parsed = parse_form(form_from_plan(plan_to_dict(plan)).values)
    assert parsed.problems == []
    assert load_plan(parsed.doc) == plan


@pytest.fixture(scope="module")
def saved(client):
    ids = {}
    for name, doc in (("sample", _sample()), ("segments", with_spur())):
        resp = client.post("/api/plans", json=doc)
        assert resp.status_code == 201, resp.text
        ids[name] = resp.json()["id"]
    return ids


def test_the_editor_page_round_trips_through_the_browser_form(client, saved):
    # What the page's own form sends, saved again, is the same plan.
    dom = parse_html(client.get(f"/plans/{saved['segments']}/edit").text)
    fields = _form(dom)
    assert fields["branches.0.name"] == "side-room" and fields["segments.0.branches.0.name"] == "loft"
    assert fields["nodes.2.branch"] == "side-room" and fields["nodes.2.position_m"] == "20"
    resp = client.post("/plans", data=fields | {"action": "save"}, follow_redirects=False)
    assert resp.status_code == 303, resp.text[:500]
    again = client.get(resp.headers["location"] + ".json").json()["plan"]
    assert load_plan(again) == load_plan(with_spur())


def test_a_node_on_an_unknown_branch_lands_beside_its_field_with_the_text_kept(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['sample']}/edit").text))
    fields |= {"nodes.2.branch": "ink-rom", "action": "check"}
    resp = client.post("/plans", data=fields)
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    error = dom.by_id("e-nodes.2.branch")
    assert error is not None and "'ink-rom'" in error.text() and "'ink-room'" in error.text()
    assert _form(dom)["nodes.2.branch"] == "ink-rom"  # what was typed comes back


def test_a_branch_past_the_trunk_end_names_the_trunk_length(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['sample']}/edit").text))
    fields |= {"branches.0.junction_position_m": "75", "action": "check"}
    resp = client.post("/plans", data=fields)
    assert resp.status_code == 422
    error = parse_html(resp.text).by_id("e-branches.0.junction_position_m")
    assert error is not None and "60 m" in error.text()


def test_the_plan_page_says_where_each_branch_node_is_and_draws_the_branch(client, saved):
    resp = client.get(f"/plans/{saved['sample']}")
    dom = parse_html(resp.text)
    row = dom.by_id("node-3")  # ink-cyan, the third node
    assert "5 m along branch 'ink-room' (from 35 m)" in row.text()
    assert "breaks" in row.attrs["class"]  # the branch breaks, and with it its nodes' worst verdict
    branch = next(g for g in dom.find_all("g") if "branch" in g.attrs.get("class", "").split())
    assert "verdict-breaks" in branch.attrs["class"] and "stub.branch" in branch.find_all("title")[0].text()


def test_the_drawing_draws_the_branch_and_its_nodes_to_the_stubs_scale():
    # Hand layout of the sample: a 14 m branch at 35 m with nodes 5, 10 and 14 m along it, each on a 0.2 m stub.
    plan = load_plan(_sample())
    d = bus_drawing(plan, {}, "metric", branch_verdicts={"ink-room": "breaks"})
    (branch,) = d.branches
    assert branch.stub_bottom_y - branch.stub_top_y == pytest.approx(14.0 * d.stub_px_per_m)
    assert branch.x == pytest.approx(d.trunk_x0 + 35.0 * d.px_per_m)
    depth = {n.name: n.stub_bottom_y - d.trunk_y for n in d.nodes if n.branch_x is not None}
    assert depth == pytest.approx(
        {n: a * d.stub_px_per_m for n, a in (("ink-cyan", 5), ("ink-magenta", 10), ("ink-yellow", 14))}
    )
    across = {n.name: n.x - n.branch_x for n in d.nodes if n.branch_x is not None}
    assert list(across.values()) == pytest.approx([0.2 * d.stub_px_per_m] * 3)
    labels = sorted(n.label_x for n in [*d.nodes, *d.branches] if n.show_label)
    assert all(b - a >= 13.0 for a, b in zip(labels, labels[1:], strict=False))  # names never overlap


def test_the_cli_lists_each_branch_with_its_nodes(capsys):
    main(["check", str(SAMPLE)])
    out = capsys.readouterr().out
    assert "branch 'ink-room': 14 m from the trunk at 35 m; 'ink-cyan' at 5 m, 'ink-magenta' at 10 m" in out


def test_the_bill_of_materials_counts_the_branch_once_and_each_node_s_own_stub():
    # Hand sum: trunk 60 m + branch 14 m + stubs (driver 0.2, four stations 0.3 each, three sensors 0.2 each)
    # 2.0 m = 76 m; with 10 % spare (common practice) 83.6 m, ordered as 84 m.
    report = check_plan(load_plan(_sample()))
    (cable,) = [item for item in report.summary.bom if item.item.startswith("Cable")]
    assert cable.value == "84 m" and "branches 14 m" in cable.note and "stubs 2 m" in cable.note


def test_a_pasted_node_table_may_name_each_node_s_branch():
    table = read_node_table(
        "name\tbranch\tposition\tstub\nink-black\tink-room\t12\t0,2\nstation-5\t\t30\t0,3", "metric"
    )
    assert table.problems == []
    assert [r.get("branch", "") for r in table.rows] == ["ink-room", ""]
