"""Where saved plans live. One interface, `PlanStore`; two databases behind it.

- SQLite (the embedded default): a file path. One host; good for one person or a small team.
- PostgreSQL: a `postgresql://` URL. Any number of server processes and hosts share one database, its sample list,
  its per-client save counts and its results cache.

`open_store(target)` picks by the target and brings the schema up to date (see migrations.py).
"""

import time
from collections.abc import Callable
from pathlib import Path

from pairline.server.store.base import (
    ID_BYTES,
    ID_CHARS,
    CaptureEntry,
    PlanStore,
    SampleEntry,
    SaveCount,
    SavedCapture,
    SavedPlan,
    StoreError,
    canonical_json,
    looks_like_plan_id,
    new_plan_id,
    target_for_people,
)
from pairline.server.store.sqlite import SqliteStore

URL_SCHEMES = ("postgresql://", "postgres://")

__all__ = [
    "ID_BYTES",
    "ID_CHARS",
    "CaptureEntry",
    "PlanStore",
    "SampleEntry",
    "SaveCount",
    "SavedCapture",
    "SavedPlan",
    "SqliteStore",
    "StoreError",
    "canonical_json",
    "check_store_target",
    "is_database_url",
    "looks_like_plan_id",
    "new_plan_id",
    "open_store",
    "target_for_people",
]


def is_database_url(target: str | Path) -> bool:
    return isinstance(target, str) and target.startswith(URL_SCHEMES)


def check_store_target(target: str | Path) -> None:
    """Refuse a target that is neither a file path nor a PostgreSQL URL, naming what is allowed."""
    text = str(target)
    if not text.strip():
        raise StoreError("The database is empty; allowed a SQLite file path or a postgresql:// URL.")
    if "://" in text and not is_database_url(text):
        scheme = text.split("://", 1)[0]
        raise StoreError(
            f"The database is '{scheme}://…'; allowed a SQLite file path or a postgresql:// (or postgres://) URL."
        )


def open_store(target: str | Path, *, clock: Callable[[], float] = time.time) -> PlanStore:
    """The store at `target` (a SQLite file path or a postgresql:// URL), its schema brought up to date.

    `clock` gives the time in seconds since the Unix epoch, for save times and cache expiry.
    """
    check_store_target(target)
    if is_database_url(target):
        from pairline.server.store.postgres import PostgresStore

        return PostgresStore(str(target), clock=clock)
    return SqliteStore(Path(target), clock=clock)
