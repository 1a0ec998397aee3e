"""Every page runs under its Content-Security-Policy in a real browser without a single violation, and the share
link the page shows is whole (the server writes it relative to the site)."""

import json
import urllib.request


def test_pages_raise_no_content_security_policy_violation(page, base_url):
    reports: list[str] = []
    page.on("console", lambda m: reports.append(m.text) if "Content Security Policy" in m.text else None)
    page.on("pageerror", lambda e: reports.append(str(e)))
    request = urllib.request.Request(
        f"{base_url}/api/plans",
        data=json.dumps(
            {
                "title": "Policy check",
                "bit_rate_bps": 9600,
                "trunk_length_m": 100,
                "nodes": [{"name": "a", "position_m": 50}],
            }
        ).encode("utf-8"),
        headers={"content-type": "application/json"},
    )
    with urllib.request.urlopen(request) as resp:
        url = json.loads(resp.read())["url"]
    for path in ("/", "/plans/new", url, f"{url}/edit", "/plans/AAAAAAAAAAAAAAAA"):
        page.goto(f"{base_url}{path}")
        page.wait_for_load_state("load")
    page.goto(f"{base_url}{url}")
    assert page.input_value("#share-url") == f"{base_url}{url}"
    page.goto(f"{base_url}/plans/new")
    rows = page.locator("#node-rows tr").count()
    page.click("[data-add-row='node-rows']")  # the editor's script adds the row in place
    assert page.locator("#node-rows tr").count() == rows + 1
    assert reports == []
