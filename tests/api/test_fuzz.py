"""Fuzzing of the API against its own OpenAPI document (schemathesis, in-process ASGI).

Every operation gets a bounded number of generated requests (valid and invalid), sent
with an engineer's token; no answer may be a 5xx, and every answer must match the
response schema the document gives for its status.
"""

from __future__ import annotations

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import response_schema_conformance

from qualplan.api.app import create_app
from qualplan.config import Settings
from tests.api.conftest import MAX_UPLOAD

#: Generated requests per operation (bounded: the suite runs this on every commit).
EXAMPLES = 12


def _operations() -> list[tuple[str, str]]:
    """(method, path) of every operation, from the OpenAPI document (no database used)."""
    doc = create_app(Settings(database_url="sqlite://")).openapi()
    return [(m.upper(), p) for p, ops in doc["paths"].items() for m in ops]


@pytest.fixture(scope="module")
def api_schema(app, db_url):
    """The schema of an app of its own (`app` only seeds the default policies):
    schemathesis starts an app's lifespan itself and ends it after each test, which on the
    shared `app` would replace and then close the job runner (and engine) that the run's
    TestClient serves through (app.state is one per app)."""
    own = create_app(Settings(database_url=db_url, max_upload_bytes=MAX_UPLOAD))
    return schemathesis.openapi.from_asgi("/api/v1/openapi.json", own)


@pytest.mark.parametrize("method, path", _operations(), ids=lambda x: x)
def test_no_server_errors(api_schema, callers, method, path):
    operation = api_schema[path][method]
    headers = {"Authorization": f"Bearer {callers['engineer'].token}"}

    @given(case=operation.as_strategy())
    @settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
              suppress_health_check=list(HealthCheck), database=None)
    def one(case):
        response = case.call(headers=headers)
        assert response.status_code < 500, (method, path, case.path_parameters,
                                            case.query, case.body, response.text[:500])
        case.validate_response(response, checks=[not_a_server_error,
                                                 response_schema_conformance])

    one()
