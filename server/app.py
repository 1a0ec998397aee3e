"""The app factory. Nothing touches disk or settings at import time: every test builds its own app."""

import threading
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from pathlib import Path

from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import BusInputError, Problem
from pairline.server.cache import MemoryCache, ResultCache
from pairline.server.checking import Checker
from pairline.server.errors import RequestRefused, error_envelope, input_error_response, not_found, refused_response
from pairline.server.middleware import BodyLimit, ErrorGuard, HeadAsGet, SecurityHeaders
from pairline.server.openapi import plan_openapi
from pairline.server.quota import MemoryLimiter, SaveLimiter
from pairline.server.rendering import make_templates
from pairline.server.samples import SAMPLES_DIR, seed_samples
from pairline.server.settings import Settings
from pairline.server.store import PlanStore, open_store
from pairline.server.store.shared import StoreCache, StoreLimiter
from pairline.server.workers import CheckPool, PoolBusy
from starlette.exceptions import HTTPException as StarletteHTTPException

from pairline import data_dir

STATIC_DIR = data_dir("static")


def shared_state(store: PlanStore, settings: Settings) -> tuple[ResultCache, SaveLimiter]:
    """The results cache and the save limiter: in the store when several processes share it (PostgreSQL), so a
    plan checked by one process is a cache hit in every other and a client's saves count once whichever process
    takes them; in this process otherwise (SQLite), where memory is many times faster than the database file."""
    if store.shared:
        return StoreCache(store), StoreLimiter(store, settings.saves_per_minute, settings.saves_per_day)
    cache = MemoryCache(settings.cache_max_mb * 1024 * 1024)
    return cache, MemoryLimiter(settings.saves_per_minute, settings.saves_per_day)


def create_app(
    db: PlanStore | Path | str,
    *,
    load_samples: bool = True,
    samples_dir: Path = SAMPLES_DIR,
    settings: Settings | None = None,
) -> FastAPI:
    """The planner app on a store: an open PlanStore, a SQLite file path or a postgresql:// URL.

    `load_samples` seeds every valid `samples_dir/*.json` into the store. Several workers sharing one database
    seed once beforehand (`pairline seed`) and start with `load_samples=False`. A store opened here from a path
    or URL is closed when the app shuts down.
    """
    from pairline.server.routes import api, field, pages

    settings = settings or Settings()
    owned = not isinstance(db, PlanStore)
    store = db if isinstance(db, PlanStore) else open_store(db)
    pool = CheckPool(
        settings.check_workers, settings.check_time_limit_s, settings.check_memory_limit_mb, settings.check_queue_limit
    )

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        # workers start in the background, so the first check need not wait for them and startup does not either
        threading.Thread(target=pool.warm, name="pairline-warm", daemon=True).start()
        yield
        pool.close()
        if owned:
            store.close()

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
    app.state.store = store
    app.state.templates = make_templates()
    app.state.pool = pool
    cache, app.state.save_limiter = shared_state(store, settings)
    app.state.checker = Checker(pool, cache, settings)
    if load_samples:
        seed_samples(store, samples_dir)
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
