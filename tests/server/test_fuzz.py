"""Anything typed into the editor or sent to the API gets a page or a 422, never a server error."""

import json

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.server.test_pages import FIVE_NODE_FORM, PLAN_DOC

typed = st.one_of(
    st.text(max_size=12),
    st.sampled_from(["", "-1", "0", "1e999", "nan", "1/0", "5 ft", "4.7 nF", "1/8", "12 km", "１２", "<b>x</b>"]),
)
fields = st.sampled_from(sorted(k for k in FIVE_NODE_FORM if k not in ("shown_units", "display_units")))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(changes=st.dictionaries(fields, typed, min_size=1, max_size=4))
def test_any_typed_values_answer_200_or_422(client, changes):
    resp = client.post("/plans", data=FIVE_NODE_FORM | changes | {"action": "check"})
    assert resp.status_code in (200, 422)


json_values = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(allow_nan=False),
    st.text(max_size=8),
    st.lists(st.integers(), max_size=3),
    st.dictionaries(st.text(max_size=4), st.integers(), max_size=2),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    key=st.sampled_from(
        [
            "bit_rate_bps",
            "trunk_length_m",
            "nodes",
            "terminations",
            "bias",
            "cable",
            "driver",
            "standard",
            "display_units",
            "test_pattern",
            "title",
        ]
    ),
    value=json_values,
)
def test_any_json_field_answers_200_or_the_envelope(client, key, value):
    body = json.dumps(PLAN_DOC | {key: value})  # infinities go out as JSON's missing Infinity, and are refused
    resp = client.post("/api/check", content=body, headers={"content-type": "application/json"})
    assert resp.status_code in (200, 422)
    if resp.status_code == 422:
        assert resp.json()["status"] == 422 and resp.json()["problems"]
