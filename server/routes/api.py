"""JSON API: check a plan, save a plan, read a saved plan. Bad input answers 422 with the error envelope.

Bodies must be sent as application/json (so no page elsewhere can make a visitor's browser post a plan without
a CORS preflight), are refused past the nesting cap before parsing, and validate through the one plan model.
"""

from collections.abc import Callable
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, Response
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan
from pairline.server.errors import RequestRefused
from pairline.server.forms import plan_from_body
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.openapi import CHECK_BODY, SAVE_BODY
from pairline.server.saving import save_checked_plan
from pairline.server.store import PlanStore
from starlette.concurrency import run_in_threadpool

router = APIRouter(prefix="/api")
JSON_TYPES = ("application/json",)


def require_json(request: Request, what: str) -> None:
    """Refuse (415) a body not sent as application/json; `what` names it in the message ("plan")."""
    media_type = request.headers.get("content-type", "").split(";")[0].strip().lower()
    if media_type not in JSON_TYPES:
        raise RequestRefused(
            415,
            Problem(
                "",
                "Content-Type",
                media_type or None,
                {"choices": list(JSON_TYPES)},
                f"The {what} was sent as '{media_type or 'nothing'}'; send it as application/json.",
            ),
        )


async def plan_body(request: Request, read: Callable[[Any], BusPlan] = load_plan) -> BusPlan:
    """The request's JSON body, read as a bus plan by `read`. Raises RequestRefused (415) or BusInputError (422)."""
    require_json(request, "plan")
    try:
        doc = load_json(await request.body(), request.app.state.settings.max_json_depth)
    except JsonInputError as exc:
        raise BusInputError(
            [
                Problem(
                    "",
                    "Plan",
                    None,
                    {"type": "JSON object"},
                    f"The request body cannot be read: {exc}. Send one bus plan as a JSON object.",
                )
            ]
        ) from None
    return read(doc)


@router.post("/check", openapi_extra=CHECK_BODY)
async def check(request: Request) -> Response:
    """Check a plan without saving it: verdict, findings, summary and the engine report (no simulated
    pictures; a saved plan's page twin has them). The body is a plan, or {"form": {...}} with the editor's
    typed fields, as its live verdict sends."""
    plan = await plan_body(request, plan_from_body)
    body = await run_in_threadpool(request.app.state.checker.draft_report, plan)
    return Response(body, media_type="application/json")


@router.post("/plans", status_code=201, openapi_extra=SAVE_BODY)
async def save(request: Request, parent: str | None = None) -> Response:
    """Save a plan; answers 201 with its id and URLs. `?parent=<id>` links it to the plan it was copied from."""
    plan = await plan_body(request)
    plan_id, parent_id = await run_in_threadpool(save_checked_plan, request, plan, parent)
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
