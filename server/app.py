"""The app factory. Nothing touches disk or settings at import time: every test builds its own app."""

import json
import logging
import threading
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from pathlib import Path

from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, Problem, load_plan, plan_to_dict
from pairline.server.cache import MemoryCache
from pairline.server.checking import Checker
from pairline.server.errors import RequestRefused, error_envelope, input_error_response, not_found, refused_response
from pairline.server.middleware import BodyLimit, ErrorGuard, HeadAsGet, SecurityHeaders
from pairline.server.openapi import plan_openapi
from pairline.server.quota import MemoryLimiter
from pairline.server.rendering import make_templates
from pairline.server.settings import Settings
from pairline.server.store import PlanStore
from pairline.server.workers import CheckPool, PoolBusy
from starlette.exceptions import HTTPException as StarletteHTTPException

from pairline import data_dir

STATIC_DIR = data_dir("static")
SAMPLES_DIR = data_dir("sample_buses")

log = logging.getLogger("pairline.server")


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
    settings: Settings | None = None,
) -> FastAPI:
    """The planner app on a SQLite file. `load_samples` puts every valid `samples_dir/*.json` into the store."""
    from pairline.server.routes import api, field, pages

    settings = settings or Settings()
    pool = CheckPool(
        settings.check_workers, settings.check_time_limit_s, settings.check_memory_limit_mb, settings.check_queue_limit
    )

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        # workers start in the background, so the first check need not wait for them and startup does not either
        threading.Thread(target=pool.warm, name="pairline-warm", daemon=True).start()
        yield
        pool.close()

    app = FastAPI(
        title="Pairline",
        version=ENGINE_VERSION,
        docs_url=None,
        redoc_url=None,
        openapi_url="/openapi.json",
        lifespan=lifespan,
        redirect_slashes=False,  # its redirects are absolute URLs built from the Host header
    )
    app.state.settings = settings
    app.state.store = PlanStore(Path(db_path))
    app.state.templates = make_templates()
    app.state.pool = pool
    app.state.checker = Checker(pool, MemoryCache(settings.cache_max_mb * 1024 * 1024), settings)
    app.state.save_limiter = MemoryLimiter(settings.saves_per_minute, settings.saves_per_day)
    if load_samples:
        load_sample_buses(app.state.store, samples_dir)
    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    app.include_router(api.router)
    app.include_router(field.router)
    app.include_router(pages.router)
    app.openapi = lambda: plan_openapi(app)  # type: ignore[method-assign]

    @app.exception_handler(StarletteHTTPException)
    async def http_error(request: Request, exc: StarletteHTTPException) -> Response:
        if exc.status_code == 404:
            return not_found(request)
        headers = dict(exc.headers or {})
        if exc.status_code == 405:
            allowed = [m.strip() for m in headers.get("Allow", "").split(",") if m.strip()]
            allowed += ["HEAD"] if "GET" in allowed and "HEAD" not in allowed else []
            headers["Allow"] = ", ".join(allowed)
            problem = Problem(
                "",
                "Method",
                request.method,
                {"choices": allowed},
                f"{request.url.path} answers {', '.join(allowed)}, not {request.method}.",
            )
            return JSONResponse(error_envelope([problem], 405), status_code=405, headers=headers)
        detail = exc.detail if isinstance(exc.detail, str) else "Request refused."
        return JSONResponse(
            {"status": exc.status_code, "message": detail}, status_code=exc.status_code, headers=headers
        )

    @app.exception_handler(BusInputError)
    async def bus_input_error(request: Request, exc: BusInputError) -> Response:
        return input_error_response(exc)

    @app.exception_handler(RequestRefused)
    async def request_refused(request: Request, exc: RequestRefused) -> Response:
        return refused_response(request, exc)

    @app.exception_handler(PoolBusy)
    async def pool_busy(request: Request, exc: PoolBusy) -> Response:
        problem = Problem(
            "",
            "Server load",
            None,
            {"retry_after_s": round(exc.retry_after_s)},
            f"Every check worker is busy; try again in {exc.retry_after_s:.0f} s.",
        )
        return refused_response(request, RequestRefused(503, problem, exc.retry_after_s))

    app.add_middleware(BodyLimit, max_bytes=settings.max_body_bytes)
    app.add_middleware(HeadAsGet)
    app.add_middleware(ErrorGuard)
    app.add_middleware(SecurityHeaders)
    return app
