"""The results cache and the save limiter kept in the store: what every server process on one database shares."""

from pairline.server.store.shared import StoreCache, StoreLimiter

from tests.conftest import FakeClock

PLAN = {"title": "Bench"}


def test_a_cached_result_is_seen_by_another_process_and_expires(open_test_store):
    clock = FakeClock()
    one, two = StoreCache(open_test_store(clock), max_age_s=3600.0), StoreCache(open_test_store(clock))
    one.put("page:abc", b"<html>checked</html>", ttl_s=600.0)
    assert two.get("page:abc") == b"<html>checked</html>"
    clock.now_s += 600.0
    assert two.get("page:abc") is None
    assert two.get("never-put") is None


def test_a_result_kept_without_a_time_to_live_still_leaves_after_the_maximum_age(open_test_store):
    clock = FakeClock()
    cache = StoreCache(open_test_store(clock), max_age_s=3600.0)
    cache.put("page:immutable", b"x")
    clock.now_s += 3599.0
    assert cache.get("page:immutable") == b"x"
    clock.now_s += 1.0
    assert cache.get("page:immutable") is None


def test_saves_over_the_minute_limit_wait_until_the_first_leaves_the_window(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    # Two limiters stand for two server processes: they count the same saves.
    limiters = [StoreLimiter(open_test_store(clock), per_minute=3, per_day=100, clock=clock) for _ in range(2)]
    for n in range(3):
        assert limiters[n % 2].admit("198.51.100.4") is None
        store.save_plan(PLAN, engine_version="t", client="198.51.100.4")
        clock.now_s += 10.0
    # Source: a sliding 60 s window; the first save (t = 0 s) leaves it at t = 60 s and it is now t = 30 s.
    assert limiters[0].admit("198.51.100.4") == 30.0
    assert limiters[1].admit("203.0.113.9") is None  # other addresses are not held back
    clock.now_s += 30.0
    assert limiters[1].admit("198.51.100.4") is None


def test_saves_over_the_day_limit_wait_for_the_day_window(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    limiter = StoreLimiter(store, per_minute=100, per_day=2, clock=clock)
    for _ in range(2):
        store.save_plan(PLAN, engine_version="t", client="192.0.2.8")
        clock.now_s += 3600.0
    # Source: a sliding 24 h window; the first save leaves it 86 400 s after it was made, 7 200 s ago.
    assert limiter.admit("192.0.2.8") == 86_400.0 - 7200.0
