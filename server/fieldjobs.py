"""Field-check jobs that run in check workers (server.workers): module-level functions taking and returning plain
data, so a fit is bounded by the workers' time and memory limits like any check.
"""

from typing import Any

from pairline.engine.plan import load_plan
from pairline.server.field import field_request, run_field_check
from pairline.server.fieldviews import field_json, field_result_data
from pairline.server.jobs import Page, templates
from pairline.server.rendering import PageAt, page_json, render_page


def field_result_page(plan_doc: dict[str, Any], plan_id: str | None, raw: dict[str, Any], at: PageAt | None) -> Page:
    """A capture (its text and settings in `raw`) held against a plan: the result's JSON twin, and its page when
    `at` says where it is served. Bad input raises BusInputError naming the field."""
    plan = load_plan(plan_doc)
    field = field_request(raw, plan)
    data = field_result_data(plan, plan_id, field, run_field_check(plan, field))
    return page_json(field_json(data)), render_page(templates(), "field_result.html", data, at) if at else None
