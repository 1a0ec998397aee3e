"""Run the planner with uvicorn. Settings come from arguments, else PAIRLINE_HOST / PAIRLINE_PORT / PAIRLINE_DB
(and the PAIRLINE_* variables of server.settings).

`pairline serve` is one process that seeds the sample buses and serves. Several worker processes (or hosts) on
one PostgreSQL database seed once with `pairline seed`, then start uvicorn with the factory `app_from_env`,
which reads PAIRLINE_DB and the other PAIRLINE_* variables and does not seed.
"""

import os
from dataclasses import dataclass, field

import uvicorn
from fastapi import FastAPI
from pairline.server.settings import Settings
from pairline.server.settings import settings_from_env as server_settings_from_env
from pairline.server.store import StoreError, check_store_target

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8485
DEFAULT_DB = "pairline.db"


@dataclass(frozen=True, slots=True)
class ServeSettings:
    host: str
    port: int
    db: str  # a SQLite file path or a postgresql:// URL
    server: Settings = field(default_factory=Settings)  # limits, cache, quotas and the public URL


def db_from_env(db: str | os.PathLike[str] | None = None) -> str:
    """The store target: the argument, else PAIRLINE_DB, else ./pairline.db. Raises ValueError when malformed."""
    target = str(db) if db is not None else os.environ.get("PAIRLINE_DB") or DEFAULT_DB
    try:
        check_store_target(target)
    except StoreError as exc:
        raise ValueError(str(exc)) from None
    return target


def settings_from_env(
    host: str | None = None, port: int | None = None, db: str | os.PathLike[str] | None = None
) -> ServeSettings:
    """Explicit values win; otherwise the environment; otherwise loopback, port 8485 and ./pairline.db."""
    env_port = os.environ.get("PAIRLINE_PORT")
    if port is None and env_port:
        try:
            port = int(env_port)
        except ValueError as exc:
            raise ValueError(f"PAIRLINE_PORT is '{env_port}'; allowed a whole number from 1 to 65535.") from exc
    port = DEFAULT_PORT if port is None else port
    if not 1 <= port <= 65535:
        raise ValueError(f"port is {port}; allowed 1 to 65535.")
    return ServeSettings(
        host=host or os.environ.get("PAIRLINE_HOST") or DEFAULT_HOST,
        port=port,
        db=db_from_env(db),
        server=server_settings_from_env(),
    )


def app_from_env() -> FastAPI:
    """The app for one of several workers: the store named by PAIRLINE_DB, samples not seeded here.

    uvicorn --factory pairline.server.serve:app_from_env --workers 4
    """
    from pairline.server.app import create_app

    return create_app(db_from_env(), load_samples=False, settings=server_settings_from_env())


def run(settings: ServeSettings) -> None:
    """Seed the samples and serve the planner in this one process until interrupted."""
    from pairline.server.app import create_app

    app = create_app(settings.db, load_samples=True, settings=settings.server)
    uvicorn.run(app, host=settings.host, port=settings.port, log_level="info")
