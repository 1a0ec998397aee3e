"""HTTP tests: every route, the JSON twins, the error envelope, and save -> open -> copy -> edit -> save."""

import json
import re

import pytest
from pairline.server.app import create_app
from pairline.server.settings import Settings

from tests.server.conftest import TestClient
from tests.server.html_dom import parse_html

FIVE_NODE_FORM = {
    "shown_units": "metric",
    "display_units": "metric",
    "title": "Irrigation row 7",
    "standard": "rs485",
    "bit_rate_bps": "19.2k",
    "supply_v": "5",
    "trunk_length_m": "400",
    "cable.class_key": "pair-24awg-120",
    "driver.name": "controller",
    "driver.position_m": "0",
    "default_device": "slew-2500ns",
    **{f"nodes.{i}.name": f"valve-{i + 1}" for i in range(5)},
    **{f"nodes.{i}.position_m": str(80 * (i + 1)) for i in range(5)},
    **{f"nodes.{i}.stub_length_m": "1" for i in range(5)},
    **{f"nodes.{i}.may_drive": "false" for i in range(5)},
    "terminations.0.position_m": "0",
    "terminations.0.kind": "parallel",
    "terminations.0.resistance_ohm": "120",
    "terminations.1.position_m": "400",
    "terminations.1.kind": "parallel",
    "terminations.1.resistance_ohm": "120",
    "bias.0.position_m": "0",
    "bias.0.pull_up_ohm": "620",
    "bias.0.pull_down_ohm": "620",
}
PLAN_DOC = {
    "title": "Bench bus",
    "bit_rate_bps": 9600,
    "trunk_length_m": 100.0,
    "nodes": [{"name": "left", "position_m": 50.0}, {"name": "right", "position_m": 100.0}],
    "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 100.0, "resistance_ohm": 120.0}],
}


def assert_problem(resp, *, field: str) -> dict:
    """The 422 envelope names `field` with its value, allowed range and a message; returns that problem."""
    assert resp.status_code == 422
    body = resp.json()
    assert body["status"] == 422
    found = [p for p in body["problems"] if p["field"] == field]
    assert found, f"no problem for {field}: {body['problems']}"
    problem = found[0]
    assert set(problem) == {"field", "label", "value", "allowed", "message"}
    assert problem["message"]
    return problem


@pytest.fixture(scope="module")
def samples_dir(tmp_path_factory):
    directory = tmp_path_factory.mktemp("samples")
    (directory / "bench-bus.json").write_text(json.dumps(PLAN_DOC))
    (directory / "broken.json").write_text("{not json")
    return directory


@pytest.fixture(scope="module")
def client(tmp_path_factory, samples_dir):
    app = create_app(tmp_path_factory.mktemp("db") / "plans.db", samples_dir=samples_dir)
    with TestClient(app) as c:
        yield c


@pytest.fixture(scope="module")
def saved_id(client):
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"action": "save"}, follow_redirects=False)
    assert resp.status_code == 303
    return resp.headers["location"].rsplit("/", 1)[1]


def test_start_page_offers_new_samples_and_import(client):
    resp = client.get("/")
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    links = [a.attrs["href"] for a in dom.find_all("a")]
    assert "/plans/new" in links and "/plans/new?units=imperial" in links
    samples = client.get("/index.json").json()["samples"]
    assert [s["slug"] for s in samples] == ["bench-bus"]  # the broken file is skipped, not fatal
    assert samples[0]["url"] in links
    assert client.get(samples[0]["url"]).status_code == 200
    assert dom.find("form", action="/import") is not None


def test_new_plan_editor_has_inputs_named_by_plan_path(client):
    dom = parse_html(client.get("/plans/new").text)
    names = {e.attrs.get("name") for e in dom.find_all("input")} | {e.attrs.get("name") for e in dom.find_all("select")}
    for name in (
        "bit_rate_bps",
        "trunk_length_m",
        "cable.z0_ohm",
        "default_device",
        "driver.device.class_key",
        "driver.device.rise_time_s",
        "driver.device.threshold_high_v",
        "nodes.0.stub_length_m",
        "nodes.0.device.class_key",
        "nodes.4.may_drive",
        "nodes.4.ground_offset_v",
        "terminations.1.resistance_ohm",
        "bias.0.pull_up_ohm",
        "grounding.signal_ground",
        "grounding.ground_series_ohm",
        "grounding.shield",
        "display_units",
    ):
        assert name in names
    imperial = client.get("/plans/new.json?units=imperial").json()
    assert imperial["units"] == "imperial" and imperial["fields"]["nodes"]["position_m"]["unit"] == "ft"


def test_checking_a_form_renders_the_report_without_saving(client):
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"action": "check"})
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    # Source: TIA-485-A receiver threshold ±200 mV with TI SLLA272's bias divider, by hand: 620 Ω / 620 Ω from
    # 5 V across 120 Ω || (120 Ω + 67 Ω of 400 m loop) and the receivers (~72 Ω) gives 275 mV at the bias end;
    # the far terminator keeps 120 / 187 of it, 176 mV, inside the ±200 mV band: the idle level breaks.
    assert dom.by_id("overall-verdict").attrs["data-verdict"] == "breaks"
    assert [li.attrs["data-rule"] for li in dom.find_all("li", class_="finding verdict-breaks")] == ["bias.idle_level"]
    assert dom.find("svg", class_="bus-svg") is not None
    assert len(dom.find_all("a", class_=None)) > 0
    save_form = dom.find("input", name="plan_json")
    assert save_form is not None
    saved = client.post("/plans", data={"plan_json": save_form.attrs["value"]}, follow_redirects=False)
    assert saved.status_code == 303 and saved.headers["location"].startswith("/plans/")


def test_checked_plan_page_shows_drawing_findings_nodes_waves_curve_summary_and_cautions(client, saved_id):
    resp = client.get(f"/plans/{saved_id}")
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    for section in ("h-drawing", "h-findings", "h-nodes", "h-waves", "h-curve", "h-summary", "h-safety"):
        assert dom.by_id(section) is not None, section
    node_marks = [g for g in dom.find_all("a") if "node" in g.attrs.get("class", "").split()]
    # Source: TI SLLA272, stub delay at most 1/10 of the rise time: 0.1 x 2.5 µs x 0.78 x c0 = 58 m, far above
    # the 1 m stubs; the idle-level break concerns the bus, not a node, so every marker holds.
    assert [g.attrs["class"] for g in node_marks] == ["node verdict-holds"] * 5
    assert [dom.by_id(f"node-{i}") is not None for i in range(1, 6)] == [True] * 5
    assert dom.find("polyline", class_="trace") is not None
    assert dom.find("rect", class_="band") is not None
    # Source: 400 m x 19.2 kbit/s = 7.7e6 m·bit/s, under the 1e8 rule of thumb; below 90 kbit/s TIA/EIA-422-B
    # Annex A allows 1200 m: the plan's mark on the curve holds, as the length findings do.
    assert dom.find("g", class_="plan-point verdict-holds") is not None
    assert dom.by_id("caution-surge") is not None and "codes" in resp.text
    assert dom.find("link", rel="stylesheet", media="print") is not None


def test_chosen_receiver_adds_its_waveform(client, saved_id):
    data = client.get(f"/plans/{saved_id}.json?receiver=valve-2").json()
    roles = {p["receiver"]: p["role"] for p in data["waveforms"]["plots"]}
    assert data["waveforms"]["worst"] in roles
    if data["waveforms"]["worst"] != "valve-2":
        assert roles["valve-2"] == "chosen"
    unknown = client.get(f"/plans/{saved_id}.json?receiver=nobody").json()
    assert unknown["waveforms"]["chosen_unknown"] == "nobody"


def test_the_plans_own_probes_are_drawn_on_its_page(client):
    probes = [{"kind": "driver_pin"}, {"kind": "junction", "position_m": 25.0}, {"kind": "node", "node": "right"}]
    plan_id = client.post("/api/plans", json=PLAN_DOC | {"probes": probes, "probe_signal": "step"}).json()["id"]
    data = client.get(f"/plans/{plan_id}.json").json()
    assert [p["probe"] for p in data["probes"]] == ["driver pin", "trunk at 25 m", "right"]
    assert all("single step" in p["signal"] for p in data["probes"])
    dom = parse_html(client.get(f"/plans/{plan_id}").text)
    assert dom.by_id("probes") is not None


@pytest.mark.parametrize("path", ["/", "/plans/new", "/plans/{id}", "/plans/{id}/edit"])
def test_every_page_has_a_json_twin(client, saved_id, path):
    url = path.format(id=saved_id)
    html = client.get(url)
    assert html.status_code == 200 and html.headers["content-type"].startswith("text/html")
    twin_href = parse_html(html.text).find("link", rel="alternate").attrs["href"]
    assert twin_href == (url + ".json" if url != "/" else "/index.json")
    twin = client.get(twin_href)
    assert twin.status_code == 200 and twin.headers["content-type"].startswith("application/json")
    assert twin.json()["page"] in {"start", "editor", "plan"}


def test_form_with_bad_values_comes_back_422_with_values_kept_and_messages_in_place(client):
    bad = FIVE_NODE_FORM | {"nodes.2.position_m": "9000", "bit_rate_bps": "fast", "title": "Kept <title>"}
    resp = client.post("/plans", data=bad | {"action": "check"})
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    for name, typed in (("nodes.2.position_m", "9000"), ("bit_rate_bps", "fast")):
        box = dom.find("input", name=name)
        assert box.attrs["value"] == typed and box.attrs.get("aria-invalid") == "true"
        message = dom.by_id(box.attrs["aria-describedby"])
        assert box.parent is message.parent  # the message sits beside its input
        assert typed in message.text()
    assert "4000" in dom.by_id("e-nodes.2.position_m").text()  # the allowed range is named
    assert dom.find("input", name="title").attrs["value"] == "Kept <title>"
    assert dom.find("input", name="nodes.4.name").attrs["value"] == "valve-5"
    assert dom.find("input", name="driver.name").attrs["value"] == "controller"


def test_form_error_for_a_non_number_names_the_range_once_and_the_node_by_name(client):
    bad = FIVE_NODE_FORM | {"bit_rate_bps": "fast", "nodes.3.ground_offset_v": "lots"}
    dom = parse_html(client.post("/plans", data=bad | {"action": "check"}).text)
    rate = dom.by_id("e-bit_rate_bps").text()
    # Source: the plan model's own bounds for bit_rate_bps (engine/plan.py), which the JSON API also reports
    # (checked at the end of this test).
    assert rate.startswith("Bit rate is 'fast'; write a number in bit/s")
    assert "allowed 50 bit/s to 100 Mbit/s" in rate
    offset = dom.by_id("e-nodes.3.ground_offset_v").text()
    assert offset.startswith("Node 4 ('valve-4') ground offset is 'lots'; write a number in V")
    listed = [li.text() for li in dom.by_id("problems").find_all("li")]
    assert any(t.startswith("Bit rate is 'fast'") for t in listed)
    assert not any("Bit rate: Bit rate" in t or t.count("Bit rate") > 1 for t in listed)
    api = client.post("/api/check", json=PLAN_DOC | {"bit_rate_bps": "fast"}).json()["problems"][0]
    assert api["allowed"]["min"] == 50 and api["allowed"]["max"] == 100e6


def test_json_api_checks_saves_and_reads_plans(client):
    checked = client.post("/api/check", json=PLAN_DOC)
    assert checked.status_code == 200 and checked.json()["page"] == "check" and "id" not in checked.json()
    saved = client.post("/api/plans", json=PLAN_DOC)
    assert saved.status_code == 201
    plan_id = saved.json()["id"]
    assert saved.headers["location"] == f"/plans/{plan_id}"
    read = client.get(f"/api/plans/{plan_id}").json()
    assert read["plan"]["title"] == "Bench bus" and read["parent_id"] is None
    child = client.post(f"/api/plans?parent={plan_id}", json=PLAN_DOC | {"title": "Bench bus 2"}).json()
    assert child["parent_id"] == plan_id
    assert client.get("/api/plans/doesnotexist0000").status_code == 404


def test_json_api_check_answers_the_report_without_the_advised_plans_findings(client):
    # common practice: the live verdict reads the plan's own findings; the advised plan's are on the saved page
    body = client.post("/api/check", json=PLAN_DOC).json()
    report = body["report"]
    assert report["findings"] and all(f["rule_id"] and f["verdict"] for f in report["findings"])
    assert sum(body["counts"].values()) == len(report["findings"])
    advice = report["advice"]
    assert "findings" not in advice and advice["verdict"] in ("holds", "tight", "breaks")
    assert sum(advice["counts"].values()) > 0 and "changes" in advice and advice["plan"]["nodes"]


def test_json_api_errors_use_one_envelope(client):
    problem = assert_problem(
        client.post("/api/check", json=PLAN_DOC | {"trunk_length_m": 5000}), field="trunk_length_m"
    )
    assert problem["value"] == 5000 and problem["allowed"]["max"] == 4000.0
    nodes = [{"name": "left", "position_m": 150.0}]
    assert_problem(client.post("/api/plans", json=PLAN_DOC | {"nodes": nodes}), field="nodes.0.position_m")
    as_json = {"content-type": "application/json"}
    assert_problem(client.post("/api/check", content=b"{nope", headers=as_json), field="")
    assert_problem(client.post("/api/check", content=b'{"trunk_length_m": NaN}', headers=as_json), field="")
    overflow = assert_problem(
        client.post("/api/check", content=b'{"trunk_length_m": 1e999, "bit_rate_bps": 9600}', headers=as_json),
        field="trunk_length_m",
    )
    assert overflow["value"] is None and "finite" in overflow["message"]


def test_save_open_copy_edit_save_keeps_the_original(client, saved_id):
    original = client.get(f"/plans/{saved_id}.json").json()
    edit = parse_html(client.get(f"/plans/{saved_id}/edit").text)
    assert edit.find("input", name="parent_id").attrs["value"] == saved_id
    fields = {e.attrs["name"]: e.attrs.get("value", "") for e in edit.find_all("input") if "name" in e.attrs}
    fields = {k: v for k, v in fields.items() if "__i__" not in k and not k.endswith(".remove")}
    for select in edit.find_all("select"):
        if "__i__" in select.attrs["name"]:
            continue
        chosen = select.find("option", selected="") or select.find("option")
        fields[select.attrs["name"]] = chosen.attrs["value"]
    fields["display_units"] = "metric"
    fields["title"] = "Irrigation row 7, valve 5 moved"
    fields["nodes.4.position_m"] = "390"
    resp = client.post("/plans", data=fields | {"action": "save"}, follow_redirects=False)
    assert resp.status_code == 303
    copy_id = resp.headers["location"].rsplit("/", 1)[1]
    assert copy_id != saved_id
    copy = client.get(f"/plans/{copy_id}.json").json()
    assert copy["parent_id"] == saved_id
    assert copy["plan"]["nodes"][4]["position_m"] == 390.0
    assert copy["plan"]["nodes"][0] == original["plan"]["nodes"][0]
    again = client.get(f"/plans/{saved_id}.json").json()
    assert again["plan"] == original["plan"]  # the shared plan never changes
    # the shared plan's page does not reveal who copied it; the copy's page names its parent
    assert "children" not in again and copy_id not in client.get(f"/plans/{saved_id}").text
    page = parse_html(client.get(f"/plans/{copy_id}").text)
    assert page.by_id("parent-plan").attrs["href"] == f"/plans/{saved_id}"


def test_unknown_ids_and_paths_get_the_404_page(client):
    for path in ("/plans/AAAAAAAAAAAAAAAA", "/plans/short", "/plans/AAAAAAAAAAAAAAAA/edit", "/nowhere"):
        resp = client.get(path)
        assert resp.status_code == 404 and "text/html" in resp.headers["content-type"]
        assert "Nothing here" in resp.text
    resp = client.get("/plans/AAAAAAAAAAAAAAAA.json")
    assert resp.status_code == 404 and resp.json()["status"] == 404
    assert client.get("/plans/AAAAAAAAAAAAAAAA/bom.csv").status_code == 404
    assert client.get("/plans/AAAAAAAAAAAAAAAA/download").status_code == 404


def test_oversized_bodies_are_refused(client, tmp_path):
    small = create_app(tmp_path / "small.db", load_samples=False, settings=Settings(max_body_bytes=1000))
    with TestClient(small) as c:
        resp = c.post("/api/check", content=b"x" * 5000, headers={"content-type": "application/json"})
        assert resp.status_code == 413 and resp.json()["status"] == 413

        def chunks():
            for _ in range(10):
                yield b"y" * 500

        streamed = c.post("/api/check", content=chunks(), headers={"content-type": "application/json"})
        assert streamed.status_code == 413
        page = c.post("/import", data={"plan_text": "z" * 5000}, headers={"accept": "text/html"})
        assert page.status_code == 413 and "text/html" in page.headers["content-type"]


def test_markup_in_names_is_shown_as_text(client):
    evil = "<img src=x onerror=alert(1)>"
    form = FIVE_NODE_FORM | {"nodes.0.name": evil, "title": "<script>alert(2)</script>"}
    resp = client.post("/plans", data=form | {"action": "save"})
    assert resp.status_code == 200
    for text in (resp.text, client.post("/plans", data=form | {"action": "check"}).text):
        assert "<img src=x" not in text and "<script>alert(2)" not in text
        assert "&lt;img src=x onerror=alert(1)&gt;" in text
    name_cell = parse_html(resp.text).find("th", class_="node-name")
    assert name_cell.text() == evil


def test_import_by_upload_and_paste_and_refusal_with_reasons(client):
    body = json.dumps(PLAN_DOC)
    uploaded = client.post(
        "/import", files={"plan_file": ("bench.json", body, "application/json")}, follow_redirects=False
    )
    assert uploaded.status_code == 303
    pasted = client.post("/import", data={"plan_text": body}, follow_redirects=False)
    assert pasted.status_code == 303 and pasted.headers["location"] != uploaded.headers["location"]
    broken = client.post("/import", data={"plan_text": '{"trunk_length_m": -1}'})
    assert broken.status_code == 422
    assert "trunk_length_m" in broken.text and "Trunk length" in broken.text
    assert parse_html(broken.text).find("textarea", name="plan_text").text() == '{"trunk_length_m": -1}'
    not_json = client.post("/import", data={"plan_text": "hello"})
    assert not_json.status_code == 422 and "not valid JSON" in not_json.text
    feet = json.dumps(PLAN_DOC | {"display_units": "imperial", "trunk_length_m": 1e9})
    text = client.post("/import", data={"plan_text": feet}).text.replace("\u202f", " ")
    # Source: 1 ft = 0.3048 m exactly: 1e9 m = 3 280 839 895 ft (3 280 000 000 to 3 digits).
    assert "Trunk length is 3 280 000 000 ft (1 000 000 000 m)" in text and "e+09" not in text


def test_downloads_plan_json_and_bill_of_materials_csv(client, saved_id):
    plan = client.get(f"/plans/{saved_id}/download")
    assert plan.status_code == 200 and "attachment" in plan.headers["content-disposition"]
    assert json.loads(plan.text)["title"] == "Irrigation row 7"
    csv_resp = client.get(f"/plans/{saved_id}/bom.csv")
    assert csv_resp.status_code == 200 and csv_resp.headers["content-type"].startswith("text/csv")
    # Source: Unicode Standard, sec. 23.8: the byte order mark U+FEFF encodes in UTF-8 as EF BB BF.
    assert csv_resp.content.startswith(b"\xef\xbb\xbf")
    lines = csv_resp.content.decode("utf-8-sig").strip().splitlines()
    assert lines[0] == "item,value,quantity,rating,note" and len(lines) >= 2
    assert "Ω" in csv_resp.content.decode("utf-8-sig")


def test_editor_buttons_add_rows_and_switch_units_without_javascript(client):
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"action": "add_node"})
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    assert dom.find("input", name="nodes.5.name") is not None
    assert dom.find("input", name="nodes.4.name").attrs["value"] == "valve-5"
    resp = client.post("/plans", data=FIVE_NODE_FORM | {"action": "units", "display_units": "imperial"})
    dom = parse_html(resp.text)
    # Source: 1 ft = 0.3048 m exactly -> 400 m = 1312.335958 ft, shown to 6 significant digits.
    assert dom.find("input", name="trunk_length_m").attrs["value"] == "1312.34"
    assert dom.find("input", name="shown_units").attrs["value"] == "imperial"


def test_a_failing_bus_is_a_page_not_an_error(client):
    form = FIVE_NODE_FORM | {"nodes.0.stub_length_m": "60", "driver.device.class_key": "edge-3ns"}
    resp = client.post("/plans", data=form | {"action": "check"})
    assert resp.status_code == 200
    dom = parse_html(resp.text)
    assert dom.by_id("overall-verdict").attrs["data-verdict"] == "breaks"
    fixes = [p.text() for p in dom.find_all("p", class_="fix")]
    assert fixes


def test_a_saved_plan_the_engine_now_refuses_opens_in_the_editor_with_reasons(client):
    store = client.app.state.store
    plan_id = store.save_plan(PLAN_DOC | {"trunk_length_m": 99_999.0}, engine_version="0.0.1")
    resp = client.get(f"/plans/{plan_id}")
    assert resp.status_code == 422
    dom = parse_html(resp.text)
    assert dom.find("input", name="trunk_length_m").attrs["aria-invalid"] == "true"
    assert dom.find("input", name="parent_id").attrs["value"] == plan_id
    assert_problem(client.get(f"/plans/{plan_id}.json"), field="trunk_length_m")


def test_imperial_plans_take_feet_and_explain_limits_in_feet(client):
    form = FIVE_NODE_FORM | {"shown_units": "imperial", "display_units": "imperial", "trunk_length_m": "1312.34"}
    form |= {f"nodes.{i}.position_m": str(250 * (i + 1)) for i in range(5)}
    form["terminations.1.position_m"] = "1312.34"
    resp = client.post("/plans", data=form | {"action": "save"}, follow_redirects=False)
    assert resp.status_code == 303
    data = client.get(resp.headers["location"] + ".json").json()
    # Source: 1 ft = 0.3048 m exactly: 1312.34 ft = 400.001 m; 250 ft = 76.2 m.
    assert data["plan"]["trunk_length_m"] == pytest.approx(400.001, abs=1e-3)
    assert data["plan"]["nodes"][0]["position_m"] == pytest.approx(76.2, rel=1e-12)
    assert data["units"] == "imperial" and data["facts"]["trunk"].endswith("ft")
    too_long = client.post("/plans", data=form | {"trunk_length_m": "20000", "action": "check"})
    message = parse_html(too_long.text).by_id("e-trunk_length_m").text().replace("\u202f", " ")
    # Source: 1 ft = 0.3048 m exactly: 20000 ft = 6096 m (6100 m to 3 digits); the plan's 4000 m limit is
    # 13123.36 ft (13 100 ft to 3 digits), its 0.1 m floor 0.328 ft. What was typed leads, in feet; metres follow
    # in brackets.
    assert message.startswith("Trunk length is 20 000 ft (6100 m)")
    assert "0.328 ft (0.1 m) to 13 100 ft (4000 m)" in message
    huge = client.post("/plans", data=form | {"trunk_length_m": "1e9", "action": "check"})
    message = parse_html(huge.text).by_id("e-trunk_length_m").text().replace("\u202f", " ")
    # Source: 1e9 ft = 304 800 000 m exactly (1 ft = 0.3048 m).
    assert "1 000 000 000 ft (305 000 000 m)" in message and "e+" not in message


def test_a_feet_plan_reads_in_feet_everywhere_and_edits_with_rounded_values(client):
    doc = PLAN_DOC | {
        "display_units": "imperial",
        "bias": {"position_m": 0.0, "pull_up_ohm": 620, "pull_down_ohm": 620},
    }
    doc["nodes"] = [{"name": "left", "position_m": 50.0, "stub_length_m": 0.2338, "unit_loads": 1 / 3}]
    plan_id = client.post("/api/plans", json=doc).json()["id"]
    form = parse_html(client.get(f"/plans/{plan_id}/edit").text)
    # Source: 1 ft = 0.3048 m exactly: 100 m = 328.0839895 ft, shown to 6 significant digits.
    assert form.find("input", name="trunk_length_m").attrs["value"] == "328.084"
    assert form.find("input", name="nodes.0.device.unit_loads").attrs["value"] == "1/3"
    csv_text = client.get(f"/plans/{plan_id}/bom.csv").content.decode("utf-8-sig")
    # Source: 1 ft = 0.3048 m exactly: the terminators at 0 m and 100 m sit at 0 ft and 328 ft (3 digits).
    assert "at 0 ft and 328 ft" in csv_text and not re.search(r"\d m\b", csv_text)
    page = client.get(f"/plans/{plan_id}.json").json()
    assert page["facts"]["trunk"] == "328 ft"
    # Source: 0.2338 m = 0.767 ft (0.2338 / 0.3048 = 0.76706), 3 significant digits.
    assert page["nodes"][0]["stub_text"] == "0.767 ft"
    metric = client.get(f"/plans/{client.post('/api/plans', json=doc | {'display_units': 'metric'}).json()['id']}.json")
    # Source: rounding to 3 significant digits, as the command line prints it.
    assert metric.json()["nodes"][0]["stub_text"] == "0.234 m"


def test_the_plan_twin_carries_the_same_report_as_the_command_line(client, saved_id):
    from pairline.engine.check import check_plan, report_to_dict
    from pairline.engine.plan import load_plan

    data = client.get(f"/plans/{saved_id}.json").json()
    expected = json.loads(json.dumps(report_to_dict(check_plan(load_plan(data["plan"])))))
    assert data["report"] == expected
    assert data["checked_with_engine"] == expected["engine_version"]


def test_root_twin_and_static_files_are_served(client):
    assert client.get("/.json").json() == client.get("/index.json").json()
    for asset, kind in (("pairline.css", "text/css"), ("print.css", "text/css"), ("editor.js", "javascript")):
        resp = client.get(f"/static/{asset}")
        assert resp.status_code == 200 and kind in resp.headers["content-type"]
    assert client.get("/static/nothing.css").status_code == 404


def test_blank_node_cells_show_what_blank_means(client):
    dom = parse_html(client.get("/plans/new").text)
    picker = dom.find("select", name="nodes.0.device.class_key")
    assert picker.find_all("option")[0].attrs["value"] == "" and "default" in picker.find_all("option")[0].text()
    default_key = client.get("/plans/new.json").json()["values"]["default_device"]
    # Source: the library's own figures of the default class, which a blank device value takes.
    from pairline.engine.library import TRANSCEIVERS

    ul = f"{TRANSCEIVERS[default_key].unit_loads:g}"
    assert dom.find("input", name="driver.device.unit_loads").attrs["placeholder"] == ul
    assert dom.find("input", name="driver.device.input_capacitance_f").attrs["placeholder"] == "20 pF"
    assert dom.find("input", name="cable.z0_ohm").attrs["placeholder"] == "120 Ω"


def test_cautions_point_at_what_in_the_plan_calls_for_them():
    from pairline.engine.plan import load_plan
    from pairline.server.cautions import cautions_data

    quiet = {c["key"]: c for c in cautions_data(load_plan(PLAN_DOC))}
    assert not quiet["ground"]["applies"] and quiet["codes"]["applies"]
    nodes = [{"name": "far", "position_m": 100.0, "ground_offset_v": 9.0}]
    loud = {c["key"]: c for c in cautions_data(load_plan(PLAN_DOC | {"nodes": nodes}))}
    # Source: TIA/EIA-485-A common-mode range -7 V to +12 V: a 9 V offset leaves it, so isolation applies.
    assert loud["ground"]["applies"] and loud["isolation"]["applies"] and loud["surge"]["applies"]
    assert "9 V" in loud["isolation"]["reason"] and "fault" not in loud["isolation"]["reason"]
    nodes = [{"name": "far", "position_m": 100.0, "ground_offset_v": 35.0}]
    faulty = {c["key"]: c for c in cautions_data(load_plan(PLAN_DOC | {"nodes": nodes}))}
    # common practice: tens of volts between earths is a fault (a broken earth, a site on another supply).
    assert "find that fault before choosing isolation" in faulty["isolation"]["reason"]
    assert "reinforced" in faulty["isolation"]["text"] and "boundary between the earths" in faulty["isolation"]["text"]


def test_curve_section_names_its_criteria_and_marks_the_plan(client, saved_id):
    data = client.get(f"/plans/{saved_id}.json").json()["curve"]
    assert data["criterion"] in {"eye", "tia422"} and data["source"] and data["rule"]["source"]
    page = parse_html(client.get(f"/plans/{saved_id}").text)
    assert data["plan_verdict"] == "holds" and data["plan_decided_by"] == []
    point = page.find("g", class_="plan-point verdict-holds")
    assert point is not None and "holds" in point.find("title").text()
    assert page.find("polyline", class_="rule-trace") is not None
