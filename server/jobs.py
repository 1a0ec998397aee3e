"""Jobs that run in check workers (server.workers): module-level functions taking and returning plain data.

Each answers with its page data as JSON bytes (and a saved plan's page as HTML bytes too), so the server only
passes bytes on. The fork server imports this module once, so every worker starts with the engine, the page
builders and the templates loaded.
"""

from functools import cache
from typing import Any

from jinja2 import Environment
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.forms import form_from_plan
from pairline.server.rendering import PageAt, make_templates, page_json, render_page
from pairline.server.results import check_and_simulate, check_only, quick_check
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
    data = plan_data(check_and_simulate(load_plan(plan_doc), receiver), saved, receiver) | extra
    return page_json(data), render_page(templates(), "plan.html", data, at) if at else None


def checked_report(plan_doc: dict[str, Any]) -> Page:
    """A plan's verdict, findings and summary without the simulated pictures (the JSON API's check); the
    advised plan is checked without simulating it again (results.quick_check)."""
    return page_json(check_data(quick_check(load_plan(plan_doc)))), None


def advised_editor(plan_doc: dict[str, Any], saved: SavedPlan | None, parent_id: str | None) -> Page:
    """The editor's data opened on a plan's advised plan: a new, unsaved draft with the changes listed."""
    report = check_only(load_plan(plan_doc))
    state = form_from_plan(plan_to_dict(report.advice.plan), parent_id=parent_id)
    return page_json(advised_editor_data(report, state, saved_from=saved)), None
