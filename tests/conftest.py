from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
from pairline.server.store import PlanStore, open_store

from tests.postgres_cluster import Cluster, skip_or_fail_without_postgres


@pytest.fixture(scope="session")
def postgres_cluster() -> Iterator[Cluster]:
    """One throwaway PostgreSQL server for the whole run, started on first use."""
    skip_or_fail_without_postgres()
    cluster = Cluster()
    cluster.start()
    try:
        yield cluster
    finally:
        cluster.stop()


@pytest.fixture
def postgres_url(postgres_cluster: Cluster) -> str:
    """A fresh empty database on the test server."""
    return postgres_cluster.create_database()


T0 = 1_800_000_000.0  # seconds since the epoch: 2027-01-15 08:00 UTC


class FakeClock:
    def __init__(self) -> None:
        self.now_s = T0

    def __call__(self) -> float:
        return self.now_s


OpenStore = Callable[..., PlanStore]


@pytest.fixture(params=["sqlite", "postgresql"])
def open_test_store(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[OpenStore]:
    """Opens stores on one fresh database of the parametrised kind; every store opened is closed afterwards."""
    if request.param == "sqlite":
        target = str(tmp_path / "plans.db")
    else:
        target = request.getfixturevalue("postgres_url")
    opened: list[PlanStore] = []

    def open_one(clock: FakeClock | None = None) -> PlanStore:
        store = open_store(target, clock=clock) if clock else open_store(target)
        opened.append(store)
        return store

    yield open_one
    for store in opened:
        store.close()
