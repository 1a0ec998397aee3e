"""Every sample bus in sample_buses/ is loaded at startup, listed on the start page and opens as a checked plan."""

import json
from pathlib import Path

import pytest
from pairline.server.app import create_app
from pairline.server.samples import SAMPLES_DIR

from tests.server.conftest import TestClient

SAMPLES = sorted(p.stem for p in Path(SAMPLES_DIR).glob("*.json"))


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    with TestClient(create_app(tmp_path_factory.mktemp("db") / "plans.db")) as c:
        yield c


@pytest.mark.parametrize("slug", SAMPLES)
def test_sample_bus_opens_from_the_start_page(client, slug):
    listed = {s["slug"]: s["url"] for s in client.get("/index.json").json()["samples"]}
    assert slug in listed
    page = client.get(listed[slug] + ".json")
    assert page.status_code == 200
    # Source: the sample's stored verdicts (sample_buses/expected/<slug>.json), checked there against the
    # published figures each sample was built from.
    expected = json.loads((Path(SAMPLES_DIR) / "expected" / f"{slug}.json").read_text(encoding="utf-8"))
    assert page.json()["verdict"] == expected["overall"]
    html = client.get(listed[slug])
    assert html.status_code == 200
    assert f'data-verdict="{expected["overall"]}"' in html.text


def test_restarting_keeps_sample_links(tmp_path):
    db = tmp_path / "plans.db"
    with TestClient(create_app(db)) as first:
        before = first.get("/index.json").json()["samples"]
    with TestClient(create_app(db)) as second:
        after = second.get("/index.json").json()["samples"]
    assert before == after


def test_print_hall_page_draws_the_breaking_receiver_as_worst(client):
    listed = {s["slug"]: s["url"] for s in client.get("/index.json").json()["samples"]}
    data = client.get(listed["print-hall-fast-drop"] + ".json").json()
    expected = json.loads((Path(SAMPLES_DIR) / "expected" / "print-hall-fast-drop.json").read_text())["verdicts"]
    worst = data["waveforms"]["worst"]
    # Source: the sample's stated intent (signal.integrity@press-2 breaks; the rest hold).
    assert expected[f"signal.integrity@{worst}"]["verdict"] == "breaks"
    drawn = next(p for p in data["waveforms"]["plots"] if p["role"] == "worst")
    assert drawn["receiver"] == worst and drawn["verdict"] == "breaks"
    html = client.get(listed["print-hall-fast-drop"]).text
    assert f"Worst receiver: {worst}" in html
