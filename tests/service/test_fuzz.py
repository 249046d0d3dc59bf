"""Bounded property-based fuzz of every documented operation (schemathesis, from openapi/openapi.yaml).

Checks, with access control on and an organisation's submit key (as deployed): no
response is a 5xx (RFC 9457 problems for bad input, never a server error), and every
response conforms to the document (schemathesis's own status-code, content-type, header
and response-schema conformance checks), on every operation including the GIS exports;
a stored route assessment is created first so that the fuzzed path ids sometimes hit a
real record.  Bounded: a fixed number of examples per operation, derandomised, no
shrinking, about a minute.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, Phase, given, settings
from schemathesis.core.failures import FailureGroup
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from service import create_app, storage

from .test_access import new_key

EXAMPLES_PER_OPERATION = 25
EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"


CHECKS = [status_code_conformance, content_type_conformance, response_headers_conformance,
          response_schema_conformance]


@pytest.fixture
def secured_app():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "AUTH_REQUIRED": True})
    yield app
    storage.storage_of(app).engine.dispose()


@pytest.mark.slow
def test_no_operation_answers_with_a_server_error_or_off_the_document(secured_app):
    # identity: the WSGI transport hands schemathesis the raw bytes (gzip is tested in test_compression)
    headers = {"Authorization": f"Bearer {new_key(secured_app, 'fuzz-org')}", "Accept-Encoding": "identity"}
    body = json.loads((EXAMPLES / "demo_route.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 25.0
    stored = secured_app.test_client().post("/v1/assessments", json=body, headers=headers)
    assert stored.status_code == 201
    schema = schemathesis.openapi.from_wsgi("/openapi.json", secured_app)
    failures: list[str] = []
    operations = [result.ok() for result in schema.get_all_operations()]
    assert len(operations) >= 10

    for operation in operations:
        fuzz(operation, stored.get_json()["id"], headers, failures)()
    assert not failures, "\n".join(failures[:20])


def fuzz(operation, stored_id: str, headers: dict[str, str], failures: list[str]):
    """A hypothesis test of one operation; 5xx and non-conforming responses are appended to ``failures``."""
    calls = itertools.count()

    @given(case=operation.as_strategy())
    @settings(max_examples=EXAMPLES_PER_OPERATION, deadline=None, derandomize=True, database=None,
              phases=[Phase.explicit, Phase.generate], suppress_health_check=list(HealthCheck))
    def run(case):
        if "assessment_id" in (case.path_parameters or {}) and next(calls) % 2:
            case.path_parameters["assessment_id"] = stored_id  # half the cases hit a real record
        response = case.call(headers=headers)
        where = (f"{operation.method.upper()} {operation.path}: {response.status_code} "
                 f"path={case.path_parameters} query={case.query} body={str(case.body)[:300]}")
        if response.status_code >= 500:
            failures.append(where)
            return
        try:
            case.validate_response(response, checks=CHECKS)
        except FailureGroup as exc:  # schemathesis raises a group of the failed checks (a BaseExceptionGroup)
            failures.append(f"{where}\n  {str(exc)[:600]}")

    return run

