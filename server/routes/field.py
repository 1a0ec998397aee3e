"""Field checks: the capture form of a saved plan, the saved capture's page, and the JSON API for the same check.

A capture checked against a saved plan is saved with it (server.saving, under the save quota): the form answers
303 to the capture's own link, `/plans/<plan id>/captures/<capture id>`, whose page and `.json` twin never change
and whose `.csv` is the file as it was sent. Results are not stored: they are kept in the results cache and
fitted again when it no longer holds them.

Reading a capture and fitting it run in the check workers (server.workers), under their time and memory limits;
a fit cut off by a limit is refused with the envelope, naming what to send instead.
"""

import json
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, RedirectResponse, Response
from pairline.engine.capture import decode_capture
from pairline.engine.capturefile import file_error
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan, plan_to_dict
from pairline.server.errors import RequestRefused, not_found
from pairline.server.field import FIELD_KEYS
from pairline.server.fieldjobs import field_result_job
from pairline.server.fieldviews import capture_url, field_form_data, field_pages
from pairline.server.jobs import Page
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.openapi import REFUSALS, SAVE_BODY, multipart_body
from pairline.server.rendering import render
from pairline.server.routes.api import require_json
from pairline.server.routes.pages import StoreDep, page
from pairline.server.saving import save_capture
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
    "responses": SAVE_BODY["responses"]
    | {"201": {"description": "The capture is saved with the plan; Location is its page; the body its JSON twin."}},
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
FORM_BODY = multipart_body(
    {"capture_file": {"type": "string", "format": "binary"}}
    | {k: {"type": "string"} for k in (*FIELD_KEYS, "capture_csv")}
)


def _plan(store: PlanStore, ref: str) -> BusPlan | None:
    saved = store.get_plan(ref)
    if saved is None:
        return None
    try:
        return load_plan(saved.plan)
    except BusInputError:
        return None  # a plan the current engine refuses has no prediction to compare with


def _result(request: Request, plan: BusPlan, plan_id: str | None, raw: dict[str, Any]) -> dict[str, Any]:
    """The result page's data, fitted in a check worker (blocks the calling thread, never the event loop)."""
    try:
        body, _ = request.app.state.pool.run(field_result_job, plan_to_dict(plan), plan_id, raw)
    except CheckOverLimit as exc:
        what = (
            f"needed more than the {exc.memory_limit_mb} MB of memory a check may use"
            if exc.limit == "memory"
            else f"took longer than the {exc.time_limit_s:g} s a check may take"
        )
        raise file_error(
            None,
            {"time_limit_s": exc.time_limit_s, "memory_limit_mb": exc.memory_limit_mb},
            f"Comparing this capture with the plan {what}. Send a shorter capture (the plan's window around the edge "
            "is enough) or fewer samples.",
        ) from None
    result: dict[str, Any] = json.loads(body)
    return result


def _save(request: Request, plan_id: str, capture_csv: str, result: dict[str, Any]) -> tuple[str, Page]:
    """Save a checked capture with its plan (its text and the settings as read) and keep its pages in the cache;
    (its link, its JSON twin and page). Raises RequestRefused (429) over the save quota."""
    capture_id = save_capture(request, plan_id, {"capture_csv": capture_csv} | result["settings"])
    store: PlanStore = request.app.state.store
    pages = _pages(request, result, store, plan_id, capture_id)
    request.app.state.checker.keep_capture(capture_id, pages)
    return capture_url(plan_id, capture_id), pages


def _pages(request: Request, result: dict[str, Any], store: PlanStore, plan_id: str, capture_id: str) -> Page:
    saved = store.get_capture(plan_id, capture_id)
    base_url = request.app.state.settings.public_base_url or ""
    return field_pages(request.app.state.templates, result, saved, base_url)


@router.get("/plans/{ref}/field")
@router.get("/plans/{ref}/field.json")
def field_form(request: Request, ref: str, store: StoreDep) -> Response:
    plan = _plan(store, ref)
    if plan is None:
        return not_found(request)
    return page(request, "field_form.html", field_form_data(plan, ref), request.url.path.endswith(".json"))


@router.post("/plans/{ref}/field", openapi_extra=FORM_BODY)
async def field_submit(request: Request, ref: str, store: StoreDep) -> Response:
    """The capture form: 422 with everything typed and each message beside its input (429 over the save quota),
    else the capture is saved with the plan and the answer is 303 to its page."""
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
        result = await run_in_threadpool(_result, request, plan, ref, dict(values))
        url, _ = await run_in_threadpool(_save, request, ref, values["capture_csv"], result)
    except BusInputError as exc:
        return render(request, "field_form.html", field_form_data(plan, ref, values, exc.problems), status_code=422)
    except RequestRefused as exc:  # over the save quota: the form comes back as typed, the reason on top
        refused = render(request, "field_form.html", field_form_data(plan, ref, values, [exc.problem]), exc.status)
        refused.headers["Retry-After"] = str(round(exc.retry_after_s or 0))
        return refused
    return RedirectResponse(url, status_code=303)


@router.get("/plans/{ref}/captures/{name}")
def capture_page(request: Request, ref: str, name: str, store: StoreDep) -> Response:
    """A saved capture: its page, its `.json` twin, or its `.csv` file as it was sent."""
    capture_id, _, suffix = name.partition(".")
    saved = store.get_capture(ref, capture_id) if suffix in ("", "json", "csv") else None
    plan = _plan(store, ref) if saved is not None else None
    if saved is None or plan is None:
        return not_found(request)
    if suffix == "csv":
        return Response(
            saved.capture["capture_csv"].encode("utf-8"),
            media_type="text/csv; charset=utf-8",
            headers={"Content-Disposition": f'attachment; filename="capture-{capture_id}.csv"'},
        )

    def make() -> Page:
        result = _result(request, plan, ref, saved.capture)
        return _pages(request, result, store, ref, capture_id)

    body, html = request.app.state.checker.capture_page(capture_id, make)
    if suffix == "json":
        return Response(body, media_type="application/json")
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
    """Check a capture against a plan sent along, saving nothing: {"plan": {...}, "capture_csv": "...", settings}."""
    body = await _json_object(request)
    plan = load_plan(body.get("plan"))
    result = await run_in_threadpool(_result, request, plan, None, body)
    data, _ = field_pages(request.app.state.templates, result, None, "")
    return Response(data, media_type="application/json")


@router.post("/api/plans/{ref}/field", status_code=201, openapi_extra=SAVED_PLAN_CAPTURE)
async def api_plan_field(request: Request, ref: str, store: StoreDep) -> Response:
    """Check a capture against a saved plan and save it with the plan: {"capture_csv": "...", settings}. Answers
    201 with the capture's JSON twin; Location is its page."""
    plan = await run_in_threadpool(_plan, store, ref)
    if plan is None:
        return JSONResponse({"status": 404, "message": f"No saved plan '{ref}'."}, status_code=404)
    body = await _json_object(request)
    result = await run_in_threadpool(_result, request, plan, ref, body)
    url, (data, _) = await run_in_threadpool(_save, request, ref, str(body.get("capture_csv")), result)
    return Response(data, status_code=201, media_type="application/json", headers={"Location": url})
