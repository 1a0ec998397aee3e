"""Jobs that run in check workers (server.workers): module-level functions taking and returning plain data.

Each answers with its page data as JSON bytes (and a saved plan's page as HTML bytes too), so the server only
passes bytes on. The fork server imports this module once, so every worker starts with the engine, the page
builders and the templates loaded.
"""

from functools import cache
from typing import Any

from jinja2 import Environment
from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan
from pairline.server.rendering import PageAt, make_templates, page_json, render_page
from pairline.server.results import check_and_simulate
from pairline.server.store import SavedPlan
from pairline.server.views import check_data, plan_data

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
    """A plan's verdict, findings and summary without the simulated pictures (the JSON API's check)."""
    return page_json(check_data(check_plan(load_plan(plan_doc)))), None
