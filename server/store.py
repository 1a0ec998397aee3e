"""Saved plans in SQLite: immutable rows keyed by a random id, each with its parent and engine version.

A saved plan never changes; editing saves a new row whose `parent_id` names the plan it came from, so a shared
URL always shows exactly what was shared. Results are not stored: they are recomputed on every view.
"""

import json
import secrets
import sqlite3
from collections.abc import Iterator
from contextlib import closing, contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

# 12 random bytes = 96 bits, written as 16 URL-safe characters; at least 64 bits keeps a link unguessable.
ID_BYTES = 12
ID_CHARS = 16

_SCHEMA = """
CREATE TABLE IF NOT EXISTS plans (
    id TEXT PRIMARY KEY,
    plan_json TEXT NOT NULL,
    title TEXT NOT NULL,
    parent_id TEXT,
    engine_version TEXT NOT NULL,
    created_at TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS samples (
    slug TEXT PRIMARY KEY,
    plan_id TEXT NOT NULL REFERENCES plans(id),
    title TEXT NOT NULL,
    position INTEGER NOT NULL
);
"""


@dataclass(frozen=True, slots=True)
class SavedPlan:
    id: str
    plan: dict[str, Any]
    title: str
    parent_id: str | None
    engine_version: str  # the engine version current when the plan was saved
    created_at: str  # ISO 8601, UTC


@dataclass(frozen=True, slots=True)
class SampleEntry:
    slug: str
    plan_id: str
    title: str


def new_plan_id() -> str:
    """A random share id: 96 bits from the OS's secure generator, not derived from any other id."""
    return secrets.token_urlsafe(ID_BYTES)


def looks_like_plan_id(text: str) -> bool:
    return len(text) == ID_CHARS and all(c.isalnum() or c in "-_" for c in text)


def canonical_json(plan: dict[str, Any]) -> str:
    return json.dumps(plan, sort_keys=True, ensure_ascii=False, separators=(",", ":"))


class PlanStore:
    """SQLite-backed store. One short-lived connection per call, so it is safe across server threads."""

    def __init__(self, db_path: Path):
        self.db_path = Path(db_path)
        with self._connect() as db:
            db.executescript(_SCHEMA)

    @contextmanager
    def _connect(self) -> Iterator[sqlite3.Connection]:
        with closing(sqlite3.connect(self.db_path, timeout=10.0)) as db, db:
            yield db

    def save_plan(self, plan: dict[str, Any], *, engine_version: str, parent_id: str | None = None) -> str:
        """Store a validated plan document and return its new id."""
        text = canonical_json(plan)
        title = str(plan.get("title") or "")
        created = datetime.now(UTC).isoformat(timespec="seconds")
        with self._connect() as db:
            while True:
                plan_id = new_plan_id()
                try:
                    db.execute(
                        "INSERT INTO plans (id, plan_json, title, parent_id, engine_version, created_at)"
                        " VALUES (?, ?, ?, ?, ?, ?)",
                        (plan_id, text, title, parent_id, engine_version, created),
                    )
                except sqlite3.IntegrityError:  # an id collision: astronomically rare, draw again
                    continue
                return plan_id

    def get_plan(self, plan_id: str) -> SavedPlan | None:
        if not looks_like_plan_id(plan_id):
            return None
        with self._connect() as db:
            row = db.execute(
                "SELECT id, plan_json, title, parent_id, engine_version, created_at FROM plans WHERE id = ?",
                (plan_id,),
            ).fetchone()
        if row is None:
            return None
        return SavedPlan(row[0], json.loads(row[1]), row[2], row[3], row[4], row[5])

    def children_of(self, plan_id: str) -> list[str]:
        with self._connect() as db:
            rows = db.execute("SELECT id FROM plans WHERE parent_id = ? ORDER BY created_at", (plan_id,)).fetchall()
        return [r[0] for r in rows]

    def put_sample(self, slug: str, plan: dict[str, Any], *, engine_version: str, position: int) -> str:
        """Make the sample `slug` point at a saved copy of `plan`. An unchanged sample keeps its id, so links
        to it survive restarts; a changed sample file gets a new id (the old one still opens)."""
        with self._connect() as db:
            row = db.execute(
                "SELECT s.plan_id, p.plan_json FROM samples s JOIN plans p ON p.id = s.plan_id WHERE s.slug = ?",
                (slug,),
            ).fetchone()
        if row is not None and row[1] == canonical_json(plan):
            plan_id = str(row[0])
        else:
            plan_id = self.save_plan(plan, engine_version=engine_version)
        title = str(plan.get("title") or slug)
        with self._connect() as db:
            db.execute(
                "INSERT INTO samples (slug, plan_id, title, position) VALUES (?, ?, ?, ?)"
                " ON CONFLICT(slug) DO UPDATE SET plan_id = excluded.plan_id, title = excluded.title,"
                " position = excluded.position",
                (slug, plan_id, title, position),
            )
        return plan_id

    def retain_samples(self, slugs: list[str]) -> None:
        """Forget samples whose file is gone (their saved plans stay reachable by id)."""
        with self._connect() as db:
            placeholders = ",".join("?" * len(slugs))
            db.execute(f"DELETE FROM samples WHERE slug NOT IN ({placeholders})", slugs)

    def samples(self) -> list[SampleEntry]:
        with self._connect() as db:
            rows = db.execute("SELECT slug, plan_id, title FROM samples ORDER BY position, slug").fetchall()
        return [SampleEntry(*r) for r in rows]
