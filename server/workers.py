"""Checks run in a bounded pool of worker processes, each check under a time and a memory limit.

The server never simulates on its event loop or in its own threads: a route hands a job to `CheckPool.run`,
which blocks the calling thread (never the loop) until a worker answers. At most `workers` jobs run at once
and at most `queue_limit` wait for a worker; more are refused with `PoolBusy`, and so is a job that waited a
whole time limit without getting a worker.

A worker enforces the limits itself: RLIMIT_AS caps its address space at what it held when it started plus
the memory limit (numpy then raises MemoryError), and an interval timer interrupts the job at the time limit.
A worker that does not answer within the limit plus a grace period (stuck inside one long numpy call) is
killed and replaced; so is one that ran out of memory. Workers fork from a server process that has already
imported the engine, so a replacement starts in milliseconds.
"""

import logging
import multiprocessing
import os
import resource
import signal
import threading
import traceback
from collections.abc import Callable
from multiprocessing.connection import Connection
from multiprocessing.context import ForkServerContext
from multiprocessing.process import BaseProcess
from typing import Any, Literal, TypeVar

from pairline.engine.plan import BusInputError, Problem
from pairline.server.allocator import keep_freed_memory

T = TypeVar("T")
GRACE_S = 2.0  # beyond the time limit before a worker that does not answer is killed
JOB_MODULES = [
    "pairline.server.jobs",
    "pairline.server.fieldjobs",
]  # imported once in the fork server: workers start warm
# one BLAS thread per worker: the pool, not numpy, decides how many cores checks use
SINGLE_THREAD_ENV = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}

log = logging.getLogger("pairline.server.workers")
Limit = Literal["time", "memory"]


class CheckOverLimit(Exception):
    """A job ran past its time limit or out of its memory limit."""

    def __init__(self, limit: Limit, time_limit_s: float, memory_limit_mb: int):
        self.limit = limit
        self.time_limit_s = time_limit_s
        self.memory_limit_mb = memory_limit_mb
        super().__init__(f"over the {limit} limit")


class CheckCrashed(Exception):
    """A job failed inside its worker for a reason other than its input; carries the worker's traceback."""


class PoolBusy(Exception):
    """Every worker is busy and the queue is full (or the wait ran out)."""

    def __init__(self, retry_after_s: float):
        self.retry_after_s = retry_after_s
        super().__init__(f"all check workers are busy; retry in {retry_after_s:.0f} s")


class _TimeUp(BaseException):
    """Raised inside a worker by its interval timer (a BaseException, so no job's `except Exception` eats it)."""


def _time_up(signum: int, frame: Any) -> None:
    raise _TimeUp


def _address_space_bytes() -> int:
    with open("/proc/self/status", encoding="ascii") as status:
        for line in status:
            if line.startswith("VmSize:"):
                return int(line.split()[1]) * 1024
    return 0


def _worker_main(conn: Connection, time_limit_s: float, memory_limit_bytes: int) -> None:
    """Run jobs from conn until it closes. Answers ("ok", value), ("time",), ("memory",), ("input", problems)
    or ("error", traceback text)."""
    keep_freed_memory()
    limit = _address_space_bytes() + memory_limit_bytes
    resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    signal.signal(signal.SIGALRM, _time_up)
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C stops the server, which then closes the pool
    while True:
        try:
            fn, args = conn.recv()
        except (EOFError, OSError):
            return
        answer: tuple[Any, ...]
        try:
            signal.setitimer(signal.ITIMER_REAL, time_limit_s)
            try:
                answer = ("ok", fn(*args))
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0.0)
        except _TimeUp:
            answer = ("time",)
        except MemoryError:
            answer = ("memory",)
        except BusInputError as exc:
            answer = ("input", exc.problems)
        except Exception:
            answer = ("error", traceback.format_exc())
        try:
            conn.send(answer)
        except MemoryError:
            conn.send(("memory",))
        if answer[0] in ("memory", "time", "error"):
            return  # the pool starts a fresh worker rather than reuse one whose state may be damaged


class _Worker:
    def __init__(self, ctx: ForkServerContext, time_limit_s: float, memory_limit_bytes: int):
        self.conn, child = ctx.Pipe()
        self.process: BaseProcess = ctx.Process(
            target=_worker_main, args=(child, time_limit_s, memory_limit_bytes), daemon=True, name="pairline-check"
        )
        self.process.start()
        child.close()

    def stop(self) -> None:
        self.conn.close()
        if self.process.is_alive():
            self.process.kill()
        self.process.join(timeout=5.0)


class CheckPool:
    """A bounded pool of check workers; see the module docstring."""

    def __init__(self, workers: int, time_limit_s: float, memory_limit_mb: int, queue_limit: int):
        self.workers = workers
        self.time_limit_s = time_limit_s
        self.memory_limit_mb = memory_limit_mb
        self.queue_limit = queue_limit
        self._ctx = _fork_server()
        self._idle: list[_Worker] = []
        self._all: set[_Worker] = set()
        self._slots = threading.BoundedSemaphore(workers)
        self._lock = threading.Lock()
        self._admitted = 0  # running plus waiting
        self._closed = False

    def run(self, fn: Callable[..., T], *args: Any) -> T:
        """fn(*args) in a worker; blocks the calling thread. Raises BusInputError from the job, CheckOverLimit,
        CheckCrashed or PoolBusy. fn and args must pickle (a module-level function and plain data)."""
        with self._lock:
            if self._closed:
                raise PoolBusy(self.time_limit_s)
            if self._admitted >= self.workers + self.queue_limit:
                raise PoolBusy(self.time_limit_s)
            self._admitted += 1
        try:
            if not self._slots.acquire(timeout=self.time_limit_s):
                raise PoolBusy(self.time_limit_s)
            try:
                return self._call(fn, args)
            finally:
                self._slots.release()
        finally:
            with self._lock:
                self._admitted -= 1

    def _call(self, fn: Callable[..., T], args: tuple[Any, ...]) -> T:
        worker = self._take()
        keep = False
        try:
            worker.conn.send((fn, args))
            if not worker.conn.poll(self.time_limit_s + GRACE_S):
                log.warning("check worker %s passed its time limit without answering; killed", worker.process.pid)
                raise CheckOverLimit("time", self.time_limit_s, self.memory_limit_mb)
            try:
                answer = worker.conn.recv()
            except (EOFError, OSError):
                worker.process.join(timeout=5.0)
                code = worker.process.exitcode
                if code == -signal.SIGKILL:  # the kernel's out-of-memory killer
                    raise CheckOverLimit("memory", self.time_limit_s, self.memory_limit_mb) from None
                raise CheckCrashed(f"check worker exited with code {code}") from None
            # A job cut off by its timer may leave module state (caches, half-built tables) part-written, and one
            # that ran out of memory has a grown heap: only a worker whose job ended on its own is used again.
            keep = answer[0] in ("ok", "input")
        finally:
            self._give_back(worker, keep)
        kind = answer[0]
        if kind == "ok":
            result: T = answer[1]
            return result
        if kind in ("time", "memory"):
            raise CheckOverLimit(kind, self.time_limit_s, self.memory_limit_mb)
        if kind == "input":
            problems: list[Problem] = answer[1]
            raise BusInputError(problems)
        raise CheckCrashed(answer[1])

    def _take(self) -> _Worker:
        with self._lock:
            if self._idle:
                return self._idle.pop()
        worker = _Worker(self._ctx, self.time_limit_s, self.memory_limit_mb * 1024 * 1024)
        with self._lock:
            self._all.add(worker)
        return worker

    def _give_back(self, worker: _Worker, keep: bool) -> None:
        with self._lock:
            if keep and not self._closed and worker.process.is_alive() and len(self._idle) < self.workers:
                self._idle.append(worker)
                return
            self._all.discard(worker)
        worker.stop()

    def warm(self) -> None:
        """Start the fork server and every worker ahead of the first check (a server calls this at startup)."""
        with self._lock:
            missing = self.workers - len(self._all)
        for _ in range(max(0, missing)):
            worker = _Worker(self._ctx, self.time_limit_s, self.memory_limit_mb * 1024 * 1024)
            with self._lock:
                if self._closed or len(self._all) >= self.workers:
                    extra = True
                else:
                    extra = False
                    self._all.add(worker)
                    self._idle.append(worker)
            if extra:
                worker.stop()

    def close(self) -> None:
        """Stop every worker; later jobs are refused."""
        with self._lock:
            self._closed = True
            workers = list(self._all)
            self._all.clear()
            self._idle.clear()
        for worker in workers:
            worker.stop()


def _fork_server() -> ForkServerContext:
    """The fork server context, its server started with the job modules imported and one BLAS thread."""
    ctx = multiprocessing.get_context("forkserver")
    assert isinstance(ctx, ForkServerContext)
    ctx.set_forkserver_preload(JOB_MODULES)
    for name, value in SINGLE_THREAD_ENV.items():
        os.environ.setdefault(name, value)
    return ctx
