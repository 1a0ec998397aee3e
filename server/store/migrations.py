"""Versioned schema changes, applied in order and recorded in `schema_migrations`.

A database remembers the newest version applied; opening a store applies the newer ones in one transaction, under
a lock, so several processes starting together migrate once. Never edit a released migration: add the next one.
Both databases step through the same list; the few words in which their SQL differs are filled in per database.
"""

from dataclasses import dataclass
from typing import Literal

Dialect = Literal["sqlite", "postgresql"]


@dataclass(frozen=True, slots=True)
class Migration:
    version: int
    name: str
    statements: tuple[str, ...]


MIGRATION_TABLE = (
    "CREATE TABLE IF NOT EXISTS schema_migrations ("
    " version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL)"
)

_MIGRATIONS = (
    Migration(
        1,
        "plans and samples",
        (
            "CREATE TABLE {adopt}plans ("
            " id TEXT PRIMARY KEY, plan_json TEXT NOT NULL, title TEXT NOT NULL, parent_id TEXT,"
            " engine_version TEXT NOT NULL, created_at {timestamp} NOT NULL{row_order})",
            "CREATE TABLE {adopt}samples ("
            " slug TEXT PRIMARY KEY, plan_id TEXT NOT NULL REFERENCES plans(id), title TEXT NOT NULL,"
            " position INTEGER NOT NULL)",
        ),
    ),
    Migration(2, "plans by parent", ("CREATE INDEX plans_parent ON plans (parent_id)",)),
    Migration(
        3,
        "client and size of each save",
        (
            "ALTER TABLE plans ADD COLUMN client TEXT",
            "ALTER TABLE plans ADD COLUMN plan_bytes INTEGER NOT NULL DEFAULT 0",
            "UPDATE plans SET plan_bytes = {utf8_bytes_of_plan_json}",
            "CREATE INDEX plans_client_time ON plans (client, created_at)",
        ),
    ),
    Migration(
        4,
        "shared results cache",
        (
            "CREATE TABLE results_cache (key TEXT PRIMARY KEY, value {bytes} NOT NULL, expires_at {float})",
            "CREATE INDEX results_cache_expiry ON results_cache (expires_at)",
        ),
    ),
    Migration(
        5,
        "scope captures of saved plans",
        (
            "CREATE TABLE captures ("
            " id TEXT PRIMARY KEY, plan_id TEXT NOT NULL REFERENCES plans(id), capture_json TEXT NOT NULL,"
            " engine_version TEXT NOT NULL, created_at {timestamp} NOT NULL, client TEXT,"
            " capture_bytes INTEGER NOT NULL{row_order})",
            "CREATE INDEX captures_client_time ON captures (client, created_at)",
        ),
    ),
    Migration(
        6,
        "captures listed by plan with where each was probed",
        (
            # A plan's page lists its captures with where each was probed. The index holds all the list reads,
            # so listing never reads a capture's file (SQLite would walk a large file to reach a column after it).
            "ALTER TABLE captures ADD COLUMN probe_at TEXT",
            "ALTER TABLE captures ADD COLUMN probe_position_m {float}",
            "UPDATE captures SET probe_at = {capture_at}, probe_position_m = {capture_at_position_m}",
            "CREATE INDEX captures_plan_list ON captures (plan_id, created_at, id, probe_at, probe_position_m)",
        ),
    ),
)

_WORDS: dict[Dialect, dict[str, str]] = {
    "sqlite": {
        # Files written before migrations were recorded hold exactly version 1's tables: adopt them.
        "adopt": "IF NOT EXISTS ",
        "timestamp": "TEXT",  # ISO 8601 of fixed width, so text order is time order
        "row_order": "",  # SQLite gives every table a rowid already
        "utf8_bytes_of_plan_json": "length(CAST(plan_json AS BLOB))",
        "bytes": "BLOB",
        "float": "REAL",
        "capture_at": "json_extract(capture_json, '$.at')",
        "capture_at_position_m": "json_extract(capture_json, '$.at_position_m')",
    },
    "postgresql": {
        "adopt": "",
        "timestamp": "TIMESTAMPTZ",
        # Named like SQLite's own, so one ORDER BY created_at, rowid serves both.
        "row_order": ", rowid BIGINT GENERATED ALWAYS AS IDENTITY",
        "utf8_bytes_of_plan_json": "octet_length(plan_json)",
        "bytes": "BYTEA",
        "float": "DOUBLE PRECISION",
        "capture_at": "capture_json::jsonb ->> 'at'",
        "capture_at_position_m": "(capture_json::jsonb ->> 'at_position_m')::double precision",
    },
}


def migrations_for(dialect: Dialect) -> tuple[Migration, ...]:
    """Every migration, its SQL written for `dialect`."""
    words = _WORDS[dialect]
    return tuple(
        Migration(m.version, m.name, tuple(statement.format(**words) for statement in m.statements))
        for m in _MIGRATIONS
    )
