"""The results cache: checked plans by key, as bytes, each with an optional time to live.

`ResultCache` is the seam: the server reads and writes through it only. `MemoryCache` keeps entries in this
process, least recently used first out once a byte budget is spent; a cache shared between server processes
(in the plan store) implements the same two methods.
"""

import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from typing import Protocol


class ResultCache(Protocol):
    def get(self, key: str) -> bytes | None:
        """The value stored under key, or None when absent or expired."""
        ...

    def put(self, key: str, value: bytes, ttl_s: float | None = None) -> None:
        """Store value under key; it expires after ttl_s seconds (None: kept until evicted)."""
        ...


class MemoryCache:
    """In-process LRU cache with a byte budget and per-entry expiry. Safe to share between threads."""

    def __init__(self, max_bytes: int, clock: Callable[[], float] = time.monotonic):
        self.max_bytes = max_bytes
        self._clock = clock
        self._entries: OrderedDict[str, tuple[bytes, float | None]] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()

    def get(self, key: str) -> bytes | None:
        with self._lock:
            entry = self._entries.get(key)
            if entry is None:
                return None
            value, expires = entry
            if expires is not None and self._clock() >= expires:
                self._drop(key)
                return None
            self._entries.move_to_end(key)
            return value

    def put(self, key: str, value: bytes, ttl_s: float | None = None) -> None:
        size = len(value) + len(key)
        with self._lock:
            if key in self._entries:
                self._drop(key)
            if size > self.max_bytes:
                return
            expires = None if ttl_s is None else self._clock() + ttl_s
            self._entries[key] = (value, expires)
            self._bytes += size
            while self._bytes > self.max_bytes:
                self._drop(next(iter(self._entries)))

    def _drop(self, key: str) -> None:
        value, _ = self._entries.pop(key)
        self._bytes -= len(value) + len(key)
