"""The CLI on plans of several parts: the verdict over everything and the plan-level findings on top, then one
group per segment or pair; the JSON and the advised plan grouped the same way."""

import json

from pairline.server.cli import main

from tests.engine.topology_plans import four_wire, two_segments


def _write(tmp_path, doc, name="plan.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return str(path)


def test_check_prints_the_plan_level_verdict_then_each_segment(tmp_path, capsys):
    doc = two_segments()
    doc["segments"][0]["terminations"] = []
    status = main(["check", _write(tmp_path, doc)])
    out = capsys.readouterr().out
    assert out.index("Overall:") < out.index("The plan as a whole:") < out.index("Segment 'main'")
    assert out.index("Segment 'main' (driven by the master 'plc'") < out.index("Segment 'store' (driven by repeater")
    assert "Round trip from the master to the farthest node" in out
    assert status == (1 if "Overall: BREAKS" in out else 0)
    assert "local electrical codes" in out


def test_check_of_a_four_wire_plan_groups_the_two_pairs(tmp_path, capsys):
    assert main(["check", _write(tmp_path, four_wire())]) in (0, 1)
    out = capsys.readouterr().out
    assert "four-wire with a transmit pair and a return pair; master 'master'" in out
    assert out.index("The transmit pair (driven by the master") < out.index("The return pair (replies from 4 slave(s)")


def test_check_json_lists_the_parts(tmp_path, capsys):
    main(["check", "--json", _write(tmp_path, two_segments())])
    data = json.loads(capsys.readouterr().out)
    assert [p["name"] for p in data["parts"]] == ["main", "store"]
    assert data["parts"][1]["report"]["plan"]["driver"]["name"] == "gate"
    assert data["plan"]["format_version"] == 3 and data["plan"]["repeaters"][0]["name"] == "gate"


def test_bad_topology_exits_2_naming_the_field(tmp_path, capsys):
    doc = two_segments()
    doc["repeaters"][0]["downstream_segment"] = "nowhere"
    assert main(["check", _write(tmp_path, doc)]) == 2
    err = capsys.readouterr().err
    assert "repeaters.0.downstream_segment" in err and "one of main, store" in err


def test_advise_writes_the_whole_plan_with_each_segments_advice(tmp_path, capsys):
    doc = two_segments()
    doc["segments"][0]["bias"] = []
    out_path = tmp_path / "advised.json"
    main(["advise", _write(tmp_path, doc), "-o", str(out_path)])
    printed = capsys.readouterr().out
    advised = json.loads(out_path.read_text(encoding="utf-8"))
    assert advised["format_version"] == 3 and [s["name"] for s in advised["segments"]] == ["store"]
    # Source: TI SLLA272: a terminated pair of plain +/-200 mV receivers needs failsafe bias; the store has none.
    assert advised["segments"][0]["bias"], "the store segment is advised a bias network"
    assert advised["repeaters"][0]["name"] == "gate" and advised["nodes"][0]["name"] == "a1"
    assert "Segment 'store'" in printed and "bias" in printed
