"""The embedded store: one SQLite file on one host, in write-ahead-log mode so readers never wait for a writer.

Each call opens a short-lived connection, so one store serves every thread of a process; several processes on the
same host may share the file too (SQLite lets one of them write at a time, the others wait up to `timeout_s`).
"""

import sqlite3
import time
from collections.abc import Iterator
from contextlib import closing, contextmanager
from datetime import datetime
from pathlib import Path

from pairline.server.store.migrations import migrations_for
from pairline.server.store.sql import Clock, SqlStore


class SqliteStore(SqlStore):
    migrations = migrations_for("sqlite")

    def __init__(self, db_path: Path, *, clock: Clock = time.time, timeout_s: float = 10.0):
        super().__init__(clock)
        self.db_path = Path(db_path)
        self._timeout_s = timeout_s
        with closing(self._connect()) as db:
            db.execute("PRAGMA journal_mode=WAL")  # kept by the file: later connections read and write in WAL
        self.migrate()

    @property
    def target(self) -> str:
        return str(self.db_path)

    def _connect(self) -> sqlite3.Connection:
        return sqlite3.connect(self.db_path, timeout=self._timeout_s, isolation_level=None)

    @contextmanager
    def _transaction(self, *, write: bool) -> Iterator[sqlite3.Connection]:
        # A writer takes the write lock at BEGIN, so it waits for another writer instead of failing midway.
        with closing(self._connect()) as db:
            db.execute("BEGIN IMMEDIATE" if write else "BEGIN")
            try:
                yield db
            except BaseException:
                db.execute("ROLLBACK")
                raise
            db.execute("COMMIT")

    def _time_param(self, moment: datetime) -> str:
        # Fixed width (microseconds, +00:00) so text order is time order.
        return moment.isoformat(timespec="microseconds")

    def _time_value(self, stored: str) -> datetime:
        return datetime.fromisoformat(stored)

    def close(self) -> None:
        """Nothing to release: connections live for one call."""
