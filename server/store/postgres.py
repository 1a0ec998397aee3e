"""The shared store: one PostgreSQL database that any number of Pairline processes and hosts use at once.

Each process keeps a small pool of connections (psycopg 3 and psycopg_pool). Schema migrations take an advisory
lock, so processes that start together migrate once. Install with the `postgresql` extra: psycopg[binary] and
psycopg-pool.
"""

import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from datetime import datetime
from typing import Any

from pairline.server.store.base import StoreError, target_for_people
from pairline.server.store.migrations import migrations_for
from pairline.server.store.sql import Clock, Rows, SqlStore, Transaction

MIGRATION_LOCK = 0x7061_6972_6C69  # any fixed 64-bit key, the same in every Pairline process


class _Transaction:
    """A psycopg connection inside a transaction, taking the store's `?` placeholders."""

    def __init__(self, connection: Any):
        self._connection = connection

    def execute(self, sql: str, params: Sequence[Any] = ()) -> Rows:
        cursor: Rows = self._connection.execute(sql.replace("?", "%s"), params)
        return cursor


class PostgresStore(SqlStore):
    migrations = migrations_for("postgresql")
    shared = True

    def __init__(
        self, url: str, *, clock: Clock = time.time, max_connections: int = 4, connect_timeout_s: float = 10.0
    ):
        try:
            import psycopg
            from psycopg_pool import ConnectionPool, PoolTimeout
        except ImportError as exc:
            raise StoreError(
                "A postgresql:// database needs psycopg 3 and psycopg-pool: "
                "python3 -m pip install 'pairline[postgresql]'."
            ) from exc
        super().__init__(clock)
        self.url = url
        try:  # one direct connection first, so a wrong URL fails now with the server's own reason
            psycopg.connect(url, connect_timeout=max(1, round(connect_timeout_s))).close()
        except psycopg.Error as exc:
            raise StoreError(f"Cannot use the database at {self.target}: {str(exc).strip()}") from exc
        self._pool = ConnectionPool(
            url, min_size=1, max_size=max_connections, kwargs={"autocommit": True}, open=False, name="pairline"
        )
        try:
            self._pool.open(wait=True, timeout=connect_timeout_s)
            self.migrate()
        except PoolTimeout as exc:
            self._pool.close()
            raise StoreError(f"Cannot open connections to the database at {self.target}: {exc}") from exc
        except BaseException:
            self._pool.close()
            raise

    @property
    def target(self) -> str:
        return target_for_people(self.url)

    @contextmanager
    def _transaction(self, *, write: bool) -> Iterator[_Transaction]:
        with self._pool.connection() as connection, connection.transaction():
            yield _Transaction(connection)

    def _lock_for_migrations(self, tx: Transaction) -> None:
        tx.execute("SELECT pg_advisory_xact_lock(?)", (MIGRATION_LOCK,))

    def _time_param(self, moment: datetime) -> datetime:
        return moment

    def _time_value(self, stored: datetime) -> datetime:
        return stored

    def close(self) -> None:
        self._pool.close()
