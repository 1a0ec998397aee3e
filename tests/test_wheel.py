"""The package as a user installs it: a built wheel, installed (not editable) into a fresh virtual environment at
the lowest versions pyproject.toml allows, run from a folder with no checkout in it.

It serves every page of every shipped sample, checks the shipped samples from the command line with the verdicts
stored beside them, and seeds a PostgreSQL database: so the declared dependency floors are the tested ones.
"""

import json
import os
import re
import socket
import subprocess
import sys
import time
import tomllib
import zipfile
from pathlib import Path

import httpx
import pytest

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[1]
PROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
FLOOR = re.compile(r"^([A-Za-z0-9_.\-]+(?:\[[a-z,]+\])?)>=([0-9][0-9a-z.]*)$")


def floor_pins(requirements: list[str]) -> list[str]:
    """`name>=X` becomes `name==X`: install exactly the lowest version allowed."""
    pins = []
    for requirement in requirements:
        match = FLOOR.match(requirement.replace(" ", ""))
        assert match, f"dependency '{requirement}' has no plain '>=' floor to test"
        pins.append(f"{match[1]}=={match[2]}")
    return pins


def run(command: list[str], cwd: Path, **kwargs) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PAIRLINE_DB", "VIRTUAL_ENV")}
    return subprocess.run(command, cwd=cwd, env=env, capture_output=True, text=True, timeout=600, **kwargs)


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    dist = tmp_path_factory.mktemp("dist")
    built = run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(dist), str(ROOT)], cwd=dist)
    assert built.returncode == 0, built.stderr
    (path,) = dist.glob("pairline-*.whl")
    return path


@pytest.fixture(scope="module")
def installed(wheel, tmp_path_factory) -> Path:
    """A fresh virtual environment holding the wheel and its dependencies at their declared floors."""
    venv = tmp_path_factory.mktemp("venv")
    made = run([sys.executable, "-m", "venv", "--without-pip", str(venv)], cwd=venv)
    assert made.returncode == 0, made.stderr
    pins = floor_pins(PROJECT["dependencies"] + PROJECT["optional-dependencies"]["postgresql"])
    command = [sys.executable, "-m", "pip", "--python", str(venv / "bin" / "python"), "install", "-q"]
    done = run([*command, f"{wheel}[postgresql]", *pins], cwd=venv)
    assert done.returncode == 0, done.stderr
    return venv / "bin"


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def test_the_wheel_holds_one_import_name_its_data_and_its_licence(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    info = f"pairline-{PROJECT['version']}.dist-info"
    assert {n.split("/")[0] for n in names} == {"pairline", info}
    for shipped in ("templates/plan.html", "static/pairline.css", "sample_buses/vineyard-row-probes.json"):
        assert f"pairline/{shipped}" in names
    assert f"{info}/licenses/LICENSE" in names
    metadata = zipfile.ZipFile(wheel).read(f"{info}/METADATA").decode()
    assert "License-Expression: MIT" in metadata


def test_installed_wheel_serves_every_page_from_another_folder(installed, tmp_path):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    port = free_port()
    log_path = tmp_path / "serve.log"
    with log_path.open("w") as log:
        server = subprocess.Popen(
            [str(installed / "pairline"), "serve", "--port", str(port)],
            cwd=elsewhere,
            env={k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PAIRLINE_DB")},
            stdout=log,
            stderr=subprocess.STDOUT,
        )
    try:
        client = httpx.Client(base_url=f"http://127.0.0.1:{port}", timeout=60.0)
        deadline = time.monotonic() + 60.0
        while True:
            assert server.poll() is None, log_path.read_text()
            try:
                start = client.get("/")
                break
            except httpx.TransportError:
                assert time.monotonic() < deadline, log_path.read_text()
                time.sleep(0.3)
        assert start.status_code == 200
        samples = client.get("/index.json").json()["samples"]
        shipped = sorted(p.stem for p in (ROOT / "sample_buses").glob("*.json"))
        assert sorted(s["slug"] for s in samples) == shipped
        for sample in samples:
            url = sample["url"]
            assert client.get(url).status_code == 200, url
            assert client.get(url + ".json").json()["verdict"] in {"holds", "tight", "breaks"}
            bom = client.get(url + "/bom.csv")
            assert bom.status_code == 200 and bom.headers["content-type"].startswith("text/csv")
            assert client.get(url + "/edit").status_code == 200
        for path in ("/plans/new", "/static/pairline.css", "/static/plan.js"):
            assert client.get(path).status_code == 200, path
        client.close()
    finally:
        server.terminate()
        server.wait(timeout=30)
    assert (elsewhere / "pairline.db").exists()  # the default database lands in the working folder


def test_installed_wheel_checks_the_samples_it_ships(installed, tmp_path):
    listed = run([str(installed / "pairline"), "samples"], cwd=tmp_path)
    assert listed.returncode == 0
    for expected_path in sorted((ROOT / "sample_buses" / "expected").glob("*.json")):
        expected = json.loads(expected_path.read_text(encoding="utf-8"))
        slug = expected_path.stem
        assert re.search(rf"^{slug}\s", listed.stdout, re.MULTILINE)
        checked = run([str(installed / "pairline"), "check", "--sample", slug, "--json"], cwd=tmp_path)
        # Source: each sample's expected verdicts, judged by the rules' cited criteria (sample_buses/expected/).
        assert checked.returncode == expected["exit_status"], checked.stderr
        assert json.loads(checked.stdout)["verdict"] == expected["overall"]


def test_installed_wheel_seeds_a_postgresql_database(installed, postgres_url, tmp_path):
    seeded = run([str(installed / "pairline"), "seed", "--db", postgres_url], cwd=tmp_path)
    assert seeded.returncode == 0, seeded.stderr
    shipped = len(list((ROOT / "sample_buses").glob("*.json")))
    assert f"{shipped} sample buses in postgresql://" in seeded.stdout


def test_no_generic_top_level_module_lands_in_site_packages(installed):
    (site,) = installed.parent.glob("lib/python3*/site-packages")
    for generic in ("engine", "server", "templates", "static", "sample_buses"):
        assert not (site / generic).exists()
