"""A bounded fuzz run from the published OpenAPI schema: at least 2 000 generated requests, valid and invalid by
the schema, across every operation; none may answer with a 5xx."""

import schemathesis
from hypothesis import HealthCheck, given, seed, settings
from hypothesis import strategies as st
from pairline.server.app import create_app
from pairline.server.settings import Settings
from schemathesis.generation import GenerationMode

REQUESTS = 2000


def test_no_generated_request_gets_a_server_error(tmp_path):
    # a short time limit keeps every generated check quick; quotas high enough not to refuse the run itself
    limits = Settings(check_time_limit_s=0.05, saves_per_minute=100_000, saves_per_day=1_000_000)
    app = create_app(tmp_path / "plans.db", settings=limits)
    schema = schemathesis.openapi.from_asgi("/openapi.json", app)
    cases = st.one_of(schema.as_strategy(GenerationMode.POSITIVE), schema.as_strategy(GenerationMode.NEGATIVE))
    answered: list[tuple[str, str, int]] = []

    @seed(485)
    @settings(
        max_examples=REQUESTS,
        deadline=None,
        database=None,
        suppress_health_check=list(HealthCheck),
    )
    @given(case=cases)
    def one_request(case):
        response = case.call()
        answered.append((case.method, case.path, response.status_code))
        assert response.status_code < 500, (case.method, case.formatted_path, response.status_code, response.text[:500])

    try:
        one_request()
    finally:
        app.state.pool.close()
    assert len(answered) >= REQUESTS
    assert len({(method, path) for method, path, _ in answered}) >= 12  # every operation was reached
