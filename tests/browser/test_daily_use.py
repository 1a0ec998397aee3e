"""The planner in daily use, in a real browser: drafts survive Back, node tables paste in, the verdict follows
typing, decimal commas are never read as thousands."""

import re
import time

from playwright.sync_api import expect

NODES = [(f"probe-{k + 1}", str(30 * (k + 1)), "0.5" if k % 2 else "1") for k in range(8)]


def fill_eight_node_bus(page, base_url):
    """Eight nodes typed into a new plan: three of them in rows added by script."""
    page.goto(f"{base_url}/plans/new")
    page.fill("input[name='title']", "Cold-store sensor chain")
    page.fill("input[name='bit_rate_bps']", "19.2k")
    page.fill("input[name='trunk_length_m']", "250")
    page.fill("input[name='terminations.1.position_m']", "250")
    page.fill("input[name='bias.pull_up_ohm']", "470")
    page.fill("input[name='bias.pull_down_ohm']", "470")
    for _ in range(3):
        page.click("button[data-add-row='node-rows']")
    rows = page.locator("#node-rows tbody tr.row")
    assert rows.count() == 8
    for k, (name, position, stub) in enumerate(NODES):
        row = rows.nth(k)
        row.locator("input[name$='.name']").fill(name)
        row.locator("input[name$='.position_m']").fill(position)
        row.locator("input[name$='.stub_length_m']").fill(stub)
        row.locator("input[name$='.unit_loads']").fill("1/8")


def typed_values(page) -> dict[str, str]:
    return page.evaluate(
        """() => Object.fromEntries(Array.from(document.querySelectorAll('#editor input[type=text], #editor select'))
            .filter(el => el.name && !el.name.includes('__i__')).map(el => [el.name, el.value]))"""
    )


def test_back_after_check_keeps_every_typed_value(page, base_url):
    fill_eight_node_bus(page, base_url)
    page.select_option("select[name='nodes.7.role']", "transceiver")
    before = typed_values(page)
    page.click("#check-button")
    page.wait_for_selector("#overall-verdict")
    page.go_back()
    page.wait_for_selector("#node-rows")
    assert page.locator("#node-rows tbody tr.row").count() == 8
    assert typed_values(page) == before
    assert page.locator("input[name='title']").input_value() == "Cold-store sensor chain"


def test_edit_this_draft_returns_the_filled_editor(page, base_url):
    fill_eight_node_bus(page, base_url)
    before = {k: v for k, v in typed_values(page).items() if v}
    page.click("#check-button")
    page.click("#edit-draft")
    page.wait_for_selector("#node-rows")
    after = typed_values(page)
    assert {k: after.get(k) for k in before} == before


TABLE = "\n".join(f"tp-{k + 1:02d}\t{12 * (k + 1)},5\t0,5\t1/4" for k in range(20))


def test_a_spreadsheet_table_pasted_into_the_node_table_gives_twenty_nodes(page, base_url):
    page.goto(f"{base_url}/plans/new")
    page.fill("input[name='trunk_length_m']", "300")
    page.fill("input[name='terminations.1.position_m']", "300")
    page.locator("input[name='nodes.0.name']").focus()
    page.evaluate(
        """text => {
            const data = new DataTransfer();
            data.setData('text/plain', text);
            const event = new ClipboardEvent('paste', {clipboardData: data, bubbles: true, cancelable: true});
            document.querySelector("input[name='nodes.0.name']").dispatchEvent(event);
        }""",
        TABLE,
    )
    page.wait_for_selector("input[name='nodes.19.name']")
    names = [page.locator(f"input[name='nodes.{k}.name']").input_value() for k in range(20)]
    assert names == [f"tp-{k + 1:02d}" for k in range(20)]
    assert page.locator("input[name='nodes.20.name']").count() == 0
    page.click("#check-button")
    page.wait_for_selector("#overall-verdict")
    assert page.locator("table.node-table tbody tr").count() == 20
    # common practice: "240,5" with a decimal comma is 240.5 m, shown to 3 significant digits.
    assert page.locator("#node-20 td.num").first.inner_text() == "240 m"


def test_twelve_comma_five_is_twelve_and_a_half_metres_never_125(page, base_url):
    page.goto(f"{base_url}/plans/new")
    page.fill("input[name='nodes.0.name']", "door-1")
    page.fill("input[name='nodes.0.position_m']", "50")
    page.fill("input[name='nodes.0.stub_length_m']", "12,5")
    page.click("#save-button")
    page.wait_for_selector("#share-url")
    stub = page.locator("#node-1 td.num").nth(1).inner_text()
    # common practice: a decimal comma; 12,5 m is twelve and a half metres.
    assert stub == "12.5 m"


def test_live_verdict_follows_typing_within_a_second(page, base_url):
    fill_eight_node_bus(page, base_url)
    pill = page.locator("#live-pill")
    # locator waits, not wait_for_function: the page's Content-Security-Policy forbids evaluating strings
    page.locator("#live-verdict[data-state='checked']").wait_for(timeout=5000)
    # Source: TIA-485-A; eight 1/8 UL receivers (1 UL), the driver's own 1/8 UL receiver (its class's rating)
    # and a 470 Ω bias (12 kΩ / 470 Ω = 25.53 UL, TI SLLA272's count) make 26.7 UL of the 32 UL budget.
    # (an answer for a half-typed row may arrive first: wait for the one for the whole bus)
    expect(page.locator("#live-unit-loads")).to_have_text("26.7 UL of 32 UL")
    # Source: TIA-485-A 32 UL budget: 32 − 26.66 = 5.34 UL spare, room for 5 more 1 UL receivers.
    expect(page.locator("#live-spare")).to_have_text(re.compile(r"^5 more of 1 UL"))
    assert "verdict-breaks" not in pill.get_attribute("class")
    page.fill("input[name='nodes.0.stub_length_m']", "")
    page.locator("#live-verdict[data-state='checked']").wait_for()
    start = time.monotonic()
    # Source: TI SLLA272, stub delay at most 1/10 of the rise time: 0.1 x 2.5 us x 0.78 x c0 = 58.5 m for the
    # 115.2 kbit/s driver class on 24 AWG pair (velocity factor 0.78), so an 80 m stub breaks.
    page.locator("input[name='nodes.0.stub_length_m']").press_sequentially("80")
    page.locator("#live-pill.verdict-breaks").wait_for(timeout=1000)
    assert time.monotonic() - start < 1.0
    assert "stub.length at probe-1" in page.locator("#live-text").inner_text()
    assert pill.text_content() == "Breaks"


def test_back_after_check_keeps_typed_values_without_javascript(browser, base_url):
    context = browser.new_context(java_script_enabled=False)
    try:
        page = context.new_page()
        page.goto(f"{base_url}/plans/new")
        page.fill("input[name='title']", "No script draft")
        page.fill("input[name='nodes.0.name']", "door-1")
        page.fill("input[name='nodes.0.position_m']", "50")
        page.fill("input[name='nodes.1.name']", "door-2")
        page.fill("input[name='nodes.1.position_m']", "12,5")
        names = ("title", "nodes.0.name", "nodes.0.position_m", "nodes.1.name", "nodes.1.position_m")
        before = {n: page.input_value(f"[name='{n}']") for n in names}
        page.click("#check-button")
        page.wait_for_selector("#overall-verdict")
        page.go_back()
        page.wait_for_selector("#node-rows")
        assert {n: page.input_value(f"[name='{n}']") for n in names} == before
    finally:
        context.close()
