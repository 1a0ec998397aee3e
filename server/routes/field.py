"""Field checks: the capture form of a saved plan, its result page, and the JSON API for the same check."""

import json
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, Response
from pairline.engine.capture import decode_capture
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan
from pairline.server.app import render
from pairline.server.errors import not_found
from pairline.server.field import FIELD_KEYS, field_request, run_field_check
from pairline.server.fieldviews import field_form_data, field_json, field_result_data
from pairline.server.routes.pages import StoreDep, page
from pairline.server.store import PlanStore
from starlette.concurrency import run_in_threadpool

router = APIRouter()
MAX_FORM_FIELDS = 20


def _plan(store: PlanStore, ref: str) -> BusPlan | None:
    saved = store.get_plan(ref)
    if saved is None:
        return None
    try:
        return load_plan(saved.plan)
    except BusInputError:
        return None  # a plan the current engine refuses has no prediction to compare with


@router.get("/plans/{ref}/field")
@router.get("/plans/{ref}/field.json")
def field_form(request: Request, ref: str, store: StoreDep) -> Response:
    plan = _plan(store, ref)
    if plan is None:
        return not_found(request)
    return page(request, "field_form.html", field_form_data(plan, ref), request.url.path.endswith(".json"))


@router.post("/plans/{ref}/field")
async def field_submit(request: Request, ref: str, store: StoreDep) -> Response:
    """The capture form: 422 with everything typed and each message beside its input, else the result. Reading
    the capture and fitting run off the event loop."""
    plan = _plan(store, ref)
    if plan is None:
        return not_found(request)
    values: dict[str, str] = {}
    problems: list[Problem] = []
    async with request.form(max_fields=MAX_FORM_FIELDS, max_files=1) as form:
        for key in (*FIELD_KEYS, "capture_csv"):
            raw = form.get(key)
            values[key] = raw if isinstance(raw, str) else ""
        upload = form.get("capture_file")
        if upload is not None and not isinstance(upload, str):
            content = await upload.read()
            if content:
                try:
                    values["capture_csv"] = decode_capture(content)  # shown back in the text box if anything fails
                except BusInputError as exc:
                    problems += exc.problems
    try:
        if problems:
            raise BusInputError(problems)
        field = await run_in_threadpool(field_request, values, plan)
        result = await run_in_threadpool(run_field_check, plan, field)
    except BusInputError as exc:
        return render(request, "field_form.html", field_form_data(plan, ref, values, exc.problems), status_code=422)
    return render(request, "field_result.html", field_result_data(plan, ref, field, result))


async def _json_object(request: Request) -> dict[str, Any]:
    raw = await request.body()
    try:
        body = json.loads(raw)
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise BusInputError(
            [Problem("", "Request", None, {"type": "JSON object"}, f"The request body is not valid JSON ({exc}).")]
        ) from exc
    if not isinstance(body, dict):
        raise BusInputError(
            [
                Problem(
                    "", "Request", None, {"type": "JSON object"}, "Send one JSON object: the capture and its settings."
                )
            ]
        )
    return body


@router.post("/api/field")
async def api_field(request: Request) -> Response:
    """Check a capture against a plan sent along: {"plan": {...}, "capture_csv": "...", settings}."""
    body = await _json_object(request)
    plan = load_plan(body.get("plan"))
    return JSONResponse(await run_in_threadpool(_checked, plan, None, body))


@router.post("/api/plans/{ref}/field")
async def api_plan_field(request: Request, ref: str, store: StoreDep) -> Response:
    """Check a capture against a saved plan: {"capture_csv": "...", settings}."""
    plan = _plan(store, ref)
    if plan is None:
        return JSONResponse({"status": 404, "message": f"No saved plan '{ref}'."}, status_code=404)
    body = await _json_object(request)
    return JSONResponse(await run_in_threadpool(_checked, plan, ref, body))


def _checked(plan: BusPlan, plan_id: str | None, body: dict[str, Any]) -> dict[str, Any]:
    """The JSON result of a request (the fit takes seconds: callers run this off the event loop)."""
    field = field_request(body, plan)
    return field_json(field_result_data(plan, plan_id, field, run_field_check(plan, field)))
