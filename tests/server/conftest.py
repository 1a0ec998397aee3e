import warnings

import pytest

# Starlette's test client warns at import when it finds httpx rather than httpx2; either works for these tests.
with warnings.catch_warnings():
    warnings.filterwarnings("ignore", message=".*httpx2.*")
    from fastapi.testclient import TestClient


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> TestClient:
    from pairline.server.app import create_app

    app = create_app(tmp_path_factory.mktemp("db") / "plans.db")
    with TestClient(app) as c:
        yield c
