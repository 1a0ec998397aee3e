"""Field checks: the capture form of a saved plan, its result page, and the JSON API for the same check.

Reading a capture and fitting it run in the check workers (server.workers), under their time and memory limits;
a fit cut off by a limit is refused with the envelope, naming what to send instead.
"""

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, Response
from pairline.engine.capture import decode_capture
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan, plan_to_dict
from pairline.server.errors import not_found
from pairline.server.field import FIELD_KEYS
from pairline.server.fieldjobs import field_result_page
from pairline.server.fieldviews import field_form_data
from pairline.server.jobs import Page
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.openapi import REFUSALS
from pairline.server.rendering import page_at, render
from pairline.server.routes.api import require_json
from pairline.server.routes.pages import StoreDep, page
from pairline.server.store import PlanStore
from pairline.server.workers import CheckOverLimit
from starlette.concurrency import run_in_threadpool

router = APIRouter()
MAX_FORM_FIELDS = 20
CAPTURE_BODY: dict[str, Any] = {
    "type": "object",
    "required": ["capture_csv"],
    "properties": {
        "capture_csv": {"type": "string", "description": "the capture file's text: time and A-B, or time, A and B"},
        "at": {"type": "string", "description": "a node's name or the driver's (default the driver)"},
        "at_position_m": {"type": "number", "description": "or a point on the trunk, in metres"},
        "sent": {"type": "string", "enum": ["edge", "pattern", "bits"]},
        "bits": {"type": "string", "description": "the bits sent, 0s and 1s, with sent = bits"},
        "signal": {"type": "string", "enum": ["auto", "differential", "lines"]},
        "time_unit": {"type": "string"},
        "voltage_unit": {"type": "string"},
        "sample_interval_s": {"type": "number"},
        "probe_attenuation": {"type": "number"},
    },
}
SAVED_PLAN_CAPTURE: dict[str, Any] = {
    "requestBody": {"required": True, "content": {"application/json": {"schema": CAPTURE_BODY}}},
    "responses": REFUSALS,
}
PLAN_AND_CAPTURE: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {
            "application/json": {
                "schema": CAPTURE_BODY
                | {
                    "required": ["plan", "capture_csv"],
                    "properties": CAPTURE_BODY["properties"] | {"plan": {"$ref": "#/components/schemas/BusPlan"}},
                }
            }
        },
    },
    "responses": REFUSALS,
}
FORM_BODY: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {
            "multipart/form-data": {
                "schema": {
                    "type": "object",
                    "properties": {"capture_file": {"type": "string", "format": "binary"}}
                    | {k: {"type": "string"} for k in (*FIELD_KEYS, "capture_csv")},
                }
            }
        },
    }
}


def _plan(store: PlanStore, ref: str) -> BusPlan | None:
    saved = store.get_plan(ref)
    if saved is None:
        return None
    try:
        return load_plan(saved.plan)
    except BusInputError:
        return None  # a plan the current engine refuses has no prediction to compare with


def _in_worker(request: Request, plan: BusPlan, plan_id: str | None, raw: dict[str, Any], html: bool) -> Page:
    """The field check in a check worker (blocks the calling thread, never the event loop)."""
    at = page_at(request) if html else None
    try:
        page_bytes: Page = request.app.state.pool.run(field_result_page, plan_to_dict(plan), plan_id, raw, at)
    except CheckOverLimit as exc:
        what = (
            f"needed more than the {exc.memory_limit_mb} MB of memory a check may use"
            if exc.limit == "memory"
            else f"took longer than the {exc.time_limit_s:g} s a check may take"
        )
        raise BusInputError(
            [
                Problem(
                    "capture_csv",
                    "Capture file",
                    None,
                    {"time_limit_s": exc.time_limit_s, "memory_limit_mb": exc.memory_limit_mb},
                    f"Comparing this capture with the plan {what}. Send a shorter capture (the plan's window "
                    "around the edge is enough) or fewer samples.",
                )
            ]
        ) from None
    return page_bytes


@router.get("/plans/{ref}/field")
@router.get("/plans/{ref}/field.json")
def field_form(request: Request, ref: str, store: StoreDep) -> Response:
    plan = _plan(store, ref)
    if plan is None:
        return not_found(request)
    return page(request, "field_form.html", field_form_data(plan, ref), request.url.path.endswith(".json"))


@router.post("/plans/{ref}/field", openapi_extra=FORM_BODY)
async def field_submit(request: Request, ref: str, store: StoreDep) -> Response:
    """The capture form: 422 with everything typed and each message beside its input, else the result."""
    plan = await run_in_threadpool(_plan, store, ref)
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
        _, html = await run_in_threadpool(_in_worker, request, plan, ref, dict(values), True)
    except BusInputError as exc:
        return render(request, "field_form.html", field_form_data(plan, ref, values, exc.problems), status_code=422)
    return Response(html, media_type="text/html; charset=utf-8")


async def _json_object(request: Request) -> dict[str, Any]:
    """The request's JSON object; 415 unless sent as application/json, 422 when it is not one JSON object."""
    require_json(request, "capture")
    try:
        body = load_json(await request.body(), request.app.state.settings.max_json_depth)
    except JsonInputError as exc:
        body = exc
    if not isinstance(body, dict):
        reason = f"cannot be read: {body}" if isinstance(body, JsonInputError) else "is not a JSON object"
        raise BusInputError(
            [
                Problem(
                    "",
                    "Request",
                    None,
                    {"type": "JSON object"},
                    f"The request body {reason}. Send one JSON object: the capture's text and its settings.",
                )
            ]
        )
    return body


@router.post("/api/field", openapi_extra=PLAN_AND_CAPTURE)
async def api_field(request: Request) -> Response:
    """Check a capture against a plan sent along: {"plan": {...}, "capture_csv": "...", settings}."""
    body = await _json_object(request)
    plan = load_plan(body.get("plan"))
    data, _ = await run_in_threadpool(_in_worker, request, plan, None, body, False)
    return Response(data, media_type="application/json")


@router.post("/api/plans/{ref}/field", openapi_extra=SAVED_PLAN_CAPTURE)
async def api_plan_field(request: Request, ref: str, store: StoreDep) -> Response:
    """Check a capture against a saved plan: {"capture_csv": "...", settings}."""
    plan = await run_in_threadpool(_plan, store, ref)
    if plan is None:
        return JSONResponse({"status": 404, "message": f"No saved plan '{ref}'."}, status_code=404)
    body = await _json_object(request)
    data, _ = await run_in_threadpool(_in_worker, request, plan, ref, body, False)
    return Response(data, media_type="application/json")
