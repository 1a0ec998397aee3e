"""`pairline field PLAN.json CAPTURE.csv`: exit 0 when the capture matches, 1 on a difference, 2 on bad input."""

import json

import pytest
from pairline.engine.plan import load_plan
from pairline.server.cli import main

from tests.engine.field_buses import PLAN_DOC, capture_text


def _files(tmp_path, capture: str, plan=PLAN_DOC):
    plan_path = tmp_path / "plan.json"
    plan_path.write_text(json.dumps(plan), encoding="utf-8")
    capture_path = tmp_path / "capture.csv"
    capture_path.write_text(capture, encoding="utf-8")
    return str(plan_path), str(capture_path)


def test_a_capture_of_the_plan_exits_0(tmp_path, capsys):
    # Source: ngspice transient of the plan itself (tests/engine/field_buses.py).
    status = main(["field", *_files(tmp_path, capture_text("planned", seed=21))])
    out = capsys.readouterr().out
    assert status == 0
    assert "MATCHES THE PLAN" in out and "first edge" in out and "local electrical codes" in out


def test_a_missing_terminator_exits_1_with_its_sentence_and_a_fitted_plan(tmp_path, capsys):
    # Source: ngspice transient with the far terminator removed.
    plan_path, capture_path = _files(tmp_path, capture_text("far_missing", seed=22))
    fitted = tmp_path / "fitted.json"
    status = main(["field", plan_path, capture_path, "--fitted-plan", str(fitted)])
    out = capsys.readouterr().out
    assert status == 1
    assert "DIFFERS FROM THE PLAN" in out and "probably missing" in out
    draft = load_plan(json.loads(fitted.read_text()))
    assert [t.position_m for t in draft.terminations] == [0.0]


def test_an_imperial_plan_reads_feet_with_the_metres_once(tmp_path, capsys):
    # Source: ngspice transient with the far terminator removed; 400 m = 1312 ft (1 ft = 0.3048 m exactly,
    # international yard and pound agreement, 1959).
    doc = PLAN_DOC | {"display_units": "imperial"}
    assert main(["field", *_files(tmp_path, capture_text("far_missing", seed=24), plan=doc)]) == 1
    out = capsys.readouterr().out
    assert "far end, 1312 ft (400 m) along the trunk," in out
    assert "ft (1312 ft" not in out and "(400 m) (" not in out


def test_json_output_holds_the_verdict_and_the_overlay(tmp_path, capsys):
    status = main(["field", *_files(tmp_path, capture_text("far_missing", seed=23, lines=True)), "--json"])
    data = json.loads(capsys.readouterr().out)
    assert status == 1 and data["verdict"] == "differs"
    assert data["capture"]["signal"] == "lines"
    assert [d["key"] for d in data["differences"]] == ["end_siemens"]
    assert len(data["overlay"]["time_s"]) == len(data["overlay"]["measured_v"]) > 100
    assert data["fitted_plan"]["terminations"] == [
        {"position_m": 0.0, "kind": "parallel", "resistance_ohm": 120.0, "capacitance_f": None}
    ]


@pytest.mark.parametrize(
    ("capture", "args", "field"),
    [
        ("Time,V\n" + "\n".join(f"{k * 1e-9},{'oops' if k == 5 else k % 9}" for k in range(300)), [], "capture_csv"),
        ("Time,V\n" + "\n".join(f"{k * 1e-9},{k % 9}" for k in range(300)), ["--at", "nowhere"], "at"),
        (
            "Time,V\n" + "\n".join(f"{k * 1e-9},{k % 9}" for k in range(300)),
            ["--probe-attenuation", "-3"],
            "probe_attenuation",
        ),
        (
            "Time,V\n" + "\n".join(f"{k * 1e-9},{k % 9}" for k in range(300)),
            ["--sent", "bits", "--bits", "01x"],
            "bits",
        ),
    ],
    ids=["non-numeric-cell", "unknown-node", "negative-attenuation", "bad-bits"],
)
def test_bad_input_exits_2_naming_the_field(tmp_path, capsys, capture, args, field):
    status = main(["field", *_files(tmp_path, capture), *args, "--json"])
    captured = capsys.readouterr()
    envelope = json.loads(captured.out)
    assert status == 2
    assert field in [p["field"] for p in envelope["problems"]]
    assert "Traceback" not in captured.err


def test_a_missing_capture_file_exits_2(tmp_path, capsys):
    plan_path, _ = _files(tmp_path, "")
    assert main(["field", plan_path, str(tmp_path / "none.csv")]) == 2
    assert "Cannot read" in capsys.readouterr().err
