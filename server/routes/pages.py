"""HTML pages, each with a JSON twin at the same path plus ".json" built from the same data dict."""

import csv
import io
import json
import re
import unicodedata
from typing import Annotated, Any
from urllib.parse import quote

from fastapi import APIRouter, Depends, Request
from fastapi.responses import JSONResponse, RedirectResponse, Response
from pairline.engine.plan import BusInputError, BusPlan, Problem, current_document, load_plan, plan_to_dict
from pairline.server.checking import Checker, CheckRefused
from pairline.server.errors import RequestRefused, not_found
from pairline.server.fieldviews import CAPTURE_LIST_LIMIT, capture_list_data, with_capture_list
from pairline.server.forms import (
    MAX_FORM_FIELDS,
    FormState,
    draft_fields,
    fields_from_draft,
    form_from_plan,
    merge_problems,
    parse_form,
    starter_plan,
    with_units,
)
from pairline.server.json_input import JsonInputError, load_json
from pairline.server.node_table import read_node_table, with_pasted_rows
from pairline.server.openapi import FORM_BODY, IMPORT_BODY
from pairline.server.quantities import UnitSystem
from pairline.server.rendering import page_at, page_json, page_template, render, render_bytes
from pairline.server.saving import save_checked_plan
from pairline.server.store import PlanStore, SavedPlan
from pairline.server.views import editor_data, lineage_data, start_data
from starlette.concurrency import run_in_threadpool

router = APIRouter()
UTF8_BOM = "\ufeff"  # spreadsheet programs read a CSV as UTF-8 (so "Ω" survives) only when it starts with this


def get_store(request: Request) -> PlanStore:
    store: PlanStore = request.app.state.store
    return store


StoreDep = Annotated[PlanStore, Depends(get_store)]


def get_checker(request: Request) -> Checker:
    checker: Checker = request.app.state.checker
    return checker


CheckerDep = Annotated[Checker, Depends(get_checker)]


def page(request: Request, template: str, data: dict[str, Any], as_json: bool, status_code: int = 200) -> Response:
    if as_json:
        return JSONResponse(data, status_code=status_code)
    return render(request, template, data, status_code)


def _split(ref: str) -> tuple[str, bool]:
    return (ref[: -len(".json")], True) if ref.endswith(".json") else (ref, False)


# --- start ------------------------------------------------------------------------------------------------


@router.get("/")
@router.get("/index.json")
@router.get("/.json")
def start_page(request: Request, store: StoreDep) -> Response:
    as_json = request.url.path != "/"
    return page(request, "start.html", start_data(store.samples()), as_json)


@router.post("/import", openapi_extra=IMPORT_BODY)
async def import_plan(request: Request, store: StoreDep) -> Response:
    """A plan file uploaded or pasted: validated like any plan, saved, then opened (303 to its URL)."""
    async with request.form(max_fields=20) as form:
        upload = form.get("plan_file")
        pasted = str(form.get("plan_text") or "")
        text = pasted
        if upload is not None and not isinstance(upload, str):
            raw = await upload.read()
            if raw:
                text = raw.decode("utf-8", errors="replace")
    problems: list[Problem] = []
    units: UnitSystem = "metric"
    try:
        if not text.strip():
            raise BusInputError(
                [Problem("plan_text", "Plan", "", {"type": "JSON object"}, "Choose a plan file or paste its JSON.")]
            )
        try:
            doc = load_json(text, request.app.state.settings.max_json_depth)
        except JsonInputError as exc:
            raise BusInputError(
                [Problem("plan_text", "Plan", text[:80], {"type": "JSON object"}, f"The plan cannot be read: {exc}.")]
            ) from None
        units = "imperial" if isinstance(doc, dict) and doc.get("display_units") == "imperial" else "metric"
        plan = load_plan(doc)
        plan_id, _ = await run_in_threadpool(save_checked_plan, request, plan, None)
    except BusInputError as exc:
        problems = exc.problems
    if problems:
        return render(request, "start.html", start_data(store.samples(), problems, pasted, units), status_code=422)
    return RedirectResponse(f"/plans/{plan_id}", status_code=303)


# --- editor -----------------------------------------------------------------------------------------------

BLANK_NODE_ROWS = 5


@router.get("/plans/new")
@router.get("/plans/new.json")
def new_plan_page(request: Request, units: str = "metric") -> Response:
    state = form_from_plan(starter_plan("imperial" if units == "imperial" else "metric"))
    state.n_nodes = BLANK_NODE_ROWS
    state.n_bias = 1
    data = editor_data(state, title="New bus plan")
    return page(request, "editor.html", data, request.url.path.endswith(".json"))


@router.get("/plans/{ref}/edit")
@router.get("/plans/{ref}/edit.json")
def edit_page(request: Request, ref: str, store: StoreDep) -> Response:
    saved = store.get_plan(ref)
    if saved is None:
        return not_found(request)
    state = form_from_plan(saved.plan, parent_id=saved.id)
    data = editor_data(state, title=f"Edit a copy of “{saved.title or 'Untitled bus'}”", saved_from=saved)
    return page(request, "editor.html", data, request.url.path.endswith(".json"))


@router.post("/plans", openapi_extra=FORM_BODY)
async def submit_plan(request: Request, store: StoreDep, checker: CheckerDep) -> Response:
    """The editor's form (or a checked draft's save button). Check renders the report; save answers 303."""
    async with request.form(max_fields=MAX_FORM_FIELDS) as form:
        fields = {k: v for k, v in form.items() if isinstance(v, str)}
        upload = form.get("node_table_file")
        if upload is not None and not isinstance(upload, str) and (raw := await upload.read()):
            fields["node_table"] = raw.decode("utf-8-sig", errors="replace")
    if "plan_json" in fields:
        return await _save_draft(request, fields)
    if "draft_fields" in fields:  # "Edit this draft" on a checked draft: the editor as it was typed
        fields = fields_from_draft(fields["draft_fields"]) | {"action": "edit"}
    parsed = parse_form(fields)
    state = parsed.state
    if parsed.action == "paste_nodes":
        table = read_node_table(fields.get("node_table", ""), state.units)
        if table.problems:
            state.values["node_table"] = fields.get("node_table", "")
            state.problems = table.problems
            return render(request, "editor.html", editor_data(state, title=_editor_title(state)), status_code=422)
        state = with_pasted_rows(state, len(parsed.doc["nodes"]), table.rows, bool(fields.get("node_table_replace")))
        return render(request, "editor.html", editor_data(state, title=_editor_title(state)))
    adding = ADD_ROW.match(parsed.action)
    if adding or parsed.action in (
        "add_node",
        "add_termination",
        "add_bias",
        "add_probe",
        "device_values",
        "units",
        "edit",
    ):
        if adding:
            state.add_row(adding.group(1))
        elif parsed.action.startswith("add_"):
            state.add_row(
                {"add_node": "nodes", "add_termination": "terminations", "add_bias": "bias", "add_probe": "probes"}[
                    parsed.action
                ]
            )
        elif parsed.action == "units":
            state = with_units(state, parsed.doc, parsed.doc["display_units"])
        state.problems = []
        return render(request, "editor.html", editor_data(state, title=_editor_title(state)))
    try:
        plan: BusPlan | None = load_plan(parsed.doc)
    except BusInputError as exc:
        plan = None
        state.problems = merge_problems(parsed.problems, exc.problems)
    if plan is None or parsed.problems:
        return render(request, "editor.html", editor_data(state, title=_editor_title(state)), status_code=422)
    try:
        if parsed.action == "save":
            plan_id, _ = await run_in_threadpool(save_checked_plan, request, plan, state.parent_id)
            return RedirectResponse(f"/plans/{plan_id}", status_code=303)
        data = json.loads(await run_in_threadpool(checker.draft_data, plan))
    except CheckRefused as exc:
        state.problems = exc.problems
        return render(request, "editor.html", editor_data(state, title=_editor_title(state)), status_code=422)
    except RequestRefused as exc:  # over the save quota: the form comes back as typed, the reason on top
        state.problems = [exc.problem]
        refused = render(request, "editor.html", editor_data(state, title=_editor_title(state)), exc.status)
        refused.headers["Retry-After"] = str(round(exc.retry_after_s or 0))
        return refused
    data["draft"] = {
        "plan_json": json.dumps(plan_to_dict(plan)),
        "parent_id": await run_in_threadpool(_parent, store, state.parent_id),
        "fields": draft_fields(state),
    }
    return render(request, page_template(data), data)


# "Add a row" to any table the editor shows ("add_row:segments.1.nodes"); "add_row:segments" adds a segment.
ADD_ROW = re.compile(
    r"^add_row:((?:segments\.\d{1,3}\.)?(?:nodes|branches|terminations|bias)|segments|repeaters"
    r"|four_wire\.return_terminations|four_wire\.return_bias)$"
)


def _editor_problems(doc: Any) -> list[Problem]:
    """A saved plan's problems under the field names the editor shows (a version-1 plan's, as version 2)."""
    try:
        load_plan(current_document(doc))
    except BusInputError as exc:
        return exc.problems
    return []


def _editor_title(state: FormState) -> str:
    return "Edit a copy" if state.parent_id else "New bus plan"


def _parent(store: PlanStore, parent_id: str | None) -> str | None:
    return parent_id if parent_id and store.get_plan(parent_id) else None


async def _save_draft(request: Request, fields: dict[str, str]) -> Response:
    try:
        doc = load_json(fields["plan_json"], request.app.state.settings.max_json_depth)
    except JsonInputError as exc:
        raise BusInputError(
            [Problem("plan_json", "Plan", None, {"type": "JSON object"}, f"The plan cannot be read: {exc}.")]
        ) from None
    plan = load_plan(doc)
    plan_id, _ = await run_in_threadpool(save_checked_plan, request, plan, fields.get("parent_id") or None)
    return RedirectResponse(f"/plans/{plan_id}", status_code=303)


# --- saved plans ------------------------------------------------------------------------------------------


def _receiver_names(saved: SavedPlan) -> set[str]:
    """Every node's name, the further segments' included."""
    tables = [saved.plan] + [s for s in saved.plan.get("segments") or [] if isinstance(s, dict)]
    nodes = [n for t in tables for n in t.get("nodes") or []]
    return {n["name"] for n in nodes if isinstance(n, dict) and isinstance(n.get("name"), str)}


@router.get("/plans/{ref}")
def plan_page(
    request: Request, ref: str, store: StoreDep, checker: CheckerDep, receiver: str | None = None
) -> Response:
    """A saved plan, checked (straight from the results cache when it holds this plan, view and format), with the
    captures saved with it read afresh."""
    plan_id, as_json = _split(ref)
    receiver = receiver or None
    body = checker.cached_json(plan_id, receiver) if as_json else checker.cached_html(plan_id, receiver)
    saved = None
    if body is None:
        saved = store.get_plan(plan_id)
        if saved is None:
            return not_found(request)
        try:
            body = _checked_plan_page(request, checker, store, saved, receiver, as_json)
        except BusInputError as exc:
            # Saved under an older engine or looser limits that accepted it; the editor shows what to change.
            if as_json:
                raise
            state = form_from_plan(saved.plan, parent_id=saved.id)
            state.problems = _editor_problems(saved.plan) or exc.problems
            title = "This saved plan needs changes before it can be checked here"
            return render(request, "editor.html", editor_data(state, title=title, saved_from=saved), status_code=422)
    listed, total = store.captures_of(plan_id, CAPTURE_LIST_LIMIT)
    if listed and saved is None:  # a cached page: its plan is read only when the list words places in its terms
        saved = store.get_plan(plan_id)
    captures = capture_list_data(plan_id, listed, total, saved.plan if saved else {})
    body = with_capture_list(body, as_json, captures, request.app.state.templates)
    return Response(body, media_type="application/json" if as_json else "text/html; charset=utf-8")


def _checked_plan_page(
    request: Request, checker: Checker, store: PlanStore, saved: SavedPlan, receiver: str | None, as_json: bool
) -> bytes:
    """A saved plan's page or JSON twin, checked or from the cache; raises BusInputError for a plan the engine
    now refuses."""
    plan = load_plan(saved.plan)
    known = receiver if receiver in _receiver_names(saved) else None
    parent = store.get_plan(saved.parent_id) if saved.parent_id else None
    extra = {"lineage": lineage_data(parent)}
    if receiver == known:  # the view every request with these options gets, cached as bytes
        if as_json:
            return checker.saved_json(saved, plan, known, extra)
        return checker.saved_html(saved, plan, known, extra, page_at(request))
    data = json.loads(checker.saved_json(saved, plan, None, extra))
    for shown in [data, *(p["data"] for p in data.get("parts", []))]:
        if "waveforms" in shown:
            shown["waveforms"]["chosen_unknown"] = receiver
    return page_json(data) if as_json else render_bytes(request, page_template(data), data)


@router.get("/plans/{ref}/advised")
@router.get("/plans/{ref}/advised.json")
def advised_page(request: Request, ref: str, store: StoreDep, checker: CheckerDep) -> Response:
    """The editor opened on a saved plan's advised plan: a new, unsaved draft, with the changes listed."""
    saved = store.get_plan(ref.removesuffix(".json"))
    if saved is None:
        return not_found(request)
    data = json.loads(checker.advised_editor(load_plan(saved.plan), saved, saved.id))
    return page(request, "editor.html", data, request.url.path.endswith(".json"))


@router.post("/plans/advised")
async def advised_draft(request: Request, store: StoreDep, checker: CheckerDep) -> Response:
    """The same for a checked draft that has no id yet: its plan comes back in the form."""
    async with request.form(max_fields=4) as form:
        raw = form.get("plan_json")
        parent = form.get("parent_id")
    text = raw if isinstance(raw, str) else ""
    try:
        doc = load_json(text, request.app.state.settings.max_json_depth)
    except JsonInputError as exc:
        raise BusInputError(
            [Problem("plan_json", "Plan", text[:80], {"type": "JSON object"}, f"The plan cannot be read: {exc}.")]
        ) from None
    plan = load_plan(doc)
    parent_id = parent if isinstance(parent, str) and parent and store.get_plan(parent) else None
    data = json.loads(await run_in_threadpool(checker.advised_editor, plan, None, parent_id))
    return render(request, "editor.html", data)


@router.get("/plans/{ref}/download")
def download_plan(request: Request, ref: str, store: StoreDep) -> Response:
    saved = store.get_plan(ref)
    if saved is None:
        return not_found(request)
    try:  # the current format: a plan saved as version 1 comes down as its version-2 twin
        doc: Any = plan_to_dict(load_plan(saved.plan))
    except BusInputError:
        doc = saved.plan  # no longer valid here: as it was saved, for the editor to mend
    body = json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
    return Response(
        body.encode("utf-8"),
        media_type="application/json",
        headers={"Content-Disposition": attachment(saved, ".json")},
    )


@router.get("/plans/{ref}/bom.csv")
def bill_of_materials(request: Request, ref: str, store: StoreDep, checker: CheckerDep) -> Response:
    saved = store.get_plan(ref)
    if saved is None:
        return not_found(request)
    parent = store.get_plan(saved.parent_id) if saved.parent_id else None
    data = json.loads(checker.saved_json(saved, load_plan(saved.plan), None, {"lineage": lineage_data(parent)}))
    out = io.StringIO()
    writer = csv.writer(out)
    writer.writerow(["item", "value", "quantity", "rating", "note"])
    # A plan of segments or pairs lists each part's own materials under the part's label.
    parts = [("", data)] if "summary" in data else [(f"{p['label']}: ", p["data"]) for p in data["parts"]]
    for label, part in parts:
        for row in part["summary"]["bom"]:
            writer.writerow([label + row["item"], row["value"], row["quantity"], row["rating"], row["note"]])
    return Response(
        (UTF8_BOM + out.getvalue()).encode("utf-8"),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": attachment(saved, "-bom.csv")},
    )


def attachment(saved: SavedPlan, suffix: str) -> str:
    """Content-Disposition for a download named after the plan's title: an ASCII `filename` for old clients and
    the title as written in `filename*` (RFC 6266 with RFC 5987 encoding), so "120 Ω bus" survives."""

    def stem(text: str) -> str:
        slug = "".join(c if c.isalnum() else "-" for c in text.lower())
        return "-".join(part for part in slug.split("-") if part)[:40].strip("-")

    title = saved.title
    plain = stem(unicodedata.normalize("NFKD", title).encode("ascii", "ignore").decode("ascii"))
    written = stem(title)
    ascii_name = f"{plain or 'bus-plan'}-{saved.id}{suffix}"
    utf8_name = quote(f"{written or 'bus-plan'}-{saved.id}{suffix}", safe="")
    return f"attachment; filename=\"{ascii_name}\"; filename*=UTF-8''{utf8_name}"
