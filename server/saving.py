"""Saving a plan, or a capture checked against a saved plan: the one path every save takes (API, editor, checked
draft, import, field check).

A plan's save is refused when the plan is too costly to check here (a link that could never show its results).
Any save is refused when the client address is over its save quota or rate (429 with Retry-After): plans and
captures count alike.
"""

from typing import Any

from fastapi import Request
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusPlan, Problem, plan_to_dict
from pairline.server.checking import CheckRefused
from pairline.server.cost import cost_problems
from pairline.server.errors import RequestRefused
from pairline.server.quota import SaveLimiter
from pairline.server.store import PlanStore


def client_address(request: Request) -> str:
    """The address a request came from: its save quota is counted by it, and it is kept with each save. Behind a
    proxy, uvicorn's --proxy-headers and --forwarded-allow-ips make it the client's, not the proxy's. A request
    with no address (a Unix socket) counts as "unknown"."""
    return request.client.host if request.client else "unknown"


def save_checked_plan(request: Request, plan: BusPlan, parent: str | None) -> tuple[str, str | None]:
    """Save a validated plan; returns its new id and the parent it links to (None when `parent` is unknown).
    Raises CheckRefused (422) or RequestRefused (429)."""
    problems = cost_problems(plan, request.app.state.settings.check_time_limit_s)
    if problems:
        raise CheckRefused(problems)
    client = admit_save(request)
    store: PlanStore = request.app.state.store
    parent_id = parent if parent and store.get_plan(parent) else None
    plan_id = store.save_plan(plan_to_dict(plan), engine_version=ENGINE_VERSION, parent_id=parent_id, client=client)
    return plan_id, parent_id


def save_capture(request: Request, plan_id: str, capture: dict[str, Any]) -> str:
    """Save a capture (its text and settings) checked against the saved plan `plan_id`; returns its new id.
    Raises RequestRefused (429)."""
    client = admit_save(request)
    store: PlanStore = request.app.state.store
    return store.save_capture(plan_id, capture, engine_version=ENGINE_VERSION, client=client)


def admit_save(request: Request) -> str:
    """The client address, when it may save once more now; RequestRefused (429) with the wait otherwise."""
    settings = request.app.state.settings
    limiter: SaveLimiter = request.app.state.save_limiter
    client = client_address(request)
    wait_s = limiter.admit(client)
    if wait_s is not None:
        raise RequestRefused(
            429,
            Problem(
                "",
                "Saves",
                None,
                {"per_minute": settings.saves_per_minute, "per_day": settings.saves_per_day},
                f"This address has reached its save limit ({settings.saves_per_minute} a minute, "
                f"{settings.saves_per_day} a day); try again in {wait_s:.0f} s.",
            ),
            wait_s,
        )
    return client
