"""What a person sees: a phone-width page, the printed sheet, a plan in feet, the drawing's scale, and an
accessibility scan with axe-core."""

import json
import re
import urllib.request

import pytest

from tests.bench_web import thirty_two_receiver_plan

FT = 0.3048  # Source: international yard and pound agreement (1959), 1 ft = 0.3048 m exactly.


def save(base_url: str, plan: dict) -> str:
    request = urllib.request.Request(
        f"{base_url}/api/plans", data=json.dumps(plan).encode(), headers={"Content-Type": "application/json"}
    )
    with urllib.request.urlopen(request) as resp:
        return base_url + json.load(resp)["url"]


def stressed_plan() -> dict:
    """32 receivers on long stubs behind a fast driver: a problem at nearly every node."""
    plan = thirty_two_receiver_plan()
    plan["title"] = "Thirty-two drops, every stub too long"
    plan["driver"]["transceiver"] = "edge-10ns"
    for k, node in enumerate(plan["nodes"]):
        node["stub_length_m"] = 6.0 + (k % 4)
    return plan


def tunnel_in_feet() -> dict:
    """An invented tunnel bus drawn in feet: 10 door sensors along 1800 ft at 9600 bit/s."""
    trunk_m = 1800 * FT
    return {
        "title": "Service tunnel doors",
        "display_units": "imperial",
        "bit_rate_bps": 9600,
        "trunk_length_m": trunk_m,
        "driver": {"name": "gatehouse", "transceiver": "slew-2500ns"},
        "nodes": [
            {"name": f"door-{k + 1}", "position_m": 170 * FT * (k + 1), "stub_length_m": 6 * FT} for k in range(10)
        ],
        "terminations": [
            {"position_m": 0.0, "resistance_ohm": 120.0},
            {"position_m": trunk_m, "resistance_ohm": 120.0},
        ],
        "bias": {"position_m": 0.0, "pull_up_ohm": 560.0, "pull_down_ohm": 560.0},
    }


def no_sideways_scroll(page) -> bool:
    return page.evaluate("document.documentElement.scrollWidth <= window.innerWidth")


SMALLEST_TEXT_PX = """sel => Math.min(...Array.from(document.querySelectorAll(sel)).map(t => {
    const m = t.getScreenCTM();
    return parseFloat(getComputedStyle(t).fontSize) * Math.hypot(m.a, m.b);
}))"""


def test_editor_and_report_fit_a_phone_without_sideways_scrolling(phone, base_url, artifacts):
    phone.goto(f"{base_url}/plans/new")
    assert no_sideways_scroll(phone)
    phone.fill("input[name='nodes.0.name']", "a-rather-long-node-name-1")
    phone.fill("input[name='nodes.0.position_m']", "40")
    assert no_sideways_scroll(phone)
    phone.screenshot(path=str(artifacts / "phone-editor.png"), full_page=True)
    phone.goto(save(base_url, thirty_two_receiver_plan()))
    assert no_sideways_scroll(phone)
    # Plots scale to the width with text a phone can read; the drawing scrolls inside its frame instead.
    assert phone.evaluate(SMALLEST_TEXT_PX, ".plot svg text") >= 9.0
    assert phone.evaluate(SMALLEST_TEXT_PX, ".bus-svg text") >= 9.0
    phone.screenshot(path=str(artifacts / "phone-report.png"), full_page=True)


def pdf_pages(page) -> int:
    page.emulate_media(media="print")
    pdf = page.pdf(format="A4", print_background=True)
    return len(re.findall(rb"/Type\s*/Page(?!s)", pdf))


@pytest.mark.parametrize("plan", [thirty_two_receiver_plan, stressed_plan], ids=["mostly-holds", "many-problems"])
def test_a_32_node_plan_prints_on_at_most_three_a4_pages(page, base_url, artifacts, plan):
    page.goto(save(base_url, plan()))
    pages = pdf_pages(page)
    assert 1 <= pages <= 3
    for section in ("#overall-verdict", "#more-receivers", "svg.bus-svg", "#h-findings", "table.bom"):
        assert page.locator(section).first.is_visible()
    page.pdf(path=str(artifacts / f"print-{plan.__name__}.pdf"), format="A4")


LENGTH_IN_METRES = re.compile(r"(?<![\w.])\d[\d\u202f,.]*\s?(?:m|km|cm|mm)(?![\w·/²])")


def metre_lengths_outside_brackets(text: str) -> list[str]:
    unbracketed = text
    while re.search(r"\([^()]*\)", unbracketed):
        unbracketed = re.sub(r"\([^()]*\)", "", unbracketed)
    return LENGTH_IN_METRES.findall(unbracketed)


def test_a_feet_plan_shows_no_metre_lengths_outside_brackets(page, base_url):
    url = save(base_url, tunnel_in_feet())
    page.goto(url)
    page.evaluate("document.querySelectorAll('details').forEach(d => d.open = true)")
    screen = page.inner_text("body")
    assert "1800 ft" in screen.replace("\u202f", "")  # Source: the plan's own trunk, 1800 ft.
    assert metre_lengths_outside_brackets(screen) == []
    page.emulate_media(media="print")
    assert metre_lengths_outside_brackets(page.inner_text("body")) == []
    with urllib.request.urlopen(url + "/bom.csv") as resp:
        assert metre_lengths_outside_brackets(resp.read().decode("utf-8-sig")) == []
    page.goto(url + "/edit")
    assert metre_lengths_outside_brackets(page.inner_text("body")) == []


def test_the_drawing_measures_stubs_in_proportion_to_the_plan(page, base_url):
    plan = thirty_two_receiver_plan()
    plan["nodes"] = [
        {"name": "short-drop", "position_m": 150.0, "stub_length_m": 1.5},
        {"name": "long-drop", "position_m": 420.0, "stub_length_m": 12.0},
        {"name": "on-trunk", "position_m": 500.0, "stub_length_m": 0.0},
    ]
    page.goto(save(base_url, plan))
    heights = {
        node: page.locator(f"svg.bus-svg a.node:has(title:text-matches('^{node}:')) line.stub").evaluate(
            "el => el.getBBox().height"
        )
        for node in ("short-drop", "long-drop")
    }
    # Source: a scale drawing: drawn lengths in the ratio of the stubs, 12 m : 1.5 m = 8 (to 1 %: coordinates
    # are written with 0.1 px).
    assert heights["long-drop"] / heights["short-drop"] == pytest.approx(8.0, rel=0.01)
    assert page.locator("svg.bus-svg a.node:has(title:text-matches('^on-trunk:')) line.stub").count() == 0
    bar = page.locator("svg.bus-svg g.stub-bar line").first.evaluate("el => el.getBBox().height")
    label = page.locator("svg.bus-svg g.stub-bar text").text_content()
    bar_m = float(label.split()[0])
    # The scale bar is drawn on the same scale as the stubs: its length over the long stub's is bar_m / 12 m.
    assert bar / heights["long-drop"] == pytest.approx(bar_m / 12.0, rel=0.01)


PAGES = ["/", "/plans/new", "{plan}", "{plan}/edit"]


@pytest.mark.parametrize("path", PAGES)
def test_pages_have_no_serious_or_critical_accessibility_violations(browser, base_url, axe_script, path):
    plan = save(base_url, stressed_plan()).removeprefix(base_url)
    context = browser.new_context(viewport={"width": 1280, "height": 900}, bypass_csp=True)
    try:
        page = context.new_page()
        page.goto(base_url + path.format(plan=plan))
        page.add_script_tag(path=str(axe_script))
        result = page.evaluate("axe.run(document, {resultTypes: ['violations']})")
        serious = [
            (v["id"], v["impact"], [n["target"] for n in v["nodes"]][:5])
            for v in result["violations"]
            if v["impact"] in ("serious", "critical")
        ]
        assert serious == []
    finally:
        context.close()


def test_a_checked_draft_and_an_editor_with_errors_pass_the_accessibility_scan(browser, base_url, axe_script):
    context = browser.new_context(viewport={"width": 1280, "height": 900}, bypass_csp=True)
    try:
        page = context.new_page()
        page.goto(f"{base_url}/plans/new")
        page.click("#check-button")  # no nodes: the editor comes back with its messages
        page.wait_for_selector("#problems")
        found = []
        page.add_script_tag(path=str(axe_script))
        found += page.evaluate("axe.run(document, {resultTypes: ['violations']})")["violations"]
        page.fill("input[name='nodes.0.name']", "only")
        page.fill("input[name='nodes.0.position_m']", "50")
        page.click("#check-button")
        page.wait_for_selector("#overall-verdict")
        page.add_script_tag(path=str(axe_script))
        found += page.evaluate("axe.run(document, {resultTypes: ['violations']})")["violations"]
        assert [(v["id"], v["impact"]) for v in found if v["impact"] in ("serious", "critical")] == []
    finally:
        context.close()
