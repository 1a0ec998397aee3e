"""Versioned schema changes, one list per database, applied in order and recorded in `schema_migrations`.

A database remembers the newest version applied; opening a store applies the newer ones in one transaction, under
a lock, so several processes starting together migrate once. Never edit a released migration: add the next one.
The two lists keep the same version numbers for the same change, so the two databases always have one shape.
"""

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Migration:
    version: int
    name: str
    statements: tuple[str, ...]


MIGRATION_TABLE = (
    "CREATE TABLE IF NOT EXISTS schema_migrations ("
    " version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL)"
)

SQLITE = (
    # IF NOT EXISTS adopts files written before migrations were recorded: they hold exactly these two tables.
    Migration(
        1,
        "plans and samples",
        (
            "CREATE TABLE IF NOT EXISTS plans ("
            " id TEXT PRIMARY KEY, plan_json TEXT NOT NULL, title TEXT NOT NULL, parent_id TEXT,"
            " engine_version TEXT NOT NULL, created_at TEXT NOT NULL)",
            "CREATE TABLE IF NOT EXISTS samples ("
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
            "UPDATE plans SET plan_bytes = length(CAST(plan_json AS BLOB))",
            "CREATE INDEX plans_client_time ON plans (client, created_at)",
        ),
    ),
    Migration(
        4,
        "shared results cache",
        (
            "CREATE TABLE results_cache (key TEXT PRIMARY KEY, value BLOB NOT NULL, expires_at REAL)",
            "CREATE INDEX results_cache_expiry ON results_cache (expires_at)",
        ),
    ),
)

POSTGRESQL = (
    # `rowid` orders plans saved within the same microsecond; SQLite gives every table a column of that name.
    Migration(
        1,
        "plans and samples",
        (
            "CREATE TABLE plans ("
            " id TEXT PRIMARY KEY, plan_json TEXT NOT NULL, title TEXT NOT NULL, parent_id TEXT,"
            " engine_version TEXT NOT NULL, created_at TIMESTAMPTZ NOT NULL,"
            " rowid BIGINT GENERATED ALWAYS AS IDENTITY)",
            "CREATE TABLE samples ("
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
            "UPDATE plans SET plan_bytes = octet_length(plan_json)",
            "CREATE INDEX plans_client_time ON plans (client, created_at)",
        ),
    ),
    Migration(
        4,
        "shared results cache",
        (
            "CREATE TABLE results_cache (key TEXT PRIMARY KEY, value BYTEA NOT NULL, expires_at DOUBLE PRECISION)",
            "CREATE INDEX results_cache_expiry ON results_cache (expires_at)",
        ),
    ),
)
