"""Every sample bus loads, checks and gives the verdicts stored beside it, through check_plan and the CLI."""

import json
from pathlib import Path

import pytest

from engine.check import check_plan
from engine.findings import Verdict, worst
from engine.plan import load_plan
from server.cli import main

SAMPLES = Path(__file__).resolve().parents[2] / "sample_buses"
PLANS = sorted(SAMPLES.glob("*.json"))


def _expected(plan_path: Path) -> dict:
    return json.loads((SAMPLES / "expected" / plan_path.name).read_text(encoding="utf-8"))


def _verdict(report, key: str) -> Verdict | None:
    rule_id, _, node = key.partition("@")
    found = [f.verdict for f in report.findings if f.rule_id == rule_id and (not node or f.node == node)]
    return worst(found) if found else None


def test_there_are_the_promised_samples():
    names = {p.stem for p in PLANS}
    assert len(PLANS) >= 6 and "vineyard-row-probes" in names
    assert {p.name for p in (SAMPLES / "expected").glob("*.json")} == {p.name for p in PLANS}


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_sample_is_a_described_valid_plan(plan_path: Path):
    plan = load_plan(json.loads(plan_path.read_text(encoding="utf-8")))
    assert plan.title and plan.notes.startswith("Invented scenario.")


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_sample_gives_its_expected_verdicts(plan_path: Path):
    # Expected verdicts: each scenario's intent, judged by the rules' cited criteria (see each Finding.source).
    expected = _expected(plan_path)
    report = check_plan(json.loads(plan_path.read_text(encoding="utf-8")))
    got = {key: _verdict(report, key) for key in expected["verdicts"]}
    assert {k: (v.value if v else None) for k, v in got.items()} == expected["verdicts"]
    assert report.verdict.value == expected["overall"]
    for f in report.findings:
        assert f.source and f.criterion
        assert f.verdict is Verdict.HOLDS or f.fix, f"{f.rule_id}@{f.node} has no fix"


@pytest.mark.parametrize("plan_path", PLANS, ids=lambda p: p.stem)
def test_cli_exit_status_matches(plan_path: Path, capsys):
    status = main(["check", str(plan_path)])
    out = capsys.readouterr().out
    assert status == _expected(plan_path)["exit_status"]
    assert f"Overall: {_expected(plan_path)['overall'].upper()}" in out


def test_store_building_offset_needs_isolation():
    # Source: Intersil tutorial "High-Speed RS-485 Transceiver and Applications": a 2.5 V driver with 2.5 V of
    # noise leaves 7 V of ground offset inside the TIA/EIA-485-A -7..+12 V range; the store sits 11 V off.
    report = check_plan(json.loads((SAMPLES / "workshop-to-store-ground-offset.json").read_text(encoding="utf-8")))
    store = next(f for f in report.findings if f.rule_id == "common_mode.range" and f.node == "store-door")
    assert store.value == pytest.approx(11.0) and store.limit == pytest.approx(7.0, abs=1e-12)
    assert "galvanically" in store.fix and "local electrical codes" in store.fix
