"""Run the planner with uvicorn. Settings come from arguments, else PAIRLINE_HOST / PAIRLINE_PORT / PAIRLINE_DB
(and the PAIRLINE_* variables of server.settings)."""

import os
from dataclasses import dataclass, field
from pathlib import Path

import uvicorn
from pairline.server.settings import Settings
from pairline.server.settings import settings_from_env as server_settings_from_env

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8485
DEFAULT_DB = "pairline.db"


@dataclass(frozen=True, slots=True)
class ServeSettings:
    host: str
    port: int
    db_path: Path
    server: Settings = field(default_factory=Settings)  # limits, cache, quotas and the public URL


def settings_from_env(
    host: str | None = None, port: int | None = None, db_path: str | Path | None = None
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
        db_path=Path(db_path or os.environ.get("PAIRLINE_DB") or DEFAULT_DB),
        server=server_settings_from_env(),
    )


def run(host: str | None = None, port: int | None = None, db_path: str | Path | None = None) -> None:
    """Serve the planner until interrupted (loopback by default). Limits, cache and links come from the
    PAIRLINE_* variables that server.settings reads."""
    from pairline.server.app import create_app

    settings = settings_from_env(host, port, db_path)
    app = create_app(settings.db_path, settings=settings.server)
    uvicorn.run(app, host=settings.host, port=settings.port, log_level="info")
