"""Jobs that run in check workers (server.workers): module-level functions taking and returning plain data.

The fork server imports this module once, so every worker starts with the engine and the page builders loaded.
"""

from typing import Any

from pairline.engine.check import check_plan
from pairline.engine.plan import load_plan
from pairline.server.results import check_and_simulate
from pairline.server.store import SavedPlan
from pairline.server.views import check_data, plan_data


def checked_plan_data(plan_doc: dict[str, Any], saved: SavedPlan | None, receiver: str | None) -> dict[str, Any]:
    """The checked-plan page's data for a plan document: every rule, the waveforms and the curve."""
    plan = load_plan(plan_doc)
    return plan_data(check_and_simulate(plan, receiver), saved, receiver)


def checked_report_data(plan_doc: dict[str, Any]) -> dict[str, Any]:
    """A plan's verdict, findings and summary without the simulated pictures (the JSON API's check)."""
    return check_data(check_plan(load_plan(plan_doc)))
