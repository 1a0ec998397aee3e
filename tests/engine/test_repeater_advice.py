"""The advice proposes a repeater, with where and whether isolated, for what terminators and bias cannot meet: a
unit-load budget, a length budget, a ground offset. Positions and counts below are hand-worked from the layouts."""

import json
from pathlib import Path

from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan

SAMPLES = Path(__file__).resolve().parents[2] / "sample_buses"


def _remedies(report, rule_id):
    unmet = {u.rule_id: u for u in report.advice.unmet}
    return " ".join(unmet[rule_id].remedies)


def _row(count: int, spacing_m: float, **changes):
    doc = {
        "format_version": 3,
        "bit_rate_bps": 9600,
        "trunk_length_m": count * spacing_m,
        "default_device": "slew-2500ns",
        "driver": {"name": "head", "position_m": 0.0, "device": {"unit_loads": 1.0}},
        "nodes": [
            {"name": f"n{i + 1:02d}", "position_m": (i + 1) * spacing_m, "device": {"unit_loads": 1.0}}
            for i in range(count)
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0},
            {"position_m": count * spacing_m, "resistance_ohm": 120.0},
        ],
    }
    doc.update(changes)
    return load_plan(doc)


def test_too_many_unit_loads_splits_the_row_evenly():
    # 40 receivers of 1 UL each behind a 1 UL master; TIA-485-A: 32 UL per driver. With the repeater's 1 UL port,
    # the master's side holds 2 + k UL and the far side, with the repeater's own 1 UL driver, 41 - k UL, each side
    # plus the same bias: most evenly split at k = 19 (21 and 22 UL before bias): between the 19th and 20th node,
    # at (190 + 200) / 2 = 195 m.
    report = check_plan(_row(40, 10.0))
    text = _remedies(report, "load.unit_loads")
    assert "put a repeater at 195 m, between 'n19' and 'n20'" in text
    assert "keeps 19 node(s)" in text and "segment of 21 node(s)" in text


def test_a_path_longer_than_the_cable_allows_gets_evenly_spaced_repeaters():
    # 2000 m of 24 AWG pair at 9600 bit/s: the loss limit is the 1200 m plateau (TIA-485-A practice, 4000 ft), held
    # as built 10 % longer, 1090.9 m per segment: ceil(2000 / 1090.9) = 2 segments, one repeater at 1000 m.
    report = check_plan(_row(4, 500.0))
    text = _remedies(report, "length.loss")
    assert "put a repeater at 1000 m: 2 segments of about 1000 m each" in text


def test_a_ground_offset_gets_an_isolated_repeater_at_the_boundary():
    # The sample's store panels sit 11 V off the workshop's earth at 340 m and 350 m; the last workshop node is at
    # 20 m: the barrier goes midway, at 180 m, rated for the 11 V.
    doc = json.loads((SAMPLES / "workshop-to-store-ground-offset.json").read_text(encoding="utf-8"))
    text = _remedies(check_plan(load_plan(doc)), "common_mode.range")
    assert "put an isolated repeater at 180 m, between 'workshop-door' and 'store-door'" in text
    assert "at least the 11 V" in text
