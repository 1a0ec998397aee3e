"""A throwaway PostgreSQL server for tests: a fresh cluster in a temporary folder, reached by its Unix socket.

Made with the server programs of Debian's postgresql package (initdb, pg_ctl). PostgreSQL refuses to run as root,
so under root (as in CI) the server runs as the unprivileged `postgres` user that the package creates. It listens on
no TCP port, so clusters of parallel test runs never collide. For tests fsync is off, as nothing there must
survive a crash.
"""

import os
import shutil
import subprocess
import tempfile
import uuid
from pathlib import Path

import pytest

PG_BIN_DIRS = sorted(Path("/usr/lib/postgresql").glob("*/bin"), key=lambda p: int(p.parent.name), reverse=True)
SERVER_USER = "postgres"


def in_ci() -> bool:
    return os.environ.get("CI", "").lower() == "true"


def pg_bin() -> Path | None:
    """The folder holding initdb and pg_ctl: PAIRLINE_PG_BIN, else the newest Debian postgresql, else PATH."""
    if os.environ.get("PAIRLINE_PG_BIN"):
        return Path(os.environ["PAIRLINE_PG_BIN"])
    for folder in PG_BIN_DIRS:
        if (folder / "initdb").exists():
            return folder
    found = shutil.which("initdb")
    return Path(found).parent if found else None


def missing_reason() -> str | None:
    folder = pg_bin()
    if folder is None or not (folder / "pg_ctl").exists():
        return "PostgreSQL server programs not found (Debian package 'postgresql'; .ci/setup installs it)"
    if os.geteuid() == 0 and shutil.which("runuser") is None:
        return "running as root without runuser, so the PostgreSQL server cannot drop to an unprivileged user"
    try:
        import psycopg  # noqa: F401
        import psycopg_pool  # noqa: F401
    except ImportError:
        return "psycopg and psycopg-pool are not installed (pip install -e '.[test]')"
    return None


def skip_or_fail_without_postgres() -> None:
    """Skip with the reason outside CI when PostgreSQL cannot run here; under CI=true, fail instead."""
    reason = missing_reason()
    if reason is None:
        return
    if in_ci():
        pytest.fail(f"PostgreSQL is required under CI=true: {reason}", pytrace=False)
    pytest.skip(reason)


class Cluster:
    """`durable=False` (for tests) turns fsync off; benchmarks keep PostgreSQL's durable defaults."""

    def __init__(self, durable: bool = False) -> None:
        self.durable = durable
        folder = pg_bin()
        assert folder is not None
        self.bin = folder
        self.root = Path(tempfile.mkdtemp(prefix="pairline-pg-"))
        self.data = self.root / "data"
        self.as_root = os.geteuid() == 0
        if self.as_root:
            shutil.chown(self.root, user=SERVER_USER)

    def _run(self, program: str, *args: str) -> None:
        command = [str(self.bin / program), *args]
        if self.as_root:
            command = ["runuser", "-u", SERVER_USER, "--", *command]
        done = subprocess.run(command, capture_output=True, text=True, timeout=120, cwd=self.root)
        if done.returncode != 0:
            log = self.root / "server.log"
            tail = log.read_text(errors="replace")[-2000:] if log.exists() else ""
            raise RuntimeError(f"{program} failed ({done.returncode}): {done.stderr.strip()}\n{tail}")

    def start(self) -> None:
        self._run(
            "initdb", "-D", str(self.data), "-U", SERVER_USER, "-A", "trust", "-E", "UTF8", "--locale=C", "--no-sync"
        )
        options = f"-k {self.root} -c listen_addresses= -c max_connections=200"
        if not self.durable:
            options += " -c fsync=off"
        self._run("pg_ctl", "-D", str(self.data), "-l", str(self.root / "server.log"), "-o", options, "-w", "start")

    def stop(self) -> None:
        try:
            self._run("pg_ctl", "-D", str(self.data), "-m", "immediate", "-w", "stop")
        finally:
            shutil.rmtree(self.root, ignore_errors=True)

    def url(self, database: str = "postgres") -> str:
        return f"postgresql:///{database}?host={self.root}&user={SERVER_USER}"

    def create_database(self) -> str:
        """A new empty database; returns its URL."""
        import psycopg

        name = f"t_{uuid.uuid4().hex[:12]}"
        with psycopg.connect(self.url(), autocommit=True) as admin:
            admin.execute(f"CREATE DATABASE {name}")
        return self.url(name)
