from collections.abc import Iterator

import pytest

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
