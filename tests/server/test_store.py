"""Saved plans: immutable rows with random ids, parent links, samples that keep their id while unchanged."""

import math

from pairline.server.store import ID_BYTES, PlanStore, looks_like_plan_id

PLAN = {"title": "Bench", "trunk_length_m": 50.0, "nodes": [{"name": "a", "position_m": 10.0}]}


def test_ids_carry_at_least_64_random_bits_and_differ_each_save(tmp_path):
    store = PlanStore(tmp_path / "plans.db")
    ids = {store.save_plan(PLAN, engine_version="t") for _ in range(200)}
    assert len(ids) == 200
    assert ID_BYTES * 8 >= 64
    assert all(looks_like_plan_id(i) for i in ids)
    # Each character of token_urlsafe carries 6 bits; 16 characters = 96 bits.
    assert all(len(i) * math.log2(64) >= 64 for i in ids)


def test_saved_plans_read_back_unchanged_with_parent_and_engine_version(tmp_path):
    store = PlanStore(tmp_path / "plans.db")
    first = store.save_plan(PLAN, engine_version="0.1.0")
    second = store.save_plan(PLAN | {"title": "Bench v2"}, engine_version="0.1.0", parent_id=first)
    a, b = store.get_plan(first), store.get_plan(second)
    assert a.plan == PLAN and a.parent_id is None and a.engine_version == "0.1.0"
    assert b.parent_id == first and b.title == "Bench v2"
    assert store.children_of(first) == [second]
    assert store.get_plan("nope") is None
    assert store.get_plan("x" * 16) is None


def test_a_store_reopened_on_the_same_file_keeps_its_plans(tmp_path):
    plan_id = PlanStore(tmp_path / "plans.db").save_plan(PLAN, engine_version="t")
    assert PlanStore(tmp_path / "plans.db").get_plan(plan_id).plan == PLAN


def test_samples_keep_their_id_while_the_file_is_unchanged(tmp_path):
    store = PlanStore(tmp_path / "plans.db")
    first = store.put_sample("bench", PLAN, engine_version="t", position=0)
    assert store.put_sample("bench", PLAN, engine_version="t", position=0) == first
    changed = store.put_sample("bench", PLAN | {"title": "Bench, edited"}, engine_version="t", position=0)
    assert changed != first
    assert [(s.slug, s.plan_id) for s in store.samples()] == [("bench", changed)]
    assert store.get_plan(first) is not None  # links to the old version still open


def test_samples_whose_file_is_gone_leave_the_list(tmp_path):
    from pairline.server.app import load_sample_buses

    store = PlanStore(tmp_path / "plans.db")
    folder = tmp_path / "samples"
    folder.mkdir()
    doc = '{"bit_rate_bps": 9600, "trunk_length_m": 10, "nodes": [{"name": "a", "position_m": 5}]}'
    (folder / "one.json").write_text(doc)
    (folder / "two.json").write_text(doc)
    assert load_sample_buses(store, folder) == 2
    kept_id = {s.slug: s.plan_id for s in store.samples()}["two"]
    (folder / "two.json").unlink()
    assert load_sample_buses(store, folder) == 1
    assert [s.slug for s in store.samples()] == ["one"]
    assert store.get_plan(kept_id) is not None
