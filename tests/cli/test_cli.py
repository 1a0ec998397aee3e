"""`pairline check`: readable report, --json, and exit status 0 / 1 / 2 with every input problem listed."""

import json
import subprocess
import sys
from pathlib import Path

import pytest
from pairline.server.cli import main

ROOT = Path(__file__).resolve().parents[2]

# A short bench bus: two 120 Ohm terminators, one 1/8 UL receiver, 510 Ohm bias from 5 V.
GOOD = {
    "title": "bench pair",
    "bit_rate_bps": 9600,
    "trunk_length_m": 10.0,
    "driver": {"transceiver": "slew-2500ns"},
    "nodes": [{"name": "meter-1", "position_m": 10.0, "unit_loads": 0.125}],
    "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 10.0, "resistance_ohm": 120.0}],
    "bias": {"position_m": 0.0, "pull_up_ohm": 510.0, "pull_down_ohm": 510.0},
}


def _write(tmp_path, doc, name="plan.json"):
    path = tmp_path / name
    path.write_text(doc if isinstance(doc, str) else json.dumps(doc), encoding="utf-8")
    return str(path)


def test_good_plan_exits_0_with_a_readable_report(tmp_path, capsys):
    # Source: V_AB = 5 V * R_eq / (1020 Ohm + R_eq) with R_eq ~ 59.9 Ohm -> ~ 0.28 V > 200 mV (TIA/EIA-485-A),
    # so the bias rule holds; the other rules hold for a 10 m bench pair.
    status = main(["check", _write(tmp_path, GOOD)])
    out = capsys.readouterr().out
    assert "Overall:" in out and "bench pair" in out
    assert "bias.idle_level: holds" in out
    assert "By node" in out and "meter-1" in out
    assert "local electrical codes" in out
    assert status == (1 if "Overall: BREAKS" in out else 0)
    assert "Overall: BREAKS" not in out


def test_breaking_plan_exits_1_and_prints_the_fix(tmp_path, capsys):
    # common practice: 1.5 kOhm / 120 Ohm / 1.5 kOhm from 5 V idles at 0.192 V, under the 200 mV threshold
    # of TIA/EIA-485-A, so the bias rule breaks.
    doc = dict(GOOD, bias={"position_m": 0.0, "pull_up_ohm": 1500.0, "pull_down_ohm": 1500.0})
    doc["terminations"] = [{"position_m": 10.0, "resistance_ohm": 120.0}]
    assert main(["check", _write(tmp_path, doc)]) == 1
    out = capsys.readouterr().out
    assert "Overall: BREAKS" in out and "[BREAKS] Idle-bus level" in out and "fix: Change the bias" in out


def test_json_output_is_the_report_dict(tmp_path, capsys):
    status = main(["check", _write(tmp_path, GOOD), "--json"])
    report = json.loads(capsys.readouterr().out)
    assert {f["rule_id"] for f in report["findings"]} >= {"signal.dc_level", "bias.idle_level", "length.loss"}
    assert report["verdict"] in {"holds", "tight"} and status == 0
    assert report["plan"]["title"] == "bench pair"


def test_invalid_plan_exits_2_listing_every_problem(tmp_path, capsys):
    # Source: the plan schema's ranges (engine.plan): bit rate >= 50 bit/s; nodes within the trunk.
    doc = dict(GOOD, bit_rate_bps=-5, nodes=[{"name": "far", "position_m": 40.0}])
    assert main(["check", _write(tmp_path, doc)]) == 2
    captured = capsys.readouterr()
    assert "bit_rate_bps" in captured.err and "nodes.0.position_m" in captured.err
    assert "-5" in captured.err and "allowed" in captured.err
    assert "Traceback" not in captured.err + captured.out


def test_invalid_plan_with_json_flag_prints_the_problem_envelope(tmp_path, capsys):
    assert main(["check", _write(tmp_path, dict(GOOD, trunk_length_m="long")), "--json"]) == 2
    envelope = json.loads(capsys.readouterr().out)
    assert envelope["status"] == 422
    assert [p["field"] for p in envelope["problems"]] == ["trunk_length_m"]


@pytest.mark.parametrize(
    ("content", "needle"),
    [('{"bit_rate_bps": 9600,', "line 1"), ("[1, 2]", "JSON object"), ("\udcff", "UTF-8")],
    ids=["truncated-json", "not-an-object", "not-utf8"],
)
def test_unreadable_input_exits_2_without_traceback(tmp_path, capsys, content, needle):
    path = tmp_path / "bad.json"
    if content == "\udcff":
        path.write_bytes(b"\xff\xfe{")
    else:
        path.write_text(content, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert needle in err and "Traceback" not in err


def test_missing_file_exits_2(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nowhere.json")]) == 2
    assert "Cannot read" in capsys.readouterr().err


def test_usage_errors_exit_2(capsys):
    with pytest.raises(SystemExit) as stop:
        main([])
    assert stop.value.code == 2
    with pytest.raises(SystemExit) as stop:
        main(["check"])
    assert stop.value.code == 2


def test_module_runs_as_a_program(tmp_path):
    done = subprocess.run(
        [sys.executable, "-m", "pairline.server.cli", "check", _write(tmp_path, GOOD), "--json"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["plan"]["title"] == "bench pair"


def test_plan_from_standard_input(monkeypatch, capsys):
    import io

    monkeypatch.setattr(sys, "stdin", io.StringIO(json.dumps(GOOD)))
    assert main(["check", "-"]) == 0
    assert "bench pair" in capsys.readouterr().out


def test_allowed_ranges_read_as_ranges():
    from pairline.server.cli import allowed_text

    assert allowed_text({"min": 50.0, "max": 100e6, "unit": "bit/s"}) == "50 bit/s .. 100 Mbit/s"
    assert allowed_text({"min": 0.0, "min_exclusive": True, "unit": "V"}) == "0 V .. inf V"
    assert allowed_text({"min": 0.1, "max": 4000.0, "unit": "m"}) == "0.1 .. 4000 m"
    assert allowed_text({"min_length": 1, "max_length": 512}) == "1 .. 512 items"
    assert allowed_text({"choices": ["rs485", "rs422"]}) == "one of rs485, rs422"


def test_numbers_print_without_exponents():
    from pairline.server.cli import number_text

    assert number_text(10416.7) == "10400"
    assert number_text(1151.5) == "1150"
    assert number_text(0.0424) == "0.0424"
    assert number_text(12.3) == "12.3"


def test_per_node_lines_name_the_node(tmp_path, capsys):
    doc = dict(GOOD, nodes=[{"name": "meter-1", "position_m": 10.0, "unit_loads": 0.125, "stub_length_m": 90.0}])
    assert main(["check", _write(tmp_path, doc)]) == 1
    out = capsys.readouterr().out
    assert "[BREAKS] node 'meter-1': Stub length" in out


def test_limits_print_their_direction(tmp_path, capsys):
    # Source: TIA-485-A and TI SLLA628: the driver load is a minimum, the full bus 120 || 120 || 32 UL = 51.7 Ohm
    # that the 54 Ohm test load stands for.
    main(["check", _write(tmp_path, GOOD)])
    out = capsys.readouterr().out
    driver_line = next(line for line in out.splitlines() if "Load on the driver" in line)
    assert "(≥ 51.7 Ω)" in driver_line
    assert "(limit " not in out


def test_rs422_summary_counts_receivers_not_unit_loads(tmp_path, capsys):
    # Source: TIA/EIA-422-B: one driver feeds at most 10 receivers; 8 receivers leave 2.
    doc = {
        "standard": "rs422",
        "bit_rate_bps": 9600,
        "trunk_length_m": 100.0,
        "driver": {"name": "head", "position_m": 0.0, "transceiver": "slew-2500ns"},
        "nodes": [{"name": f"rx-{i}", "position_m": 10.0 * (i + 1)} for i in range(8)],
        "terminations": [{"position_m": 100.0, "resistance_ohm": 120.0}],
    }
    main(["check", _write(tmp_path, doc)])
    out = capsys.readouterr().out
    assert "Spare receivers: 2" in out
    assert "Spare unit loads" not in out


def test_imperial_plan_reads_lengths_in_feet_with_metres_in_brackets(tmp_path, capsys):
    # Source: international foot, 0.3048 m exactly: 550 m = 1804.5 ft (shown 1804 ft), 1150 m = 3773.0 ft.
    doc = json.loads((ROOT / "sample_buses" / "irrigation-main-valves.json").read_text(encoding="utf-8"))
    doc["display_units"] = "imperial"
    main(["check", _write(tmp_path, doc)])
    out = capsys.readouterr().out
    assert "1804 ft (550 m)" in out and "3773 ft (1150 m)" in out
    assert "mΩ/m" not in out or "ft (84.2" not in out
    assert "ft (1804 ft" not in out


def test_bom_bias_note_names_a_change_and_a_move(tmp_path, capsys):
    # Source: TI SLLA272 bias sizing, as the advice sizes it for the irrigation sample: 560 Ohm each at 550 m
    # (the station nearest mid-trunk, where the drop to either end is smallest) in place of the plan's 390 Ohm
    # at 0 m.
    main(["check", str(ROOT / "sample_buses" / "irrigation-main-valves.json")])
    out = capsys.readouterr().out
    assert "move the bias network from 0 m to 550 m and make it 560 Ω / 560 Ω" in out
    assert "Bias pull-up resistor (5 V to A), 560 Ω" in out


def test_advise_writes_the_advised_plan_and_lists_the_changes(tmp_path, capsys):
    # A plan without bias on RS-485 (TIA/EIA-485-A: 0 V idles inside the undefined band) gets one added; the
    # advised plan written to the file is a valid plan that checks with exit 0.
    doc = dict(GOOD)
    doc.pop("bias")
    out = tmp_path / "advised.json"
    assert main(["advise", _write(tmp_path, doc), "-o", str(out)]) == 0
    printed = capsys.readouterr().out
    assert ". Add failsafe bias" in printed and "from none to" in printed
    advised = json.loads(out.read_text(encoding="utf-8"))
    assert advised["bias"] is not None and [n["name"] for n in advised["nodes"]] == ["meter-1"]
    assert main(["check", str(out)]) == 0


def test_advise_without_output_pipes_the_plan_and_reports_on_stderr(tmp_path, capsys):
    assert main(["advise", _write(tmp_path, GOOD)]) == 0
    captured = capsys.readouterr()
    assert json.loads(captured.out)["title"] == "bench pair"
    assert "Advised plan:" in captured.err


def test_advise_exits_1_naming_what_cannot_be_met(tmp_path, capsys):
    # Source: TI SLLA272 stub rule: a 5 m drop is far beyond 0.1 x 10 ns x 0.78 c0 = 23 cm; terminators and bias
    # cannot change it, so the advice says which rule and what can.
    doc = dict(GOOD, driver={"transceiver": "edge-10ns"}, bit_rate_bps=1e6)
    doc["nodes"] = [{"name": "meter-1", "position_m": 10.0, "stub_length_m": 5.0, "unit_loads": 0.125}]
    assert main(["advise", _write(tmp_path, doc), "-o", str(tmp_path / "out.json")]) == 1
    printed = capsys.readouterr().out
    assert "Cannot be met with terminators and bias alone" in printed and "stub.length (meter-1)" in printed
    assert "Shorten the stub of node 'meter-1'" in printed


def test_advise_on_bad_input_exits_2(tmp_path, capsys):
    assert main(["advise", _write(tmp_path, dict(GOOD, trunk_length_m=-1.0))]) == 2
    assert "trunk_length_m" in capsys.readouterr().err
