"""HTML pages, each with a JSON twin at the same path plus ".json" built from the same data dict."""

import csv
import io
import json
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Request
from fastapi.responses import JSONResponse, RedirectResponse, Response
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, BusPlan, Problem, load_plan, plan_to_dict
from pairline.server.app import render
from pairline.server.errors import not_found
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
from pairline.server.node_table import read_node_table, with_pasted_rows
from pairline.server.quantities import UnitSystem
from pairline.server.results import check_and_simulate, check_only
from pairline.server.store import PlanStore, SavedPlan
from pairline.server.views import advised_editor_data, bom_rows, editor_data, lineage_data, plan_data, start_data

router = APIRouter()
UTF8_BOM = "\ufeff"  # spreadsheet programs read a CSV as UTF-8 (so "Ω" survives) only when it starts with this


def get_store(request: Request) -> PlanStore:
    store: PlanStore = request.app.state.store
    return store


StoreDep = Annotated[PlanStore, Depends(get_store)]


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


@router.post("/import")
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
            doc = json.loads(text)
        except json.JSONDecodeError as exc:
            raise BusInputError(
                [
                    Problem(
                        "plan_text",
                        "Plan",
                        text[:80],
                        {"type": "JSON object"},
                        f"The plan is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg}).",
                    )
                ]
            ) from exc
        units = "imperial" if isinstance(doc, dict) and doc.get("display_units") == "imperial" else "metric"
        plan = load_plan(doc)
    except BusInputError as exc:
        problems = exc.problems
    if problems:
        return render(request, "start.html", start_data(store.samples(), problems, pasted, units), status_code=422)
    plan_id = store.save_plan(plan_to_dict(plan), engine_version=ENGINE_VERSION)
    return RedirectResponse(f"/plans/{plan_id}", status_code=303)


# --- editor -----------------------------------------------------------------------------------------------

BLANK_NODE_ROWS = 5


@router.get("/plans/new")
@router.get("/plans/new.json")
def new_plan_page(request: Request, units: str = "metric") -> Response:
    state = form_from_plan(starter_plan("imperial" if units == "imperial" else "metric"))
    state.n_nodes = BLANK_NODE_ROWS
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


@router.post("/plans")
async def submit_plan(request: Request, store: StoreDep) -> Response:
    """The editor's form (or a checked draft's save button). Check renders the report; save answers 303."""
    async with request.form(max_fields=MAX_FORM_FIELDS) as form:
        fields = {k: v for k, v in form.items() if isinstance(v, str)}
        upload = form.get("node_table_file")
        if upload is not None and not isinstance(upload, str) and (raw := await upload.read()):
            fields["node_table"] = raw.decode("utf-8-sig", errors="replace")
    if "plan_json" in fields:
        return _save_draft(fields, store)
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
    if parsed.action in ("add_node", "add_termination", "units", "edit"):
        if parsed.action == "add_node":
            state.n_nodes += 1
        elif parsed.action == "add_termination":
            state.n_terminations += 1
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
    if parsed.action == "save":
        plan_id = store.save_plan(plan_to_dict(plan), engine_version=ENGINE_VERSION, parent_id=_parent(store, state))
        return RedirectResponse(f"/plans/{plan_id}", status_code=303)
    data = plan_data(check_and_simulate(plan), None)
    data["draft"] = {
        "plan_json": json.dumps(plan_to_dict(plan)),
        "parent_id": _parent(store, state),
        "fields": draft_fields(state),
    }
    return render(request, "plan.html", data)


def _editor_title(state: FormState) -> str:
    return "Edit a copy" if state.parent_id else "New bus plan"


def _parent(store: PlanStore, state: FormState) -> str | None:
    return state.parent_id if state.parent_id and store.get_plan(state.parent_id) else None


def _save_draft(fields: dict[str, str], store: PlanStore) -> Response:
    try:
        doc = json.loads(fields["plan_json"])
    except json.JSONDecodeError as exc:
        raise BusInputError(
            [Problem("plan_json", "Plan", None, {"type": "JSON object"}, f"The plan is not valid JSON ({exc.msg}).")]
        ) from exc
    plan = load_plan(doc)
    parent = fields.get("parent_id") or None
    parent = parent if parent and store.get_plan(parent) else None
    plan_id = store.save_plan(plan_to_dict(plan), engine_version=ENGINE_VERSION, parent_id=parent)
    return RedirectResponse(f"/plans/{plan_id}", status_code=303)


# --- saved plans ------------------------------------------------------------------------------------------


def _saved(store: PlanStore, plan_id: str) -> tuple[SavedPlan, BusPlan] | None:
    saved = store.get_plan(plan_id)
    if saved is None:
        return None
    return saved, load_plan(saved.plan)


@router.get("/plans/{ref}")
def plan_page(request: Request, ref: str, store: StoreDep, receiver: str | None = None) -> Response:
    plan_id, as_json = _split(ref)
    saved = store.get_plan(plan_id)
    if saved is None:
        return not_found(request)
    try:
        plan = load_plan(saved.plan)
    except BusInputError as exc:
        # Saved under an older engine that accepted it; show it in the editor with what to change.
        if as_json:
            raise
        state = form_from_plan(saved.plan, parent_id=saved.id)
        state.problems = exc.problems
        title = "This saved plan needs changes before the current engine can check it"
        return render(request, "editor.html", editor_data(state, title=title, saved_from=saved), status_code=422)
    data = plan_data(check_and_simulate(plan, receiver), saved, receiver)
    children = store.children_of(saved.id)
    data["children"] = children
    parent = store.get_plan(saved.parent_id) if saved.parent_id else None
    data["lineage"] = lineage_data(parent, [c for c in map(store.get_plan, children) if c is not None])
    return page(request, "plan.html", data, as_json)


@router.get("/plans/{ref}/advised")
@router.get("/plans/{ref}/advised.json")
def advised_page(request: Request, ref: str, store: StoreDep) -> Response:
    """The editor opened on a saved plan's advised plan: a new, unsaved draft, with the changes listed."""
    found = _saved(store, ref)
    if found is None:
        return not_found(request)
    saved, plan = found
    report = check_only(plan)
    state = form_from_plan(plan_to_dict(report.advice.plan), parent_id=saved.id)
    data = advised_editor_data(report, state, saved_from=saved)
    return page(request, "editor.html", data, request.url.path.endswith(".json"))


@router.post("/plans/advised")
async def advised_draft(request: Request, store: StoreDep) -> Response:
    """The same for a checked draft that has no id yet: its plan comes back in the form."""
    async with request.form(max_fields=4) as form:
        raw = form.get("plan_json")
        parent = form.get("parent_id")
    try:
        doc = json.loads(raw if isinstance(raw, str) else "")
    except json.JSONDecodeError as exc:
        raise BusInputError(
            [Problem("plan_json", "Plan", None, {"type": "JSON object"}, f"The plan is not valid JSON ({exc.msg}).")]
        ) from exc
    report = check_only(load_plan(doc))
    parent_id = parent if isinstance(parent, str) and parent and store.get_plan(parent) else None
    state = form_from_plan(plan_to_dict(report.advice.plan), parent_id=parent_id)
    return render(request, "editor.html", advised_editor_data(report, state))


@router.get("/plans/{ref}/download")
def download_plan(request: Request, ref: str, store: StoreDep) -> Response:
    saved = store.get_plan(ref)
    if saved is None:
        return not_found(request)
    body = json.dumps(saved.plan, indent=2, ensure_ascii=False) + "\n"
    return Response(
        body,
        media_type="application/json",
        headers={"Content-Disposition": f'attachment; filename="{_filename(saved)}.json"'},
    )


@router.get("/plans/{ref}/bom.csv")
def bill_of_materials(request: Request, ref: str, store: StoreDep) -> Response:
    found = _saved(store, ref)
    if found is None:
        return not_found(request)
    saved, plan = found
    report = check_only(plan)
    out = io.StringIO()
    writer = csv.writer(out)
    writer.writerow(["item", "value", "quantity", "rating", "note"])
    for row in bom_rows(report.summary.bom, plan.display_units):
        writer.writerow([row["item"], row["value"], row["quantity"], row["rating"], row["note"]])
    return Response(
        UTF8_BOM + out.getvalue(),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{_filename(saved)}-bom.csv"'},
    )


def _filename(saved: SavedPlan) -> str:
    stem = "".join(c if c.isalnum() else "-" for c in saved.title.lower()).strip("-")[:40]
    return f"{stem or 'bus-plan'}-{saved.id}"
