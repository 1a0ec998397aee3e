"""Branches on the web and in the terminal: the editor keeps every branch and every node's place on it, a bad
branch lands beside its field, the drawing draws each branch to the stubs' scale with its nodes along it, the report
and the CLI say where each branch's nodes are, and the bill of materials counts the branch's cable once."""

import json
from pathlib import Path

import pytest
from pairline.engine.check import check_plan
from pairline.engine.network import check_network
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.engine.segments import plan_parts
from pairline.server.cli import main
from pairline.server.diagram import bus_drawing
from pairline.server.forms import form_from_plan, parse_form
from pairline.server.network_diagram import FIRST_ROW_Y_PX, LEFT_PX, RIGHT_PX, ROW_PX, WIDTH_PX, network_drawing
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


def _checked_with(client, plan_id: str, changes: dict[str, str]):
    """The editor's form of a saved plan with `changes` typed in, sent to check: the answer's status and page."""
    fields = _form(parse_html(client.get(f"/plans/{plan_id}/edit").text)) | changes | {"action": "check"}
    resp = client.post("/plans", data=fields)
    return resp.status_code, parse_html(resp.text)


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
    status, dom = _checked_with(client, saved["sample"], {"nodes.2.branch": "ink-rom"})
    assert status == 422
    error = dom.by_id("e-nodes.2.branch")
    assert error is not None and "'ink-rom'" in error.text() and "'ink-room'" in error.text()
    assert _form(dom)["nodes.2.branch"] == "ink-rom"  # what was typed comes back


def test_a_branch_past_the_trunk_end_names_the_trunk_length(client, saved):
    status, dom = _checked_with(client, saved["sample"], {"branches.0.junction_position_m": "75"})
    assert status == 422
    error = dom.by_id("e-branches.0.junction_position_m")
    assert error is not None and "60 m" in error.text()


def test_the_plan_page_says_where_each_branch_node_is_and_draws_the_branch(client, saved):
    resp = client.get(f"/plans/{saved['sample']}")
    dom = parse_html(resp.text)
    row = dom.by_id("node-3")  # ink-cyan, the third node
    assert "5 m along branch 'ink-room' (from 35 m)" in row.text()
    assert "breaks" in row.attrs["class"]  # the branch breaks, and with it its nodes' worst verdict
    branch = next(a for a in dom.find_all("a") if "branch" in a.attrs.get("class", "").split())
    assert "verdict-breaks" in branch.attrs["class"] and "stub.branch" in branch.find_all("title")[0].text()
    # The branch carries a node's breaks marker (a square) and links to its row in the branch table.
    assert branch.find_all("rect", **{"class": "mark"}) and branch.attrs["href"] == "#branch-1"


def test_the_plan_page_lists_each_branch_with_its_junction_length_nodes_and_verdict(client, saved):
    dom = parse_html(client.get(f"/plans/{saved['sample']}").text)
    row = dom.by_id("branch-1")
    cells = [c.text().strip() for c in row.find_all("td")]
    # The sample as written: 'ink-room' leaves the trunk at 35 m and runs 14 m, three sensors along it.
    assert row.find_all("th")[0].text().strip() == "ink-room"
    assert cells[:3] == ["35 m", "14 m", "ink-cyan, ink-magenta, ink-yellow"]
    assert "breaks" in cells[3] and "stub.branch" in cells[3]
    # The finding about the branch says which branch, linking to its row; the row links back to the finding.
    finding = next(li for li in dom.find_all("li") if li.attrs.get("data-rule") == "stub.branch")
    assert [a.attrs["href"] for a in finding.find_all("a")][:1] == ["#branch-1"]
    assert row.find_all("a")[0].attrs["href"] == "#" + finding.attrs["id"]


def test_a_page_of_segments_lists_each_segment_s_branches_under_its_own_ids(client, saved):
    dom = parse_html(client.get(f"/plans/{saved['segments']}").text)
    # with_spur: 'side-room' (40 m at 150 m) on the master's trunk, 'loft' (12 m at 250 m) on the store segment.
    side, loft = dom.by_id("p1-branch-1"), dom.by_id("p2-branch-1")
    assert side is not None and loft is not None
    assert [c.text().strip() for c in side.find_all("td")][:3] == ["150 m", "40 m", "s1, s2"]
    assert [c.text().strip() for c in loft.find_all("td")][:3] == ["250 m", "12 m", "l1"]
    overview = dom.find_all("svg", **{"class": "bus-svg"})[0]
    assert len(overview.find_all("line", **{"class": "branch-line"})) == 2  # both branches in the overview too


def test_the_svg_draws_the_branch_in_proportion_to_the_plan(client, saved):
    dom = parse_html(client.get(f"/plans/{saved['sample']}").text)
    svg = dom.find_all("svg", **{"class": "bus-svg"})[0]
    (run,) = svg.find_all("line", **{"class": "branch-line"})
    drawn_px = float(run.attrs["y2"]) - float(run.attrs["y1"])
    bar = svg.find_all("g", **{"class": "stub-bar"})[0]
    upright = bar.find_all("line")[0]
    bar_px = float(upright.attrs["y2"]) - float(upright.attrs["y1"])
    bar_m = float(bar.find_all("text")[0].text().split()[0])
    # Source: a scale drawing, the branch on the stubs' scale that the bar shows: 14 m of branch against the
    # bar's 10 m (the largest 1-2-5 length within the 14 m longest run) is 1.4 times the bar.
    assert bar_m == 10.0
    assert drawn_px / bar_px == pytest.approx(14.0 / 10.0, rel=1e-3)


def test_a_feet_plan_shows_branch_lengths_in_feet_and_words_a_node_past_its_branch_end_in_feet(client):
    doc = _sample() | {"display_units": "imperial"}
    plan_id = client.post("/api/plans", json=doc).json()["id"]
    fields = _form(parse_html(client.get(f"/plans/{plan_id}/edit").text))
    # Source: 1 ft = 0.3048 m exactly: 35 m = 114.829 ft, 14 m = 45.9318 ft.
    assert fields["branches.0.junction_position_m"] == "114.829" and fields["branches.0.length_m"] == "45.9318"
    status, dom = _checked_with(client, plan_id, {"nodes.4.position_m": "50"})
    assert status == 422
    error = dom.by_id("e-nodes.4.position_m").text()
    # 50 ft = 15.24 m, past the 14 m (45.9 ft) branch: the value typed and the allowed range, both in feet.
    assert "50 ft (15.2 m) along branch 'ink-room'" in error and "allowed 0 ft to 45.9 ft (14 m)" in error
    assert _form(dom)["nodes.4.position_m"] == "50"
    # The checked page of the feet plan words the branch's fix in feet, short lengths included (53 cm = 1.74 ft).
    page = client.get(f"/plans/{plan_id}").text
    assert "each node on a stub of &lt;= 1.74 ft (53 cm)" in page and "&lt;= 53 cm" not in page


def test_a_branch_length_that_is_not_a_number_lands_beside_its_field(client, saved):
    status, dom = _checked_with(client, saved["sample"], {"branches.0.length_m": "fourteen"})
    assert status == 422
    error = dom.by_id("e-branches.0.length_m").text()
    # The model's bounds for a branch: 0.1 m to 4000 m.
    assert "Branch 1 ('ink-room') length is 'fourteen'" in error and "allowed 0.1 m to 4000 m" in error
    assert _form(dom)["branches.0.length_m"] == "fourteen"


def test_a_branch_row_is_added_and_removed_without_a_script(client, saved):
    fields = _form(parse_html(client.get(f"/plans/{saved['segments']}/edit").text))
    dom = parse_html(client.post("/plans", data=fields | {"action": "add_row:segments.0.branches"}).text)
    assert dom.find_all("input", name="segments.0.branches.1.name")  # a blank second branch row of the segment
    fields = _form(dom) | {"branches.0.remove": "1", "action": "check"}
    for key in [k for k in fields if k.endswith(".branch") and fields[k] == "side-room"]:
        fields[key] = ""
        fields[key.replace(".branch", ".position_m")] = "150"
    resp = client.post("/plans", data=fields | {"action": "save"}, follow_redirects=False)
    assert resp.status_code == 303, resp.text[:300]
    again = client.get(resp.headers["location"] + ".json").json()["plan"]
    assert again["branches"] == [] and [b["name"] for b in again["segments"][0]["branches"]] == ["loft"]


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


def test_the_cli_lists_each_segment_s_branches_and_a_feet_plan_s_in_feet(capsys, tmp_path):
    spur = tmp_path / "spur.json"
    spur.write_text(json.dumps(with_spur()), encoding="utf-8")
    main(["check", str(spur)])
    out = capsys.readouterr().out
    assert "branch 'side-room': 40 m from the trunk at 150 m; 's1' at 20 m, 's2' at 40 m" in out
    assert "branch 'loft': 12 m from the trunk at 250 m; 'l1' at 12 m" in out
    assert out.index("branch 'side-room'") < out.index("Segment 'store'") < out.index("branch 'loft'")
    feet = tmp_path / "feet.json"
    feet.write_text(json.dumps(_sample() | {"display_units": "imperial"}), encoding="utf-8")
    main(["check", str(feet)])
    out = capsys.readouterr().out
    # Source: 1 ft = 0.3048 m exactly: 14 m = 45.9 ft, 35 m = 115 ft, 5 m = 16.4 ft (three figures).
    assert "branch 'ink-room': 45.9 ft (14 m) from the trunk at 115 ft (35 m); 'ink-cyan' at 16.4 ft (5 m)" in out
    # Short lengths the rules write in cm are restated too: 53 cm / 0.3048 m per ft = 1.74 ft.
    assert "each node on a stub of <= 1.74 ft (53 cm)" in out and "<= 53 cm" not in out


def test_each_segment_s_cable_counts_its_own_branches_once():
    parts = check_network(load_plan(with_spur())).parts
    cables = [next(i for i in p.report.summary.bom if i.item.startswith("Cable")) for p in parts]
    # Hand sums, with 10 % spare (common practice), rounded up to the metre:
    # main: trunk 300 m + branch 40 m + stubs a1 0.5, a2 0.5, s1 0.5 (s2, the driver and the repeater's port 0)
    #   = 341.5 m, x 1.1 = 375.65 -> 376 m;
    # store: trunk 400 m + branch 12 m + stubs b1 1, b2 1 (l1 and the repeater's port 0) = 414 m,
    #   x 1.1 = 455.4 -> 456 m.
    assert [c.value for c in cables] == ["376 m", "456 m"]
    assert "branches 40 m" in cables[0].note and "stubs 1.5 m" in cables[0].note
    assert "branches 12 m" in cables[1].note and "stubs 2 m" in cables[1].note


def test_branches_at_one_junction_each_count_whole_in_the_cable():
    doc = _sample()
    doc["branches"].append({"name": "store-room", "junction_position_m": 35.0, "length_m": 8.0})
    doc["nodes"].append({"name": "store-1", "branch": "store-room", "position_m": 3.0, "stub_length_m": 0.5})
    (cable,) = [i for i in check_plan(load_plan(doc)).summary.bom if i.item.startswith("Cable")]
    # Hand sum: the sample's 76 m (trunk 60, branch 14, stubs 2.0) + the second branch 8 m + its node's 0.5 m stub
    # = 84.5 m; with 10 % spare (common practice) 92.95 m, ordered as 93 m.
    assert cable.value == "93 m" and "branches 22 m" in cable.note and "stubs 2.5 m" in cable.note


def test_the_overview_of_segments_hangs_each_branch_below_its_junction_to_the_runs_scale():
    plan = load_plan(with_spur())
    parts = plan_parts(plan)
    repeaters = {"gate": ("main", 300.0, 0.0, False)}
    d = network_drawing(parts, [{}, {}], ["holds", "holds"], ["part-1", "part-2"], repeaters, "metric")
    # Hand layout: the store segment starts where the repeater sits, 300 m along the run, so the run spans
    # 300 + 400 = 700 m over the drawing's width; 'side-room' (40 m at 150 m) and 'loft' (12 m at 250 m of the
    # store's trunk, 550 m along the run) hang that many metres below their junctions, s1 20 m down its branch.
    scale = (WIDTH_PX - LEFT_PX - RIGHT_PX) / 700.0
    main, store = d.rows
    (side,) = main.branches
    (loft,) = store.branches
    assert side.x == pytest.approx(LEFT_PX + 150.0 * scale) and side.length_px == pytest.approx(40.0 * scale)
    assert loft.x == pytest.approx(LEFT_PX + 550.0 * scale) and loft.length_px == pytest.approx(12.0 * scale)
    s1 = next(m for m in main.marks if m.name == "s1")
    assert s1.x == pytest.approx(side.x) and s1.dy == pytest.approx(20.0 * scale)
    # The store's row moves down by the master's branch, so the branch never reaches it.
    assert store.y == pytest.approx(FIRST_ROW_Y_PX + ROW_PX + 40.0 * scale)
    assert "Branches hang below their junctions to the same scale" in d.caption
    # Each row's length is written in the middle of its widest stretch free of branches: the master's either side
    # of the branch at its middle (75 m or 225 m), the store's between 300 m and 550 m along the run.
    assert main.length_x == pytest.approx(LEFT_PX + 75.0 * scale) or main.length_x == pytest.approx(
        LEFT_PX + 225.0 * scale
    )
    assert store.length_x == pytest.approx(LEFT_PX + 425.0 * scale)


def test_a_segment_s_branch_past_its_trunk_end_lands_beside_its_field_named_in_one_sentence(client, saved):
    status, dom = _checked_with(client, saved["segments"], {"segments.0.branches.0.junction_position_m": "450"})
    assert status == 422
    error = dom.by_id("e-segments.0.branches.0.junction_position_m").text()
    # with_spur: the store segment's trunk is 400 m long.
    assert "Segment 1 ('store') branch 1 ('loft') junction is at 450 m, past the trunk end at 400 m" in error
    assert "allowed 0 m to 400 m" in error
