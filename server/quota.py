"""Save quota and rate limit per client address.

`SaveLimiter` is the seam the routes use: `admit(client)` either records one save and returns None, or returns
how many seconds the client must wait. `MemoryLimiter` counts in this process with a sliding window per
address; a limiter that counts saves in the plan store implements the same method.
"""

import math
import threading
import time
from collections import OrderedDict, deque
from collections.abc import Callable
from typing import Protocol

MINUTE_S = 60.0
DAY_S = 86_400.0


class SaveLimiter(Protocol):
    def admit(self, client: str) -> float | None:
        """Record a save by client and return None, or refuse it and return the seconds until one is allowed."""
        ...


class MemoryLimiter:
    """At most per_minute saves in any 60 s and per_day in any 24 h, per client address.

    Each address keeps the times of its saves of the last day (at most per_day of them); the least recently
    active addresses are forgotten beyond max_clients, so memory stays bounded.
    """

    def __init__(
        self,
        per_minute: int,
        per_day: int,
        clock: Callable[[], float] = time.monotonic,
        max_clients: int = 100_000,
    ):
        self.per_minute = per_minute
        self.per_day = per_day
        self.max_clients = max_clients
        self._clock = clock
        self._saves: OrderedDict[str, deque[float]] = OrderedDict()
        self._lock = threading.Lock()

    def admit(self, client: str) -> float | None:
        now = self._clock()
        with self._lock:
            times = self._saves.setdefault(client, deque())
            self._saves.move_to_end(client)
            while times and times[0] <= now - DAY_S:
                times.popleft()
            waits = []
            if len(times) >= self.per_day:
                waits.append(times[-self.per_day] + DAY_S - now)
            if len(times) >= self.per_minute and times[-self.per_minute] > now - MINUTE_S:
                waits.append(times[-self.per_minute] + MINUTE_S - now)
            if waits:
                return max(1.0, math.ceil(max(waits)))
            times.append(now)
            while len(self._saves) > self.max_clients:
                self._saves.popitem(last=False)
            return None
