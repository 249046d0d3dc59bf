"""openapi/openapi.yaml: valid OpenAPI 3.1, in step with the Flask routes, and true of real responses.

Validation of the document uses openapi-spec-validator (the OpenAPI 3.1 meta-schema).
Responses are checked with jsonschema's Draft 2020-12 validator (the dialect of
OpenAPI 3.1 schemas) against the schema the document gives for the route, method,
status and media type.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
import yaml
from jsonschema import Draft202012Validator
from openapi_spec_validator import validate as validate_spec

from service import create_app

SPEC_PATH = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"
DEMO = Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_cross_section.json"
HTTP_METHODS = {"get", "put", "post", "delete", "patch"}


@pytest.fixture(scope="module")
def spec() -> dict:
    return yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))


def schema_validator(spec: dict, schema: dict) -> Draft202012Validator:
    """Validator for ``schema`` whose ``#/components/...`` references resolve in ``spec``."""
    root = {**schema, "components": spec["components"]}
    return Draft202012Validator(root, format_checker=Draft202012Validator.FORMAT_CHECKER)


def flask_routes(app) -> set[tuple[str, str]]:
    """(OpenAPI path template, method) for every rule except static files."""
    out = set()
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        path = re.sub(r"<(?:[^:<>]+:)?([^<>]+)>", r"{\1}", rule.rule)
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            out.add((path, method.lower()))
    return out


def spec_routes(spec: dict) -> set[tuple[str, str]]:
    return {(path, method) for path, item in spec["paths"].items() for method in item if method in HTTP_METHODS}


def match_template(spec: dict, path: str) -> str:
    for template in spec["paths"]:
        pattern = "^" + re.sub(r"\\\{[^}]+\\\}", "[^/]+", re.escape(template)) + "$"
        if re.match(pattern, path):
            return template
    raise AssertionError(f"no path in the document matches {path}")


def check_response(spec: dict, response, method: str | None = None) -> None:
    """Assert that ``response`` is one the document allows for its request."""
    request = response.request
    template = match_template(spec, request.path)
    operation = spec["paths"][template][(method or request.method).lower()]
    responses = operation["responses"]
    documented = responses.get(str(response.status_code)) or responses.get("default")
    assert documented is not None, f"{response.status_code} not documented for {request.method} {template}"
    if "$ref" in documented:
        documented = spec["components"]["responses"][documented["$ref"].rsplit("/", 1)[-1]]
    content = documented["content"]
    assert response.mimetype in content, f"{response.mimetype} not documented ({list(content)})"
    for header, spec_header in documented.get("headers", {}).items():
        if spec_header.get("required", True):  # our documents mark optional headers required: false
            assert header in response.headers, f"documented header {header} missing"
    validator = schema_validator(spec, content[response.mimetype]["schema"])
    errors = sorted(validator.iter_errors(json.loads(response.get_data(as_text=True))), key=str)
    assert not errors, "\n".join(f"{list(e.absolute_path)}: {e.message}" for e in errors[:10])


def test_document_is_valid_openapi_3_1(spec):
    assert spec["openapi"].startswith("3.1")
    validate_spec(spec)


def test_every_route_is_documented_and_every_path_exists(app, spec):
    in_app, in_doc = flask_routes(app), spec_routes(spec)
    assert not in_app - in_doc, f"routes missing from openapi.yaml: {sorted(in_app - in_doc)}"
    assert not in_doc - in_app, f"paths in openapi.yaml without a route: {sorted(in_doc - in_app)}"


def test_every_error_response_uses_the_problem_schema(spec):
    for path, item in spec["paths"].items():
        for method, operation in item.items():
            if method not in HTTP_METHODS:
                continue
            assert "default" in operation["responses"], f"{method} {path} has no default (problem) response"
            for status, resp in operation["responses"].items():
                if status == "default" or int(status) >= 400:
                    name = resp["$ref"].rsplit("/", 1)[-1]
                    assert spec["components"]["responses"][name]["content"] == {
                        "application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}, \
                        (method, path, status)


def test_served_document_equals_the_file(client, spec):
    assert client.get("/openapi.json").get_json() == spec


def test_demo_request_matches_request_schema(spec):
    validator = schema_validator(spec, {"$ref": "#/components/schemas/AssessmentRequest"})
    validator.validate(json.loads(DEMO.read_text(encoding="utf-8")))


def test_request_schema_property_names_match_marshmallow(spec):
    # Drift in field names between the document and the request schemas.
    from service import schema_fields, schemas as s

    pairs = {
        "AssessmentRequest": s.CrossSectionAssessmentSchema, "CrossSection": s.CrossSectionSchema,
        "Circuit": s.CircuitSchema, "Conductor": s.ConductorSchema, "Bundle": s.BundleSchema,
        "EarthWire": s.EarthWireSchema, "Profile": s.ProfileSchema, "Point": s.PointSchema,
        "CustomLimit": schema_fields.CustomLimitSchema, "CurrentPhasor": s.CurrentPhasorSchema,
        "VoltagePhasor": s.VoltagePhasorSchema,
    }
    for name, schema_cls in pairs.items():
        doc = spec["components"]["schemas"][name]
        fields = schema_cls().fields
        assert set(doc["properties"]) == set(fields), name
        assert set(doc["required"]) == {k for k, f in fields.items() if f.required}, name


def test_real_responses_match_the_document(client, spec):
    demo = json.loads(DEMO.read_text(encoding="utf-8"))
    created = client.post("/v1/assessments", json=demo)
    assert created.status_code == 201
    check_response(spec, created)
    location = created.headers["Location"]
    check_response(spec, client.get(location))
    check_response(spec, client.get("/v1/assessments?limit=1"))
    check_response(spec, client.post("/v1/evaluate", json=demo))
    check_response(spec, client.get("/v1/reference-levels?frequency_hz=60"))
    check_response(spec, client.get("/healthz"))
    check_response(spec, client.get("/openapi.json"))
    points = {k: v for k, v in demo.items() if k != "profile"}
    points["points"] = [{"offset_m": 0.0, "height_m": 1.0}, {"offset_m": 30.0, "height_m": 1.5}]
    check_response(spec, client.post("/v1/evaluate", json=points))


def test_problem_responses_match_the_document(client, spec):
    bad = json.loads(DEMO.read_text(encoding="utf-8"))
    bad["frequency_hz"] = "fifty"
    check_response(spec, client.post("/v1/assessments", json=bad))                        # 422
    check_response(spec, client.post("/v1/assessments", data="{", content_type="application/json"))  # 400
    check_response(spec, client.post("/v1/evaluate", data="x", content_type="text/plain"))  # 415
    check_response(spec, client.get("/v1/assessments/00000000-0000-4000-8000-000000000000"))  # 404
    check_response(spec, client.get("/v1/assessments?limit=0"))                            # 400
    check_response(spec, client.get("/v1/reference-levels?frequency_hz=x"))                # 400
    check_response(spec, client.delete("/v1/assessments"), method="get")                   # 405 (default)


def test_oversize_problem_matches_the_document(spec):
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_CONTENT_LENGTH": 100})
    check_response(spec, app.test_client().post("/v1/assessments", json={"title": "x" * 200}))  # 413
