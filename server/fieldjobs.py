"""Field-check jobs that run in check workers (server.workers): module-level functions taking and returning plain
data, so a fit is bounded by the workers' time and memory limits like any check.
"""

from typing import Any

from pairline.engine.plan import load_plan
from pairline.server.field import field_request, run_field_check
from pairline.server.fieldviews import field_result_data
from pairline.server.jobs import Page
from pairline.server.rendering import page_json


def field_result_job(plan_doc: dict[str, Any], plan_id: str | None, raw: dict[str, Any]) -> Page:
    """A capture (its text and settings in `raw`) held against a plan: the result page's data as JSON bytes, its
    drawing included. The server renders it once it knows the page's link (a saved capture's is made after the
    fit). Bad input raises BusInputError naming the field."""
    plan = load_plan(plan_doc)
    field = field_request(raw, plan)
    return page_json(field_result_data(plan, plan_id, field, run_field_check(plan, field))), None
