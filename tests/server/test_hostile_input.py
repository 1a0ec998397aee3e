"""Input that used to crash the server or the CLI: each now gets a 422 (or a form error, or exit status 2)
naming the field, the value and the allowed range."""

import json

import pytest
from pairline.server.cli import main
from pairline.server.store import PlanStore

from tests.server.html_dom import parse_html
from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC, assert_problem

AS_JSON = {"content-type": "application/json"}


def post_raw(client, text: str):
    return client.post("/api/check", content=text.encode("utf-8"), headers=AS_JSON)


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"cable": {"class_key": {}}}, "cable.class_key"),
        ({"cable": {"class_key": ["pair-24awg-120"]}}, "cable.class_key"),
        ({"driver": {"transceiver": []}}, "driver.transceiver"),
        ({"driver": {"transceiver": {"edge": 1}}}, "driver.transceiver"),
    ],
)
def test_a_class_that_is_not_a_string_is_a_422_with_the_choices(client, change, field):
    problem = assert_problem(client.post("/api/check", json=PLAN_DOC | change), field=field)
    assert "pair-24awg-120" in problem["allowed"]["choices"] or "edge-100ns" in problem["allowed"]["choices"]


def test_an_empty_key_inside_a_node_is_named(client):
    nodes = [{"name": "left", "position_m": 50.0, "": 1}]
    problem = assert_problem(client.post("/api/check", json=PLAN_DOC | {"nodes": nodes}), field="nodes.0.")
    assert "not a field" in problem["message"]


def test_deeply_nested_json_is_refused_before_parsing(client):
    for text in ("[" * 50_000, "{" + '"a":[' * 20 + "1" + "]" * 20 + "}"):
        problem = assert_problem(post_raw(client, text), field="")
        assert "nests" in problem["message"]


def test_an_integer_of_5000_digits_is_a_range_error_without_interpreter_advice(client):
    doc = json.dumps(PLAN_DOC).replace('"bit_rate_bps": 9600', '"bit_rate_bps": ' + "9" * 5000)
    problem = assert_problem(post_raw(client, doc), field="bit_rate_bps")
    assert problem["allowed"]["max"] == 100e6
    assert "sys." not in problem["message"] and "int_max_str_digits" not in problem["message"]
    # a long integer in a text field is named too, not echoed in full
    doc = json.dumps(PLAN_DOC).replace('"title": "Bench bus"', '"title": ' + "7" * 400)
    assert_problem(post_raw(client, doc), field="title")


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"trunk_length_m": 5e-324}, "trunk_length_m"),
        ({"nodes": [{"name": "left", "position_m": 5e-324}]}, "nodes.0.position_m"),
        ({"nodes": [{"name": "left", "position_m": 50.0, "ground_offset_v": -1e-300}]}, "nodes.0.ground_offset_v"),
        ({"nodes": [{"name": "left", "position_m": 50.0, "unit_loads": 1e-300}]}, "nodes.0.unit_loads"),
        (
            {"nodes": [{"name": "left", "position_m": 50.0, "input_capacitance_f": 1e-30}]},
            "nodes.0.input_capacitance_f",
        ),
        ({"bit_rate_bps": 1.7976931348623157e308}, "bit_rate_bps"),
    ],
)
def test_subnormal_and_absurd_magnitudes_are_refused_with_a_range(client, change, field):
    problem = assert_problem(client.post("/api/plans", json=PLAN_DOC | change), field=field)
    assert "min" in problem["allowed"] and "max" in problem["allowed"]


def test_a_saved_row_the_current_model_refuses_opens_in_the_editor_not_a_500(client, tmp_path):
    # a plan stored before the validator refused subnormal trunks: its link must keep working
    store: PlanStore = client.app.state.store
    plan_id = store.save_plan(PLAN_DOC | {"trunk_length_m": 5e-324}, engine_version="0.0.1")
    page = client.get(f"/plans/{plan_id}")
    assert page.status_code == 422 and "Trunk length" in page.text
    assert_problem(client.get(f"/plans/{plan_id}.json"), field="trunk_length_m")


def test_a_value_near_the_largest_float_in_the_editor_is_a_form_error(client):
    for text in ("1.7976931348623157e308", "1e308 km", "-1.7e308", "4.9e-324"):
        resp = client.post("/plans", data=FIVE_NODE_FORM | {"trunk_length_m": text, "action": "check"})
        assert resp.status_code == 422
        dom = parse_html(resp.text)
        assert dom.by_id("e-trunk_length_m").text()
        assert dom.find("input", name="trunk_length_m").attrs["value"] == text  # what was typed stays


def test_a_lone_surrogate_escape_is_refused(client):
    problem = assert_problem(post_raw(client, json.dumps(PLAN_DOC | {"title": "\ud800"})), field="")
    assert "surrogate" in problem["message"]


def test_pasted_and_uploaded_hostile_json_is_a_form_error(client):
    for text in (
        "[" * 50_000,
        '{"bit_rate_bps": ' + "9" * 5000 + "}",
        json.dumps(PLAN_DOC | {"cable": {"class_key": {}}}),
    ):
        resp = client.post("/import", data={"plan_text": text})
        assert resp.status_code == 422 and "problem" in resp.text.lower()


def test_a_title_outside_latin1_downloads_with_an_rfc5987_filename(client):
    saved = client.post("/api/plans", json=PLAN_DOC | {"title": "120 Ω bus"}).json()
    for path, suffix in ((f"/plans/{saved['id']}/download", ".json"), (f"/plans/{saved['id']}/bom.csv", "-bom.csv")):
        resp = client.get(path)
        assert resp.status_code == 200
        disposition = resp.headers["content-disposition"]
        # Source: RFC 6266 sec. 4.3 (filename plus filename*), RFC 5987 sec. 3.2 (UTF-8'' then percent-encoding);
        # "ω" (U+03C9) is CF 89 in UTF-8.
        assert f'filename="120-bus-{saved["id"]}{suffix}"' in disposition
        assert f"filename*=UTF-8''120-%CF%89-bus-{saved['id']}{suffix}" in disposition
        disposition.encode("latin-1")  # a header must be Latin-1 on the wire
    assert json.loads(client.get(f"/plans/{saved['id']}/download").content)["title"] == "120 Ω bus"


@pytest.mark.parametrize(
    "text",
    [
        json.dumps(PLAN_DOC | {"cable": {"class_key": {}}}),
        json.dumps(PLAN_DOC | {"driver": {"transceiver": []}}),
        json.dumps(PLAN_DOC | {"nodes": [{"name": "a", "position_m": 5, "": 1}]}),
        json.dumps(PLAN_DOC).replace('"bit_rate_bps": 9600', '"bit_rate_bps": ' + "9" * 5000),
        json.dumps(PLAN_DOC | {"trunk_length_m": 5e-324}),
        "[" * 50_000,
    ],
    ids=["class-object", "driver-list", "empty-key", "long-integer", "subnormal-trunk", "deep-nesting"],
)
def test_pairline_check_exits_2_without_a_traceback(tmp_path, capsys, text):
    path = tmp_path / "hostile.json"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err + captured.out
    assert captured.err.splitlines()[0].strip()


def test_pairline_check_says_anything_unexpected_in_one_line(tmp_path, capsys, monkeypatch):
    import pairline.server.cli as cli

    def broken(document):
        raise ZeroDivisionError("float division by zero\nsecond line")

    monkeypatch.setattr(cli, "load_plan", broken)
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(PLAN_DOC), encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "cannot be checked" in err
