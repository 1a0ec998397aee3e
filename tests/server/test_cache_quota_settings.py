"""The in-process results cache and save limiter (with a fake clock), and settings read from the environment."""

import pytest
from pairline.server.cache import MemoryCache
from pairline.server.quota import DAY_S, MemoryLimiter
from pairline.server.settings import Settings, settings_from_env


class Clock:
    def __init__(self) -> None:
        self.now_s = 1000.0

    def __call__(self) -> float:
        return self.now_s


def test_cache_entries_expire_after_their_time_to_live():
    clock = Clock()
    cache = MemoryCache(max_bytes=10_000, clock=clock)
    cache.put("draft", b"data", ttl_s=600.0)
    cache.put("saved", b"kept")
    clock.now_s += 599.0
    assert cache.get("draft") == b"data"
    clock.now_s += 1.0
    assert cache.get("draft") is None
    clock.now_s += 1e6
    assert cache.get("saved") == b"kept"


def test_cache_drops_the_least_recently_used_entry_once_the_byte_budget_is_spent():
    cache = MemoryCache(max_bytes=3 * (100 + 1))
    for key in "abc":
        cache.put(key, bytes(100))
    assert cache.get("a") is not None  # a is now the most recently used
    cache.put("d", bytes(100))
    assert cache.get("b") is None and all(cache.get(k) is not None for k in "acd")
    cache.put("huge", bytes(10_000))  # larger than the whole budget: not kept, nothing evicted for it
    assert cache.get("huge") is None and cache.get("a") is not None


def test_saves_are_limited_per_minute_and_per_day_for_each_address():
    clock = Clock()
    limiter = MemoryLimiter(per_minute=2, per_day=3, clock=clock)
    assert limiter.admit("10.0.0.1") is None and limiter.admit("10.0.0.1") is None
    clock.now_s += 20.0
    assert limiter.admit("10.0.0.1") == 40.0  # the first save leaves the minute window 60 s after it
    assert limiter.admit("10.0.0.2") is None  # another address has its own allowance
    clock.now_s += 41.0
    assert limiter.admit("10.0.0.1") is None  # third save of the day
    clock.now_s += 120.0
    wait = limiter.admit("10.0.0.1")
    assert wait == pytest.approx(DAY_S - 181.0)  # the day's first save must age out
    clock.now_s += wait
    assert limiter.admit("10.0.0.1") is None


def test_settings_come_from_the_environment_and_bad_values_name_the_variable_and_range():
    assert settings_from_env({}) == Settings()
    read = settings_from_env(
        {
            "PAIRLINE_CHECK_TIME_LIMIT_S": "12.5",
            "PAIRLINE_SAVES_PER_MINUTE": "5",
            "PAIRLINE_PUBLIC_URL": "https://x.org/",
        }
    )
    assert (read.check_time_limit_s, read.saves_per_minute, read.public_base_url) == (12.5, 5, "https://x.org")
    for name, text, needle in (
        ("PAIRLINE_CHECK_WORKERS", "many", "whole number from 1 to 64"),
        ("PAIRLINE_CHECK_TIME_LIMIT_S", "nan", "from 0.1 to 3600"),
        ("PAIRLINE_CHECK_MEMORY_MB", "12", "from 64 to 65536"),
        ("PAIRLINE_PUBLIC_URL", "plans.example.org", "absolute http or https URL"),
    ):
        with pytest.raises(ValueError, match=needle) as refused:
            settings_from_env({name: text})
        assert name in str(refused.value) and text in str(refused.value)
