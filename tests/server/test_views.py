"""Page data built from engine results: how findings' limits read, and the safety caution for large offsets."""

from dataclasses import dataclass

import pytest
from pairline.engine.findings import Finding, Verdict
from pairline.server.findings_view import finding_data


@dataclass(frozen=True)
class _WithKind:
    """An engine finding that states which side of its limit the value must stay on."""

    rule_id: str
    title: str
    verdict: Verdict
    value: float | None
    limit: float | None
    unit: str
    node: str | None
    criterion: str
    source: str
    fix: str = ""
    detail: str = ""
    limit_kind: str = "max"


def _finding(value: float, limit: float, unit: str, kind: str | None) -> object:
    base = {
        "rule_id": "load.driver",
        "title": "Load on the driver",
        "verdict": Verdict.HOLDS,
        "value": value,
        "limit": limit,
        "unit": unit,
        "node": None,
        "criterion": "",
        "source": "",
    }
    return Finding(**base) if kind is None else _WithKind(**base, limit_kind=kind)


@pytest.mark.parametrize(
    ("kind", "expected"),
    [
        # Source: TIA/EIA-485-A, a driver is specified into a 54 Ω differential load at the least.
        ("min", "≥ 54 Ω"),
        ("max", "≤ 54 Ω"),
        ("none", ""),
    ],
)
def test_limit_reads_with_the_side_the_value_must_stay_on(kind, expected):
    data = finding_data(_finding(6310.0, 54.0, "Ω", kind), 0, "metric", {})
    assert data["limit_kind"] == kind
    assert data["limit_text"] == expected
    assert data["value_text"] == "6.31 kΩ"


def test_a_finding_that_does_not_say_is_an_upper_limit():
    # common practice: a stub limit is a longest allowed length, printed as given with its unit.
    data = finding_data(_finding(0.5, 1.2, "m", None), 0, "metric", {})
    assert data["limit_kind"] == "max" and data["limit_text"] == "≤ 1.2 m"


def test_plan_page_prints_each_limit_with_its_side(client):
    plan = {
        "bit_rate_bps": 115_200,
        "trunk_length_m": 100.0,
        "nodes": [{"name": "far", "position_m": 100.0, "stub_length_m": 0.5}],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 100.0, "resistance_ohm": 120.0}],
    }
    plan_id = client.post("/api/plans", json=plan).json()["id"]
    data = client.get(f"/plans/{plan_id}.json").json()
    stub = next(f for f in data["findings"] if f["rule_id"] == "stub.length")
    assert stub["limit_kind"] == "max" and stub["limit_text"].startswith("≤ ")
    assert all(f["limit_text"][:1] in ("≤", "≥", "") for f in data["findings"])


def _offset_plan(offset_v: float) -> dict:
    return {
        "bit_rate_bps": 9600,
        "trunk_length_m": 200.0,
        "nodes": [
            {"name": "store", "position_m": 100.0},
            {"name": "barn", "position_m": 200.0, "ground_offset_v": offset_v},
        ],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 200.0, "resistance_ohm": 120.0}],
    }


@pytest.mark.parametrize("offset_v", [-75.0, 230.0])
def test_a_ground_offset_above_50_volts_puts_a_stop_caution_above_the_findings(client, offset_v):
    from tests.server.html_dom import parse_html

    # Source: IEC 60364-4-41, conventional touch-voltage limit 50 V AC for ordinary locations (from memory).
    data = client.post("/api/check", json=_offset_plan(offset_v)).json()
    assert data["danger"]["limit_v"] == 50.0 and [n["name"] for n in data["danger"]["nodes"]] == ["barn"]
    plan_id = client.post("/api/plans", json=_offset_plan(offset_v)).json()["id"]
    html = client.get(f"/plans/{plan_id}").text
    box = parse_html(html).by_id("danger")
    assert box is not None and box.attrs.get("role") == "alert"
    text = box.text()
    assert "shock hazard" in text and "earth fault" in text and "licensed electrician" in text
    assert "local electrical codes" in text and "'barn'" in text
    assert html.index('id="danger"') < html.index('id="h-findings"')


def test_no_stop_caution_at_50_volts_or_less(client):
    # Source: IEC 60364-4-41, conventional touch-voltage limit 50 V AC (from memory): at the limit, no stop.
    data = client.post("/api/check", json=_offset_plan(-50.0)).json()
    assert data["danger"] is None


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        # Source: 1 ft = 0.3048 m exactly: 4.1 m = 13.45 ft (13.5 to 3 digits), 70 m = 229.66 ft (230).
        (
            "shorten the stub from 6 m to at most 4.1 m",
            "shorten the stub from 19.7 ft (6 m) to at most 13.5 ft (4.1 m)",
        ),
        ("at 0 m and 70 m", "at 0 ft (0 m) and 230 ft (70 m)"),
        # Formulas and other units stay as written.
        ("length × rate <= 10^8 m·bit/s; 84.2 Ω/km; 200 mV", "length × rate <= 10^8 m·bit/s; 84.2 Ω/km; 200 mV"),
    ],
)
def test_engine_sentences_read_in_feet_for_an_imperial_plan(text, expected):
    from pairline.server.wording import lengths_in_text

    assert lengths_in_text(text, "imperial", keep_metres=True) == expected
    assert lengths_in_text(text, "metric", keep_metres=True) == text  # already 3 digits in metres


def test_every_picture_shows_the_findings_verdict_and_the_rule_that_decided_it(client):
    import json
    from pathlib import Path

    from tests.server.html_dom import parse_html

    root = Path(__file__).resolve().parents[2] / "sample_buses"
    doc = json.loads((root / "print-hall-fast-drop.json").read_text(encoding="utf-8"))
    plan_id = client.post("/api/plans", json=doc).json()["id"]
    dom = parse_html(client.get(f"/plans/{plan_id}?receiver=ink-dryer").text)
    # Source: the sample's stored verdicts (sample_buses/expected/print-hall-fast-drop.json): length.rate_rule
    # breaks; stub.length and signal.confirms break at ink-dryer; signal.integrity breaks at press-2.
    mark = dom.find("g", class_="plan-point verdict-breaks")
    assert mark is not None and "length.rate_rule" in mark.find("title").text()
    caption = dom.find("figure", class_="plot curve").find("figcaption").text()
    assert "breaks by length.rate_rule" in caption
    node = next(a for a in dom.find_all("a") if "ink-dryer" in (a.find("title").text() if a.find("title") else ""))
    assert node.attrs["class"] == "node verdict-breaks" and "stub.length" in node.find("title").text()
    heads = {h.text().split(":")[1].split()[0]: h for h in dom.find_all("h3", class_="receiver-head")}
    table = {tr.find("th").text(): tr for tr in dom.find("table", class_="node-table").find_all("tr") if tr.find("th")}
    for name in ("press-2", "ink-dryer"):
        pill = heads[name].find("span", class_="pill verdict-breaks")
        assert pill is not None and table[name].attrs["class"] == "verdict-breaks"
    assert "stub.length" in heads["ink-dryer"].text()


def test_a_tight_finding_reads_as_close_to_the_limit(client):
    from tests.server.html_dom import parse_html

    # Source: TIA-485-A, 32 UL per driver; TI SLLA272, a bias counts 12 kOhm / R unit loads: 12 receivers of 1 UL,
    # the driver's own 1/4 UL and 620 Ohm of bias (19.35 UL) are 31.6 UL, inside 32; with the bias resistors 5 %
    # low (IEC 60063 E24 parts) 32.6 UL, over it: tight, close to the limit, not over it.
    plan = {
        "bit_rate_bps": 9600,
        "trunk_length_m": 300.0,
        "driver": {"name": "head", "transceiver": "edge-100ns"},
        "nodes": [{"name": f"n{k}", "position_m": 25.0 * (k + 1)} for k in range(12)],
        "terminations": [{"position_m": 0.0, "resistance_ohm": 120.0}, {"position_m": 300.0, "resistance_ohm": 120.0}],
        "bias": {"position_m": 150.0, "pull_up_ohm": 620.0, "pull_down_ohm": 620.0},
    }
    plan_id = client.post("/api/plans", json=plan).json()["id"]
    dom = parse_html(client.get(f"/plans/{plan_id}").text)
    item = next(li for li in dom.find_all("li") if li.attrs.get("data-rule") == "load.unit_loads")
    assert item.find("span", class_="pill verdict-tight").text() == "close to the limit"
    assert "close to the limit" in item.find("p", class_="numbers").text()
