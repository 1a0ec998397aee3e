"""The field check in a real browser: choose a capture file, compare, read the result, find it listed on the
plan's page; each page passes the accessibility scan, and the form fits a phone."""

import pytest

from tests.browser.test_layout import no_sideways_scroll, save
from tests.engine.field_buses import PLAN_DOC, capture_text


def _serious(page, axe_script) -> list[tuple[str, str]]:
    page.add_script_tag(path=str(axe_script))
    found = page.evaluate("axe.run(document, {resultTypes: ['violations']})")["violations"]
    return [
        (v["id"], str([n["target"] for n in v["nodes"]][:3])) for v in found if v["impact"] in ("serious", "critical")
    ]


@pytest.fixture(scope="module")
def capture_file(tmp_path_factory):
    # Source: ngspice transient of the plan with its far terminator removed (tests/engine/field_buses.py).
    path = tmp_path_factory.mktemp("captures") / "scope.csv"
    path.write_text(capture_text("far_missing", seed=41), encoding="utf-8")
    return path


def test_choose_a_capture_compare_and_read_the_difference(browser, base_url, axe_script, capture_file, artifacts):
    plan_url = save(base_url, PLAN_DOC)
    context = browser.new_context(viewport={"width": 1280, "height": 900}, bypass_csp=True)
    try:
        page = context.new_page()
        page.goto(plan_url)
        page.click("#check-capture")
        page.click("#compare")  # nothing chosen yet: the form comes back with its message
        page.wait_for_selector("#problems")
        assert page.locator("#e-capture_csv").is_visible()
        errors_found = _serious(page, axe_script)
        page.set_input_files("#f-capture_file", str(capture_file))
        page.click("#compare")
        page.wait_for_selector("#field-verdict", timeout=60_000)
        page.screenshot(path=str(artifacts / "field-result.png"), full_page=True)
        assert page.locator("#field-verdict").get_attribute("data-verdict") == "breaks"
        assert "probably missing" in page.locator("#differences").inner_text()
        assert page.locator("figure.overlay svg polyline").count() == 3
        # the capture is saved with the plan: the result has its own link, shown whole for sharing
        assert page.url.startswith(plan_url + "/captures/")
        assert page.locator("#share-url").input_value() == page.url
        errors_found += _serious(page, axe_script)
        # and the plan's own page lists it at once, linked
        capture_url = page.url
        page.goto(plan_url)
        listed = page.locator("#capture-list tbody tr a")
        assert listed.count() == 1 and listed.first.get_attribute("href") == capture_url.removeprefix(base_url)
        assert "Anyone who has this plan's link" in page.locator("#captures-note").inner_text()
        assert errors_found + _serious(page, axe_script) == []
    finally:
        context.close()


def test_the_capture_form_fits_a_phone(phone, base_url):
    plan_url = save(base_url, PLAN_DOC)
    phone.goto(plan_url + "/field")
    assert phone.locator("#compare").is_visible()
    assert no_sideways_scroll(phone)
