"""The server's results cache and save limiter kept in the store, so every process on one database shares them.

Each implements the same methods as its in-process counterpart: `get` / `put` of bytes by key, and `admit`,
which answers None for a save that may go ahead or the seconds to wait. The limiter counts the saves the store
recorded with their client address; the save that follows an admission is what counts it, so processes racing
at a client's limit may let one extra save through.
"""

import math
import time
from datetime import UTC, datetime, timedelta

from pairline.server.quota import DAY_S, MINUTE_S
from pairline.server.store.base import PlanStore
from pairline.server.store.sql import Clock


class StoreCache:
    """Results kept in the store's cache table. Entries saved without a time to live expire after `max_age_s`,
    so the shared table stays bounded by time rather than by a byte budget."""

    def __init__(self, store: PlanStore, max_age_s: float = DAY_S):
        self.store = store
        self.max_age_s = max_age_s

    def get(self, key: str) -> bytes | None:
        return self.store.cache_get(key)

    def put(self, key: str, value: bytes, ttl_s: float | None = None) -> None:
        self.store.cache_put(key, value, ttl_s=self.max_age_s if ttl_s is None else min(ttl_s, self.max_age_s))


class StoreLimiter:
    """At most `per_minute` saves in any 60 s and `per_day` in any 24 h per client address, counted in the store."""

    def __init__(self, store: PlanStore, per_minute: int, per_day: int, clock: Clock = time.time):
        self.store = store
        self.per_minute = per_minute
        self.per_day = per_day
        self._clock = clock

    def admit(self, client: str) -> float | None:
        now = datetime.fromtimestamp(self._clock(), UTC)
        waits = []
        for limit, window_s in ((self.per_day, DAY_S), (self.per_minute, MINUTE_S)):
            # A save leaves the window exactly `window_s` after it was made; stored times resolve 1 µs.
            since = now - timedelta(seconds=window_s) + timedelta(microseconds=1)
            count = self.store.saves_since(client, since)
            if count.saves >= limit and count.first_at is not None:
                waits.append((count.first_at - now).total_seconds() + window_s)
        return max(1.0, math.ceil(max(waits))) if waits else None
