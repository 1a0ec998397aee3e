"""The store contract, run alike on SQLite and on a real PostgreSQL server: immutable plans with random ids and
parent links, samples that keep their id while unchanged, per-client save counts, a shared results cache, and
versioned schema migrations that several processes can start on at once."""

import json
import math
import sqlite3
import threading
from datetime import UTC, datetime

import pytest
from pairline.server.samples import seed_samples
from pairline.server.store import (
    ID_BYTES,
    PlanStore,
    SaveCount,
    SqliteStore,
    StoreError,
    canonical_json,
    looks_like_plan_id,
    open_store,
)
from pairline.server.store.migrations import migrations_for

from tests.conftest import T0, FakeClock

PLAN = {"title": "Bench", "trunk_length_m": 50.0, "nodes": [{"name": "a", "position_m": 10.0}]}
NEWEST = migrations_for("sqlite")[-1].version


def raw(store: PlanStore, sql: str, params: tuple = ()) -> list[tuple]:
    """Run SQL on the store's own database, for looking behind the interface."""
    with store._transaction(write=True) as tx:  # type: ignore[attr-defined]
        rows = tx.execute(sql, params)
        return [tuple(r) for r in rows.fetchall()] if sql.startswith("SELECT") else []


def test_ids_carry_at_least_64_random_bits_and_differ_each_save(open_test_store):
    store = open_test_store()
    ids = {store.save_plan(PLAN, engine_version="t") for _ in range(200)}
    assert len(ids) == 200
    assert all(looks_like_plan_id(i) for i in ids)
    # Source: token_urlsafe writes each 6 bits as one character; 64 bits is the least an unguessable link needs
    # (common practice).
    assert ID_BYTES * 8 >= 64
    assert all(len(i) * math.log2(64) >= 64 for i in ids)


def test_saved_plans_read_back_unchanged_with_parent_and_engine_version(open_test_store):
    store = open_test_store()
    first = store.save_plan(PLAN, engine_version="0.1.0")
    second = store.save_plan(PLAN | {"title": "Bench v2"}, engine_version="0.1.0", parent_id=first)
    third = store.save_plan(PLAN | {"title": "Bench v3 ✓ Ω"}, engine_version="0.2.0", parent_id=first)
    a, b = store.get_plan(first), store.get_plan(second)
    assert a.plan == PLAN and a.parent_id is None and a.engine_version == "0.1.0"
    assert b.parent_id == first and b.title == "Bench v2"
    assert store.get_plan(third).plan["title"] == "Bench v3 ✓ Ω"
    assert store.children_of(first) == [second, third]
    assert store.children_of(second) == []
    assert store.get_plan("nope") is None
    assert store.get_plan("x" * 16) is None


def test_created_at_is_the_save_time_in_utc_to_the_second(open_test_store):
    clock = FakeClock()
    clock.now_s = T0 + 0.75
    plan_id = open_test_store(clock).save_plan(PLAN, engine_version="t")
    # Source: T0 = 1 800 000 000 s after 1970-01-01T00:00Z is 2027-01-15T08:00:00Z (Unix time, by hand).
    assert open_test_store().get_plan(plan_id).created_at == "2027-01-15T08:00:00+00:00"


def test_a_store_reopened_on_the_same_database_keeps_its_plans(open_test_store):
    plan_id = open_test_store().save_plan(PLAN, engine_version="t")
    assert open_test_store().get_plan(plan_id).plan == PLAN


def test_two_stores_on_one_database_see_each_others_saves_and_cache(open_test_store):
    # Two stores stand for two server processes sharing one database.
    one, two = open_test_store(), open_test_store()
    plan_id = one.save_plan(PLAN, engine_version="t", client="198.51.100.7")
    assert two.get_plan(plan_id).plan == PLAN
    one.cache_put("result:abc", b"\x00\x01 shared \xff")
    assert two.cache_get("result:abc") == b"\x00\x01 shared \xff"
    assert two.saves_since("198.51.100.7", datetime(2000, 1, 1, tzinfo=UTC)).saves == 1


def test_samples_keep_their_id_while_the_file_is_unchanged(open_test_store):
    store = open_test_store()
    first = store.put_sample("bench", PLAN, engine_version="t", position=0)
    assert store.put_sample("bench", PLAN, engine_version="t", position=0) == first
    changed = store.put_sample("bench", PLAN | {"title": "Bench, edited"}, engine_version="t", position=0)
    assert changed != first
    assert [(s.slug, s.plan_id, s.title) for s in store.samples()] == [("bench", changed, "Bench, edited")]
    assert store.get_plan(first) is not None  # links to the old version still open


def test_samples_whose_file_is_gone_leave_the_list(open_test_store, tmp_path):
    store = open_test_store()
    folder = tmp_path / "samples"
    folder.mkdir()
    doc = '{"bit_rate_bps": 9600, "trunk_length_m": 10, "nodes": [{"name": "a", "position_m": 5}]}'
    (folder / "one.json").write_text(doc)
    (folder / "two.json").write_text(doc)
    assert seed_samples(store, folder) == 2
    kept_id = {s.slug: s.plan_id for s in store.samples()}["two"]
    (folder / "two.json").unlink()
    assert seed_samples(store, folder) == 1
    assert [s.slug for s in store.samples()] == ["one"]
    assert store.get_plan(kept_id) is not None
    (folder / "one.json").unlink()
    assert seed_samples(store, folder) == 0
    assert store.samples() == []


def test_saves_are_counted_per_client_since_a_time_with_their_bytes(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    small = {"title": "Ω"}
    store.save_plan(small, engine_version="t", client="203.0.113.5")
    clock.now_s = T0 + 60.0
    store.save_plan(small, engine_version="t", client="203.0.113.5")
    store.save_plan(PLAN, engine_version="t", client="203.0.113.5")
    store.save_plan(PLAN, engine_version="t", client="2001:db8::1")
    store.save_plan(PLAN, engine_version="t")  # no client known: counted for nobody
    # Source: the stored document is compact JSON with sorted keys in UTF-8; 'Ω' is 2 bytes in UTF-8 (RFC 3629).
    small_bytes = len('{"title":"Ω"}'.encode())
    plan_bytes = len(json.dumps(PLAN, sort_keys=True, ensure_ascii=False, separators=(",", ":")).encode())
    assert small_bytes == 14
    since_start = datetime.fromtimestamp(T0, UTC)
    since_minute = datetime.fromtimestamp(T0 + 30.0, UTC)
    minute_later = datetime.fromtimestamp(T0 + 60.0, UTC)
    assert store.saves_since("203.0.113.5", since_start) == SaveCount(3, 2 * small_bytes + plan_bytes, since_start)
    assert store.saves_since("203.0.113.5", since_minute) == SaveCount(2, small_bytes + plan_bytes, minute_later)
    assert store.saves_since("2001:db8::1", since_start) == SaveCount(1, plan_bytes, minute_later)
    assert store.saves_since("192.0.2.1", since_start) == SaveCount(0, 0, None)


CAPTURE = {"capture_csv": "Time (s),A-B (V)\n0,-1.2\n1e-9,1.2\n", "at": "a", "probe_attenuation": 10.0}


def test_captures_read_back_unchanged_under_their_own_id_and_only_with_their_plan(open_test_store):
    clock = FakeClock()
    clock.now_s = T0 + 0.25
    store = open_test_store(clock)
    plan_id = store.save_plan(PLAN, engine_version="0.1.0")
    other_plan = store.save_plan(PLAN, engine_version="0.1.0")
    first = store.save_capture(plan_id, CAPTURE, engine_version="0.2.0", client="203.0.113.5")
    second = store.save_capture(plan_id, CAPTURE | {"at": "µ-node Ω"}, engine_version="0.2.0")
    assert first != second and looks_like_plan_id(first) and looks_like_plan_id(second)
    saved = open_test_store().get_capture(plan_id, first)
    assert (saved.id, saved.plan_id, saved.capture, saved.engine_version) == (first, plan_id, CAPTURE, "0.2.0")
    # Source: T0 = 1 800 000 000 s after 1970-01-01T00:00Z is 2027-01-15T08:00:00Z (Unix time, by hand).
    assert saved.created_at == "2027-01-15T08:00:00+00:00"
    assert store.get_capture(plan_id, second).capture["at"] == "µ-node Ω"
    assert store.get_capture(other_plan, first) is None  # a capture opens only under the plan it was held against
    assert store.get_capture(plan_id, plan_id) is None
    assert store.get_capture(plan_id, "nope") is None
    assert store.get_plan(first) is None  # capture ids are not plan ids


def test_captures_count_as_saves_with_their_bytes(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    plan_id = store.save_plan(PLAN, engine_version="t", client="203.0.113.5")
    clock.now_s = T0 + 60.0
    store.save_capture(plan_id, CAPTURE, engine_version="t", client="203.0.113.5")
    store.save_capture(plan_id, CAPTURE, engine_version="t", client="2001:db8::1")
    # Source: the stored documents are compact JSON with sorted keys, counted in UTF-8 bytes (RFC 3629).
    plan_bytes = len(json.dumps(PLAN, sort_keys=True, ensure_ascii=False, separators=(",", ":")).encode())
    capture_bytes = len(json.dumps(CAPTURE, sort_keys=True, ensure_ascii=False, separators=(",", ":")).encode())
    since_start = datetime.fromtimestamp(T0, UTC)
    minute_later = datetime.fromtimestamp(T0 + 60.0, UTC)
    counted = store.saves_since("203.0.113.5", since_start)
    assert counted == SaveCount(2, plan_bytes + capture_bytes, since_start)
    assert store.saves_since("203.0.113.5", minute_later) == SaveCount(1, capture_bytes, minute_later)
    assert store.saves_since("2001:db8::1", since_start) == SaveCount(1, capture_bytes, minute_later)


def test_a_plans_captures_are_listed_newest_first_without_their_file_and_capped(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    plan_id = store.save_plan(PLAN, engine_version="t")
    other_plan = store.save_plan(PLAN, engine_version="t")
    assert store.captures_of(plan_id, 50) == ([], 0)
    ids = []
    places = [{"at": "a"}, {"at": None, "at_position_m": 12.5}, {"at": "c"}, {"at": "c"}]
    for k, place in enumerate(places):
        clock.now_s = T0 + 60.0 * min(k, 2)  # the last two saved within the same microsecond
        ids.append(store.save_capture(plan_id, CAPTURE | place, engine_version="t"))
    store.save_capture(other_plan, CAPTURE, engine_version="t")
    listed, total = open_test_store().captures_of(plan_id, 3)
    assert total == 4
    assert [c.id for c in listed] == [ids[3], ids[2], ids[1]]  # ties keep the order they were saved in
    assert all(c.plan_id == plan_id for c in listed)
    assert (listed[0].at, listed[0].at_position_m) == ("c", None)
    assert (listed[2].at, listed[2].at_position_m) == (None, 12.5)
    # Source: T0 + 60 s is 2027-01-15T08:01:00Z (Unix time, by hand).
    assert listed[2].created_at == "2027-01-15T08:01:00+00:00"
    assert [c.id for c in store.captures_of(plan_id, 50)[0]] == ids[::-1]
    assert store.captures_of(other_plan, 50)[1] == 1
    assert store.captures_of("nope", 50) == ([], 0)


def test_cache_values_replace_and_expire(open_test_store):
    clock = FakeClock()
    store = open_test_store(clock)
    assert store.cache_get("k") is None
    store.cache_put("k", b"first", ttl_s=10.0)
    store.cache_put("k", b"second", ttl_s=10.0)
    store.cache_put("forever", bytes(range(256)))
    assert store.cache_get("k") == b"second"
    clock.now_s = T0 + 9.9
    assert store.cache_get("k") == b"second"
    clock.now_s = T0 + 10.0
    assert store.cache_get("k") is None
    store.cache_put("other", b"x", ttl_s=1.0)  # a put also clears what has expired
    assert raw(store, "SELECT key FROM results_cache ORDER BY key") == [("forever",), ("other",)]
    clock.now_s = T0 + 1e6
    assert store.cache_get("forever") == bytes(range(256))


def test_threads_saving_at_once_lose_nothing(open_test_store):
    store = open_test_store()
    saved: list[tuple[str, dict]] = []
    lock = threading.Lock()

    def save_some(worker: int) -> None:
        for n in range(25):
            plan = PLAN | {"title": f"worker {worker} plan {n}"}
            plan_id = store.save_plan(plan, engine_version="t", client=f"192.0.2.{worker}")
            with lock:
                saved.append((plan_id, plan))

    threads = [threading.Thread(target=save_some, args=(w,)) for w in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert len(saved) == 200
    assert all(store.get_plan(plan_id).plan == plan for plan_id, plan in saved)


def test_migrations_are_recorded_once_even_when_processes_start_together(open_test_store):
    stores: list[PlanStore] = []
    errors: list[BaseException] = []

    def start() -> None:
        try:
            stores.append(open_test_store())
        except BaseException as exc:
            errors.append(exc)

    threads = [threading.Thread(target=start) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    assert all(s.schema_version() == NEWEST for s in stores)
    rows = raw(stores[0], "SELECT version, name FROM schema_migrations ORDER BY version")
    assert rows == [(m.version, m.name) for m in migrations_for("sqlite")]


def test_a_database_from_a_newer_pairline_is_refused(open_test_store):
    store = open_test_store()
    raw(store, "INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, ?, ?)", (99, "future", "x"))
    with pytest.raises(StoreError, match=f"schema version 99.*up to {NEWEST}"):
        open_test_store()


def _index_definitions(store: PlanStore, table: str) -> list[str]:
    if isinstance(store, SqliteStore):
        sql = "SELECT sql FROM sqlite_master WHERE type = 'index' AND tbl_name = ? AND sql IS NOT NULL"
    else:
        sql = "SELECT indexdef FROM pg_indexes WHERE tablename = ?"
    return [definition for (definition,) in raw(store, sql, (table,))]


def test_plans_are_indexed_by_parent_and_captures_by_plan(open_test_store):
    store = open_test_store()
    assert any("(parent_id)" in definition for definition in _index_definitions(store, "plans"))
    assert any("(plan_id, created_at, id," in definition for definition in _index_definitions(store, "captures"))


@pytest.mark.parametrize("kind", ["sqlite", "postgresql"])
def test_captures_saved_before_the_list_existed_are_listed_with_where_they_were_probed(kind, tmp_path, request):
    if kind == "sqlite":
        target: object = tmp_path / "plans.db"
        newest: type[PlanStore] = SqliteStore
    else:
        target = request.getfixturevalue("postgres_url")
        from pairline.server.store.postgres import PostgresStore

        newest = PostgresStore
    before = type("Before", (newest,), {"migrations": newest.migrations[:5]})  # type: ignore[attr-defined]
    old = before(target)
    plan_id = old.save_plan(PLAN, engine_version="t")
    on_trunk = CAPTURE | {"at": None, "at_position_m": 12.5}
    for capture_id, capture, moment in (("oldcaptureoldcap", CAPTURE, T0), ("oldcapturetrunk1", on_trunk, T0 + 1)):
        raw(  # a capture row as the schema before the list stored it
            old,
            "INSERT INTO captures (id, plan_id, capture_json, engine_version, created_at, client, capture_bytes)"
            " VALUES (?, ?, ?, ?, ?, ?, ?)",
            (
                capture_id,
                plan_id,
                canonical_json(capture),
                "t",
                old._time_param(datetime.fromtimestamp(moment, UTC)),
                None,
                1,
            ),
        )
    old.close()
    store = newest(target)  # type: ignore[call-arg]
    try:
        assert store.schema_version() == NEWEST
        listed, total = store.captures_of(plan_id, 50)
        assert total == 2
        assert [(c.id, c.at, c.at_position_m) for c in listed] == [
            ("oldcapturetrunk1", None, 12.5),
            ("oldcaptureoldcap", "a", None),
        ]
        assert store.get_capture(plan_id, "oldcaptureoldcap").capture == CAPTURE
    finally:
        store.close()


def test_sqlite_runs_in_write_ahead_log_mode(tmp_path):
    SqliteStore(tmp_path / "plans.db")
    with sqlite3.connect(tmp_path / "plans.db") as db:
        assert db.execute("PRAGMA journal_mode").fetchone() == ("wal",)


def test_a_sqlite_file_from_before_migrations_is_adopted(tmp_path):
    path = tmp_path / "old.db"
    with sqlite3.connect(path) as db:  # the schema files had before migrations were recorded
        db.executescript(
            "CREATE TABLE plans (id TEXT PRIMARY KEY, plan_json TEXT NOT NULL, title TEXT NOT NULL,"
            " parent_id TEXT, engine_version TEXT NOT NULL, created_at TEXT NOT NULL);"
            "CREATE TABLE samples (slug TEXT PRIMARY KEY, plan_id TEXT NOT NULL REFERENCES plans(id),"
            " title TEXT NOT NULL, position INTEGER NOT NULL);"
            "INSERT INTO plans VALUES ('oldplanoldplan01', '{\"title\":\"Old\"}', 'Old', NULL, '0.0.9',"
            " '2025-03-01T10:00:00+00:00');"
        )
    store = SqliteStore(path)
    assert store.schema_version() == NEWEST
    old = store.get_plan("oldplanoldplan01")
    assert old.plan == {"title": "Old"} and old.created_at == "2025-03-01T10:00:00+00:00"
    assert raw(store, "SELECT plan_bytes FROM plans") == [(len('{"title":"Old"}'),)]


def test_an_unknown_database_kind_is_refused_naming_what_is_allowed(tmp_path):
    with pytest.raises(StoreError, match="'mysql://…'; allowed a SQLite file path or a postgresql://"):
        open_store("mysql://db.example/plans")


def test_an_unreachable_postgresql_database_fails_at_once_with_the_reason(tmp_path):
    pytest.importorskip("psycopg")
    with pytest.raises(StoreError, match="Cannot use the database at postgresql:///plans.*No such file"):
        open_store(f"postgresql:///plans?host={tmp_path}/none&user=nobody")
