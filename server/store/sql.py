"""The store's queries, written once for both databases. Subclasses bring connections, timestamps and schema.

Queries use `?` placeholders; the PostgreSQL store turns them into its own. Both databases understand the rest
as written (`ON CONFLICT ... DO NOTHING / DO UPDATE`, `excluded.`, `COALESCE`).
"""

import json
import time
from abc import abstractmethod
from collections.abc import Callable, Sequence
from contextlib import AbstractContextManager
from datetime import UTC, datetime
from typing import Any, Protocol

from pairline.server.store.base import (
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
)
from pairline.server.store.migrations import MIGRATION_TABLE, Migration

Clock = Callable[[], float]  # seconds since the Unix epoch


class Rows(Protocol):
    @property
    def rowcount(self) -> int: ...

    def fetchone(self) -> Any: ...

    def fetchall(self) -> list[Any]: ...


class Transaction(Protocol):
    def execute(self, sql: str, params: Sequence[Any] = ..., /) -> Rows: ...


class SqlStore(PlanStore):
    """The queries over an abstract transaction; see SqliteStore and PostgresStore."""

    migrations: tuple[Migration, ...]

    def __init__(self, clock: Clock = time.time):
        self._clock = clock

    @abstractmethod
    def _transaction(self, *, write: bool) -> AbstractContextManager[Transaction]:
        """One transaction, committed when the block ends normally and rolled back otherwise."""

    @abstractmethod
    def _time_param(self, moment: datetime) -> Any:
        """A timestamp as the database stores it (ordered like the moments themselves)."""

    @abstractmethod
    def _time_value(self, stored: Any) -> datetime:
        """A stored timestamp back as an aware datetime."""

    def _lock_for_migrations(self, tx: Transaction) -> None:  # noqa: B027 - SQLite's write transaction is the lock
        """Hold other processes off the schema until this transaction ends."""

    def _now(self) -> datetime:
        return datetime.fromtimestamp(self._clock(), UTC)

    # --- schema -------------------------------------------------------------------------------------------

    def migrate(self) -> int:
        """Apply every migration newer than the database's; return the version it is at afterwards."""
        newest = self.migrations[-1].version
        with self._transaction(write=True) as tx:
            self._lock_for_migrations(tx)
            tx.execute(MIGRATION_TABLE)
            current = int(tx.execute("SELECT COALESCE(MAX(version), 0) FROM schema_migrations").fetchone()[0])
            if current > newest:
                raise StoreError(
                    f"The database at {self.target} has schema version {current}; this Pairline knows versions "
                    f"up to {newest}. Upgrade Pairline, or point it at another database."
                )
            applied_at = self._now().isoformat(timespec="seconds")
            for migration in self.migrations:
                if migration.version <= current:
                    continue
                for statement in migration.statements:
                    tx.execute(statement)
                tx.execute(
                    "INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, ?, ?)",
                    (migration.version, migration.name, applied_at),
                )
        return newest

    def schema_version(self) -> int:
        with self._transaction(write=False) as tx:
            return int(tx.execute("SELECT COALESCE(MAX(version), 0) FROM schema_migrations").fetchone()[0])

    # --- plans --------------------------------------------------------------------------------------------

    def save_plan(
        self, plan: dict[str, Any], *, engine_version: str, parent_id: str | None = None, client: str | None = None
    ) -> str:
        with self._transaction(write=True) as tx:
            return self._insert_plan(tx, plan, engine_version, parent_id, client)

    def _insert_plan(
        self, tx: Transaction, plan: dict[str, Any], engine_version: str, parent_id: str | None, client: str | None
    ) -> str:
        text = canonical_json(plan)
        row = {"plan_json": text, "title": str(plan.get("title") or ""), "parent_id": parent_id}
        return self._insert_new(tx, "plans", row | self._saved_by(engine_version, client, text, "plan_bytes"))

    def _saved_by(self, engine_version: str, client: str | None, text: str, size_column: str) -> dict[str, Any]:
        """The columns every saved row has: engine version, time, client address and stored size."""
        moment = self._time_param(self._now())
        return {
            "engine_version": engine_version,
            "created_at": moment,
            "client": client,
            size_column: len(text.encode()),
        }

    def _insert_new(self, tx: Transaction, table: str, row: dict[str, Any]) -> str:
        """Insert one immutable row of `table` (its columns named by code, never by input) under a fresh random id."""
        columns = ", ".join(["id", *row])
        placeholders = ", ".join("?" * (len(row) + 1))
        while True:
            new_id = new_plan_id()
            inserted = tx.execute(
                f"INSERT INTO {table} ({columns}) VALUES ({placeholders}) ON CONFLICT (id) DO NOTHING",
                (new_id, *row.values()),
            )
            if inserted.rowcount == 1:  # 0 on an id collision: astronomically rare, draw again
                return new_id

    def get_plan(self, plan_id: str) -> SavedPlan | None:
        if not looks_like_plan_id(plan_id):
            return None
        with self._transaction(write=False) as tx:
            row = tx.execute(
                "SELECT id, plan_json, title, parent_id, engine_version, created_at FROM plans WHERE id = ?",
                (plan_id,),
            ).fetchone()
        if row is None:
            return None
        return SavedPlan(row[0], json.loads(row[1]), row[2], row[3], row[4], self._created_text(row[5]))

    def children_of(self, plan_id: str) -> list[str]:
        with self._transaction(write=False) as tx:
            rows = tx.execute(
                "SELECT id FROM plans WHERE parent_id = ? ORDER BY created_at, rowid", (plan_id,)
            ).fetchall()
        return [r[0] for r in rows]

    def saves_since(self, client: str, since: datetime) -> SaveCount:
        moment = self._time_param(since)
        with self._transaction(write=False) as tx:
            saves, size, first = tx.execute(
                "SELECT COUNT(*), COALESCE(SUM(size), 0), MIN(created_at) FROM ("
                " SELECT plan_bytes AS size, created_at FROM plans WHERE client = ? AND created_at >= ?"
                " UNION ALL"
                " SELECT capture_bytes, created_at FROM captures WHERE client = ? AND created_at >= ?) saved",
                (client, moment, client, moment),
            ).fetchone()
        return SaveCount(int(saves), int(size), None if first is None else self._time_value(first))

    # --- captures -----------------------------------------------------------------------------------------

    def save_capture(
        self, plan_id: str, capture: dict[str, Any], *, engine_version: str, client: str | None = None
    ) -> str:
        text = canonical_json(capture)
        at, position_m = capture.get("at"), capture.get("at_position_m")
        row = {"plan_id": plan_id, "capture_json": text, "probe_at": at, "probe_position_m": position_m}
        row |= self._saved_by(engine_version, client, text, "capture_bytes")
        with self._transaction(write=True) as tx:
            return self._insert_new(tx, "captures", row)

    def get_capture(self, plan_id: str, capture_id: str) -> SavedCapture | None:
        if not (looks_like_plan_id(plan_id) and looks_like_plan_id(capture_id)):
            return None
        with self._transaction(write=False) as tx:
            row = tx.execute(
                "SELECT id, plan_id, capture_json, engine_version, created_at FROM captures"
                " WHERE id = ? AND plan_id = ?",
                (capture_id, plan_id),
            ).fetchone()
        if row is None:
            return None
        return SavedCapture(row[0], row[1], json.loads(row[2]), row[3], self._created_text(row[4]))

    def captures_of(self, plan_id: str, limit: int) -> tuple[list[CaptureEntry], int]:
        with self._transaction(write=False) as tx:
            total = int(tx.execute("SELECT COUNT(*) FROM captures WHERE plan_id = ?", (plan_id,)).fetchone()[0])
            rows = tx.execute(
                "SELECT id, probe_at, probe_position_m, created_at FROM captures WHERE plan_id = ?"
                " ORDER BY created_at DESC, rowid DESC LIMIT ?",
                (plan_id, limit),
            ).fetchall()
        return [CaptureEntry(r[0], plan_id, r[1], r[2], self._created_text(r[3])) for r in rows], total

    def _created_text(self, stored: Any) -> str:
        """A stored save time as ISO 8601 text, in UTC, to the second."""
        return self._time_value(stored).astimezone(UTC).isoformat(timespec="seconds")

    # --- samples ------------------------------------------------------------------------------------------

    def put_sample(self, slug: str, plan: dict[str, Any], *, engine_version: str, position: int) -> str:
        with self._transaction(write=True) as tx:
            row = tx.execute(
                "SELECT s.plan_id, p.plan_json FROM samples s JOIN plans p ON p.id = s.plan_id WHERE s.slug = ?",
                (slug,),
            ).fetchone()
            if row is not None and row[1] == canonical_json(plan):
                plan_id = str(row[0])
            else:
                plan_id = self._insert_plan(tx, plan, engine_version, None, None)
            tx.execute(
                "INSERT INTO samples (slug, plan_id, title, position) VALUES (?, ?, ?, ?)"
                " ON CONFLICT (slug) DO UPDATE SET plan_id = excluded.plan_id, title = excluded.title,"
                " position = excluded.position",
                (slug, plan_id, str(plan.get("title") or slug), position),
            )
        return plan_id

    def retain_samples(self, slugs: list[str]) -> None:
        with self._transaction(write=True) as tx:
            if not slugs:
                tx.execute("DELETE FROM samples")
                return
            placeholders = ",".join("?" * len(slugs))
            tx.execute(f"DELETE FROM samples WHERE slug NOT IN ({placeholders})", slugs)

    def samples(self) -> list[SampleEntry]:
        with self._transaction(write=False) as tx:
            rows = tx.execute("SELECT slug, plan_id, title FROM samples ORDER BY position, slug").fetchall()
        return [SampleEntry(*r) for r in rows]

    # --- results cache ------------------------------------------------------------------------------------

    def cache_get(self, key: str) -> bytes | None:
        with self._transaction(write=False) as tx:
            row = tx.execute(
                "SELECT value FROM results_cache WHERE key = ? AND (expires_at IS NULL OR expires_at > ?)",
                (key, self._clock()),
            ).fetchone()
        return None if row is None else bytes(row[0])

    def cache_put(self, key: str, value: bytes, *, ttl_s: float | None = None) -> None:
        now = self._clock()
        with self._transaction(write=True) as tx:
            tx.execute("DELETE FROM results_cache WHERE expires_at <= ?", (now,))
            tx.execute(
                "INSERT INTO results_cache (key, value, expires_at) VALUES (?, ?, ?)"
                " ON CONFLICT (key) DO UPDATE SET value = excluded.value, expires_at = excluded.expires_at",
                (key, value, None if ttl_s is None else now + ttl_s),
            )
