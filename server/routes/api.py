"""JSON API: check a plan, save a plan, read a saved plan. Bad input answers 422 with the error envelope."""

import json
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, Response
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, Problem, load_plan, plan_to_dict
from pairline.server.forms import plan_from_body
from pairline.server.results import quick_check
from pairline.server.store import PlanStore
from pairline.server.views import check_data

router = APIRouter(prefix="/api")


async def _json_body(request: Request) -> Any:
    raw = await request.body()
    try:
        return json.loads(raw, parse_constant=_reject_constant)
    except (json.JSONDecodeError, UnicodeDecodeError, ValueError) as exc:
        raise BusInputError(
            [
                Problem(
                    "",
                    "Plan",
                    None,
                    {"type": "JSON object"},
                    f"The request body is not valid JSON ({exc}); send one bus plan as a JSON object.",
                )
            ]
        ) from exc


def _reject_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a number JSON allows")


@router.post("/check")
async def check(request: Request) -> Response:
    """Check a plan without saving it: verdict, findings, summary and the engine report (no simulated
    pictures; a saved plan's page twin has them). The body is a plan, or {"form": {...}} with the editor's
    typed fields, as its live verdict sends."""
    plan = plan_from_body(await _json_body(request))
    return JSONResponse(check_data(quick_check(plan)))


@router.post("/plans")
async def save(request: Request, parent: str | None = None) -> Response:
    """Save a plan; answers 201 with its id and URLs. `?parent=<id>` links it to the plan it was copied from."""
    store: PlanStore = request.app.state.store
    plan = load_plan(await _json_body(request))
    parent_id = parent if parent and store.get_plan(parent) else None
    plan_id = store.save_plan(plan_to_dict(plan), engine_version=ENGINE_VERSION, parent_id=parent_id)
    body = {"id": plan_id, "url": f"/plans/{plan_id}", "json_url": f"/plans/{plan_id}.json", "parent_id": parent_id}
    return JSONResponse(body, status_code=201, headers={"Location": f"/plans/{plan_id}"})


@router.get("/plans/{plan_id}")
def read(request: Request, plan_id: str) -> Response:
    """The saved plan document as stored, with its parent and the engine version it was saved with."""
    store: PlanStore = request.app.state.store
    saved = store.get_plan(plan_id)
    if saved is None:
        return JSONResponse({"status": 404, "message": f"No saved plan '{plan_id}'."}, status_code=404)
    return JSONResponse(
        {
            "id": saved.id,
            "plan": saved.plan,
            "parent_id": saved.parent_id,
            "engine_version": saved.engine_version,
            "created_at": saved.created_at,
        }
    )
