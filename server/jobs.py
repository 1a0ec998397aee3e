"""Jobs that run in check workers (server.workers): module-level functions taking and returning plain data.

Each answers with its page data as JSON bytes (and a saved plan's page as HTML bytes too), so the server only
passes bytes on. The fork server imports this module once, so every worker starts with the engine, the page
builders and the templates loaded.
"""

from functools import cache
from typing import Any

from jinja2 import Environment
from pairline.engine.network import advised_plan, check_network
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.forms import form_from_plan
from pairline.server.network_views import advised_network_editor_data, network_check_data, network_data
from pairline.server.rendering import PageAt, make_templates, page_json, page_template, render_page
from pairline.server.results import check_and_simulate, check_network_and_simulate, check_only, quick_check
from pairline.server.store import SavedPlan
from pairline.server.views import advised_editor_data, check_data, plan_data

Page = tuple[bytes, bytes | None]  # the JSON twin, and the HTML page when one was asked for


@cache
def templates() -> Environment:
    return make_templates()


def checked_plan_page(
    plan_doc: dict[str, Any], saved: SavedPlan | None, receiver: str | None, extra: dict[str, Any], at: PageAt | None
) -> Page:
    """The checked-plan page for a plan document (every rule, the waveforms and the curve) with `extra` joined to
    its data; rendered as HTML too when `at` says where it is served."""
    plan = load_plan(plan_doc)
    if plan.is_one_bus:
        data = plan_data(check_and_simulate(plan, receiver), saved, receiver) | extra
    else:
        data = network_data(check_network_and_simulate(plan, receiver), saved, receiver) | extra
    return page_json(data), render_page(templates(), page_template(data), data, at) if at else None


def checked_report(plan_doc: dict[str, Any]) -> Page:
    """A plan's verdict, findings and summary without the simulated pictures (the JSON API's check); the
    advised plan is checked without simulating it again (results.quick_check)."""
    plan = load_plan(plan_doc)
    if plan.is_one_bus:
        return page_json(check_data(quick_check(plan))), None
    return page_json(network_check_data(check_network(plan, simulate_advice=False))), None


def advised_editor(plan_doc: dict[str, Any], saved: SavedPlan | None, parent_id: str | None) -> Page:
    """The editor's data opened on a plan's advised plan: a new, unsaved draft with the changes listed."""
    plan = load_plan(plan_doc)
    if not plan.is_one_bus:
        network = check_network(plan)
        state = form_from_plan(plan_to_dict(advised_plan(network)), parent_id=parent_id)
        return page_json(advised_network_editor_data(network, state, saved_from=saved)), None
    report = check_only(plan)
    state = form_from_plan(plan_to_dict(report.advice.plan), parent_id=parent_id)
    return page_json(advised_editor_data(report, state, saved_from=saved)), None
