"""Bounded property-based fuzz of every documented operation (schemathesis, from openapi/openapi.yaml).

Check: no response is a 5xx (RFC 9457 problems for bad input, never a server error),
on every operation including the GIS exports; a stored route assessment is created
first so that the fuzzed path ids sometimes hit a real record.  Bounded: a fixed
number of examples per operation, derandomised, no shrinking, well under a minute.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import schemathesis
from hypothesis import HealthCheck, Phase, given, settings

EXAMPLES_PER_OPERATION = 25
EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"


def test_no_operation_answers_with_a_server_error(app, client):
    body = json.loads((EXAMPLES / "demo_route.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 25.0
    stored_id = client.post("/v1/assessments", json=body).get_json()["id"]
    schema = schemathesis.openapi.from_wsgi("/openapi.json", app)
    failures: list[str] = []
    operations = [result.ok() for result in schema.get_all_operations()]
    assert len(operations) >= 10

    for operation in operations:
        fuzz(operation, stored_id, failures)()
    assert not failures, "\n".join(failures[:20])


def fuzz(operation, stored_id: str, failures: list[str]):
    """A hypothesis test of one operation; 5xx responses are appended to ``failures``."""
    calls = itertools.count()

    @given(case=operation.as_strategy())
    @settings(max_examples=EXAMPLES_PER_OPERATION, deadline=None, derandomize=True, database=None,
              phases=[Phase.explicit, Phase.generate], suppress_health_check=list(HealthCheck))
    def run(case):
        if "assessment_id" in (case.path_parameters or {}) and next(calls) % 2:
            case.path_parameters["assessment_id"] = stored_id  # half the cases hit a real record
        response = case.call()
        if response.status_code >= 500:
            failures.append(f"{operation.method.upper()} {operation.path}: {response.status_code} "
                            f"path={case.path_parameters} query={case.query} body={str(case.body)[:300]}")

    return run

