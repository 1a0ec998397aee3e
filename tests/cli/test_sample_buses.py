"""Every sample bus loads, checks and gives the verdicts stored beside it, through check_plan and the CLI.

The expected files state, by hand, what each invented scenario was built to show, with one sentence why per
verdict; engine output that contradicts them fails here (they are never regenerated from the engine)."""

import json
import re
from pathlib import Path

import pytest
from pairline.engine.check import check_plan
from pairline.engine.findings import Verdict, worst
from pairline.engine.network import NetworkReport, check_network
from pairline.engine.plan import load_plan
from pairline.server.cli import main

SAMPLES = Path(__file__).resolve().parents[2] / "sample_buses"
PLANS = sorted(SAMPLES.glob("*.json"))
# The samples as they were written in plan format 1, before devices, bias lists and grounding.
FORMAT_1 = sorted((Path(__file__).resolve().parent / "format_v1").glob("*.json"))


def _expected(plan_path: Path) -> dict:
    return json.loads((SAMPLES / "expected" / plan_path.name).read_text(encoding="utf-8"))


def _check(doc: dict):
    """The sample checked: as one bus, or part by part when it has segments or a four-wire pair."""
    plan = load_plan(doc)
    return check_plan(plan) if plan.is_one_bus else check_network(plan)


def _all_findings(report) -> list:
    if isinstance(report, NetworkReport):
        return [*report.findings, *(f for p in report.parts for f in p.report.findings)]
    return list(report.findings)


def _verdict(report, key: str) -> Verdict | None:
    """A key "rule@node" names the report's own findings ("rule@branch" a branch's); "part/rule@node" one part's (a
    segment, or a pair)."""
    part, _, rest = key.rpartition("/")
    rule_id, _, node = rest.partition("@")
    findings = report.findings
    if part:
        findings = next(p.report.findings for p in report.parts if p.part.name == part)
    found = [f.verdict for f in findings if f.rule_id == rule_id and (not node or node in (f.node, f.branch))]
    return worst(found) if found else None


def _advice(report) -> tuple[int, set[str]]:
    """How many changes the advice makes, and the rules it cannot meet, over every part."""
    reports = [p.report for p in report.parts] if isinstance(report, NetworkReport) else [report]
    return sum(len(r.advice.changes) for r in reports), {u.rule_id for r in reports for u in r.advice.unmet}


def test_there_are_the_promised_samples():
    names = {p.stem for p in PLANS}
    assert len(PLANS) >= 6 and {"vineyard-row-probes", "machine-hall-by-the-book"} <= names
    assert {p.name for p in (SAMPLES / "expected").glob("*.json")} == {p.name for p in PLANS}


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_expected_verdicts_are_intent_with_a_reason_each(plan_path: Path):
    expected = _expected(plan_path)
    assert expected["plan"] == plan_path.name and len(expected["intent"]) > 40
    for key, entry in expected["verdicts"].items():
        assert entry["verdict"] in {"holds", "tight", "breaks"}, key
        assert len(entry["why"]) > 15 and entry["why"].endswith("."), key
    assert expected["advice"]["why"].endswith(".")


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_sample_is_a_described_valid_plan(plan_path: Path):
    plan = load_plan(json.loads(plan_path.read_text(encoding="utf-8")))
    assert plan.title and plan.notes.startswith("Invented scenario.")


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_sample_gives_its_expected_verdicts(plan_path: Path):
    # Expected verdicts: each scenario's intent, judged by the rules' cited criteria (see each Finding.source).
    expected = _expected(plan_path)
    report = _check(json.loads(plan_path.read_text(encoding="utf-8")))
    got = {key: _verdict(report, key) for key in expected["verdicts"]}
    wanted = {key: entry["verdict"] for key, entry in expected["verdicts"].items()}
    assert {k: (v.value if v else None) for k, v in got.items()} == wanted
    assert report.verdict.value == expected["overall"]
    for f in _all_findings(report):
        assert f.source and f.criterion
        assert f.verdict is Verdict.HOLDS or f.fix, f"{f.rule_id}@{f.node} has no fix"


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_cli_exit_status_matches(plan_path: Path, capsys):
    status = main(["check", str(plan_path)])
    out = capsys.readouterr().out
    assert status == _expected(plan_path)["exit_status"]
    assert f"Overall: {_expected(plan_path)['overall'].upper()}" in out


@pytest.mark.parametrize("v1_path", FORMAT_1, ids=lambda p: p.stem)
def test_a_format_1_sample_gives_the_verdicts_of_its_format_2_twin(v1_path: Path):
    v1 = json.loads(v1_path.read_text(encoding="utf-8"))
    v2 = json.loads((SAMPLES / v1_path.name).read_text(encoding="utf-8"))
    assert (v1.get("format_version", 1), v2["format_version"]) == (1, 2)
    old, new = check_plan(load_plan(v1)), check_plan(load_plan(v2))
    assert [(f.rule_id, f.node, f.verdict, f.value) for f in old.findings] == [
        (f.rule_id, f.node, f.verdict, f.value) for f in new.findings
    ]
    assert dict(old.bus.devices) == dict(new.bus.devices)  # every node's device, every value filled in


def test_every_format_1_sample_has_its_twin():
    assert len(FORMAT_1) >= 9 and {p.name for p in FORMAT_1} <= {p.name for p in PLANS}


def test_store_building_offset_needs_isolation():
    # Source: Intersil tutorial "High-Speed RS-485 Transceiver and Applications": a 2.5 V driver with 2.5 V of
    # noise leaves 7 V of ground offset inside the TIA/EIA-485-A -7..+12 V range; the store sits 11 V off.
    report = check_plan(json.loads((SAMPLES / "workshop-to-store-ground-offset.json").read_text(encoding="utf-8")))
    store = next(f for f in report.findings if f.rule_id == "common_mode.range" and f.node == "store-door")
    assert store.value == pytest.approx(11.0) and store.limit == pytest.approx(7.0, abs=1e-12)
    assert "galvanically" in store.fix and "local electrical codes" in store.fix
    # common practice (TI SLLA272): isolation belongs at the boundary between earths, the store's two panels.
    assert "'store-door', 'store-alarm'" in store.fix and "workshop-door" not in store.fix


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_sample_report_reads_without_exponents_or_placeholders(plan_path: Path, capsys):
    main(["check", str(plan_path)])
    out = capsys.readouterr().out
    assert not re.search(r"\de[+-]\d", out)
    for bad in ("nan", " inf", "n/a", "terminators (limit"):
        assert bad not in out, bad


def test_unterminated_bench_rack_names_each_open_end():
    report = check_plan(json.loads((SAMPLES / "bench-rack-unterminated.json").read_text(encoding="utf-8")))
    placement = [f for f in report.findings if f.rule_id == "termination.placement"]
    assert [f.title for f in placement] == [
        "No terminator at the driver's end (0 m) (none needed)",
        "No terminator at the far end (12 m) (none needed)",
    ]
    assert all(f.value is None and f.limit is None for f in placement)
    # The plan's 4.7 kOhm bias holds (3.36 V idle), so the summary keeps it rather than advising another value.
    assert [b.pull_up_ohm for b in report.summary.bias] == [4700.0]


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_advise_then_check_the_advised_plan(plan_path: Path, tmp_path, capsys):
    # The advised plan is a plan like any other: written by `pairline advise`, checked by `pairline check`, it
    # gives the exit status the scenario states, and the rules it cannot meet are the ones stated.
    expected = _expected(plan_path)["advice"]
    out = tmp_path / "advised.json"
    assert main(["advise", str(plan_path), "-o", str(out)]) == expected["exit_status"]
    printed = capsys.readouterr().out
    assert f"Advised plan: {expected['verdict'].upper()} after {expected['changes']} change(s)" in printed
    assert main(["check", str(out)]) == expected["exit_status"]
    advised = _check(json.loads(out.read_text(encoding="utf-8")))
    assert sorted(_advice(_check(json.loads(plan_path.read_text())))[1]) == expected["unmet"]
    assert _advice(advised)[0] == 0  # advising the advised plan changes nothing more


def test_the_by_the_book_sample_holds_every_rule():
    # common practice: 120 Ohm at both ends, 560 Ohm bias beside one of them, light receivers, a driver class that
    # suits the rate: every rule holds with margin for the stated tolerances (engine.rules.margins).
    report = check_plan(json.loads((SAMPLES / "machine-hall-by-the-book.json").read_text(encoding="utf-8")))
    assert {f.verdict for f in report.findings} == {Verdict.HOLDS}
    assert report.advice.changes == ()


def test_irrigation_fixes_and_bill_name_one_bias():
    # The unit-load fix, the bias fix and the bill of materials name the same bias network (one joint choice).
    report = check_plan(json.loads((SAMPLES / "irrigation-main-valves.json").read_text(encoding="utf-8")))
    (bias,) = report.advice.plan.bias
    fixes = {f.rule_id: f.fix for f in report.findings if f.node is None and f.fix}
    wanted = f"make it {bias.pull_up_ohm:g} Ω / {bias.pull_down_ohm:g} Ω"
    assert wanted in fixes["bias.idle_level"] and wanted in fixes["load.unit_loads"]
    bom = [b for b in report.summary.bom if b.item.startswith("Bias")]
    assert {b.value for b in bom} == {f"{bias.pull_up_ohm:g} Ω"}
    assert f"{report.summary.bias[0].idle_v * 1e3:.0f} mV" in bom[0].note


def test_fix_sentences_name_no_company():
    # common practice: sources belong in the finding's source field, not in the advice.
    for plan_path in PLANS:
        report = _check(json.loads(plan_path.read_text(encoding="utf-8")))
        for f in _all_findings(report):
            assert "B&B" not in f.fix, (plan_path.name, f.rule_id)


def test_pairline_samples_lists_every_shipped_sample_with_its_title(capsys):
    assert main(["samples"]) == 0
    out = capsys.readouterr().out
    for plan_path in PLANS:
        title = json.loads(plan_path.read_text(encoding="utf-8"))["title"]
        assert re.search(rf"^{re.escape(plan_path.stem)}\s+{re.escape(title)}$", out, re.MULTILINE)


@pytest.mark.parametrize("name", ["pump-house-long-stub", "pump-house-long-stub.json"])
def test_check_sample_checks_the_copy_shipped_in_the_package(name, capsys, monkeypatch, tmp_path):
    monkeypatch.chdir(tmp_path)  # no checkout around: the sample comes from the installed package
    status = main(["check", "--sample", name])
    assert status == _expected(SAMPLES / "pump-house-long-stub.json")["exit_status"]
    assert "[pump-house-long-stub" in capsys.readouterr().out


def test_check_sample_with_an_unknown_name_lists_the_names_allowed(capsys):
    assert main(["check", "--sample", "pump-house", "--json"]) == 2
    captured = capsys.readouterr()
    (problem,) = json.loads(captured.out)["problems"]
    assert problem["field"] == "sample" and problem["value"] == "pump-house"
    assert problem["allowed"]["choices"] == sorted(p.stem for p in PLANS)
    assert "There is no sample bus 'pump-house'; allowed: bench-rack-unterminated" in captured.err


def test_check_takes_a_file_or_a_sample_not_both(capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(["check", str(PLANS[0]), "--sample", PLANS[0].stem])
    assert exit_info.value.code == 2
