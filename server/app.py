"""The app factory. Nothing touches disk or settings at import time: every test builds its own app."""

import json
import logging
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Request
from fastapi.responses import HTMLResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from jinja2 import Environment, FileSystemLoader, select_autoescape
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, load_plan, plan_to_dict
from pairline.server.errors import input_error_response, not_found
from pairline.server.store import PlanStore
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from pairline import data_dir

TEMPLATES_DIR = data_dir("templates")
STATIC_DIR = data_dir("static")
SAMPLES_DIR = data_dir("sample_buses")
MAX_BODY_BYTES = 2_000_000  # a 512-node plan is about 100 kB; anything far larger is refused

log = logging.getLogger("pairline.server")


class BodyLimit:
    """Refuse request bodies over `max_bytes` with 413, by Content-Length or by counting a streamed body."""

    def __init__(self, app: ASGIApp, max_bytes: int):
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = dict(scope.get("headers") or [])
        declared = headers.get(b"content-length")
        if declared is not None and (not declared.isdigit() or int(declared) > self.max_bytes):
            await _too_large(scope, receive, send, self.max_bytes)
            return
        seen = 0

        async def counting_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise BodyTooLarge
            return message

        try:
            await self.app(scope, counting_receive, send)
        except BodyTooLarge:
            await _too_large(scope, receive, send, self.max_bytes)


class BodyTooLarge(Exception):
    pass


async def _too_large(scope: Scope, receive: Receive, send: Send, max_bytes: int) -> None:
    message = f"The request is larger than {max_bytes // 1000} kB; send a smaller plan."
    body: dict[str, Any] = {
        "status": 413,
        "problems": [
            {
                "field": "",
                "label": "Request body",
                "value": None,
                "allowed": {"max_bytes": max_bytes},
                "message": message,
            }
        ],
    }
    path = str(scope.get("path", ""))
    accept = dict(scope.get("headers") or []).get(b"accept", b"").decode("latin-1")
    if "text/html" in accept and not (path.startswith("/api/") or path.endswith(".json")):
        html = (
            "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>Too large · Pairline</title>"
            "<link rel='stylesheet' href='/static/pairline.css'></head><body><main><section class='panel lost'>"
            f"<h1>That is too much to send</h1><p>{message}</p>"
            "<p><a class='button' href='/'>Back to the start</a></p></section></main></body></html>"
        )
        await HTMLResponse(html, status_code=413)(scope, receive, send)
        return
    await JSONResponse(body, status_code=413)(scope, receive, send)


def make_templates() -> Environment:
    env = Environment(
        loader=FileSystemLoader(TEMPLATES_DIR),
        autoescape=select_autoescape(enabled_extensions=("html", "svg"), default=True),
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.globals["engine_version"] = ENGINE_VERSION
    return env


def render(request: Request, template: str, data: dict[str, Any], status_code: int = 200) -> HTMLResponse:
    env: Environment = request.app.state.templates
    path = request.url.path
    json_url = path + ".json" if path != "/" else "/index.json"
    base = str(request.base_url).rstrip("/")
    html = env.get_template(template).render(data=data, request_path=path, json_url=json_url, base_url=base)
    return HTMLResponse(html, status_code=status_code)


def load_sample_buses(store: PlanStore, directory: Path = SAMPLES_DIR) -> int:
    """Load every valid `sample_buses/*.json` into the store; an invalid file is logged and skipped."""
    loaded: list[str] = []
    for position, path in enumerate(sorted(directory.glob("*.json"))):
        try:
            plan = load_plan(json.loads(path.read_text(encoding="utf-8")))
        except (OSError, ValueError) as exc:  # BusInputError and JSONDecodeError are ValueErrors
            log.warning("sample bus %s skipped: %s", path.name, exc)
            continue
        store.put_sample(path.stem, plan_to_dict(plan), engine_version=ENGINE_VERSION, position=position)
        loaded.append(path.stem)
    store.retain_samples(loaded)
    return len(loaded)


def create_app(
    db_path: Path,
    *,
    load_samples: bool = True,
    samples_dir: Path = SAMPLES_DIR,
    max_body_bytes: int = MAX_BODY_BYTES,
) -> FastAPI:
    """The planner app on a SQLite file. `load_samples` puts every valid `samples_dir/*.json` into the store."""
    from pairline.server.routes import api, field, pages

    app = FastAPI(title="Pairline", version=ENGINE_VERSION, docs_url=None, redoc_url=None, openapi_url=None)
    app.state.store = PlanStore(Path(db_path))
    app.state.templates = make_templates()
    if load_samples:
        load_sample_buses(app.state.store, samples_dir)
    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    app.include_router(api.router)
    app.include_router(field.router)
    app.include_router(pages.router)

    @app.exception_handler(StarletteHTTPException)
    async def http_error(request: Request, exc: StarletteHTTPException) -> Response:
        if exc.status_code == 404:
            return not_found(request)
        detail = exc.detail if isinstance(exc.detail, str) else "Request refused."
        return JSONResponse({"status": exc.status_code, "message": detail}, status_code=exc.status_code)

    @app.exception_handler(BusInputError)
    async def bus_input_error(request: Request, exc: BusInputError) -> Response:
        return input_error_response(exc)

    app.add_middleware(BodyLimit, max_bytes=max_body_bytes)
    return app
