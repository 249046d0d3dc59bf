"""Problem details (RFC 9457) for every kind of failure; bad request bodies are in test_api.py."""

from __future__ import annotations

import pytest

from service.errors import engine_field_to_pointer, flatten_messages, pointer

PROBLEM = "application/problem+json"


def assert_problem(response, status):
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    body = response.get_json(force=True)
    # RFC 9457 section 3.1 members
    assert body["status"] == status
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["type"], str) and body["type"]
    assert body["instance"] == response.request.path
    assert body["request_id"] == response.headers["X-Request-Id"]
    return body


def test_unknown_route_is_404_problem(client):
    body = assert_problem(client.get("/no-such-thing"), 404)
    assert body["type"] == "about:blank"


def test_405_keeps_allow_header(client):
    response = client.delete("/healthz")
    assert_problem(response, 405)
    assert set(response.headers["Allow"].replace(" ", "").split(",")) >= {"GET", "HEAD"}


def test_unexpected_error_is_generic_500_without_internals(app, caplog):
    @app.get("/boom")
    def boom():
        raise RuntimeError("secret connection string postgres://user:pw@host")

    response = app.test_client().get("/boom", headers={"X-Request-Id": "req-123"})
    body = assert_problem(response, 500)
    assert "secret" not in response.get_data(as_text=True)
    assert body["request_id"] == "req-123"
    assert "req-123" in body["detail"]
    assert any("req-123" in r.getMessage() for r in caplog.records)


def test_integrity_error_is_409(app):
    from sqlalchemy.exc import IntegrityError

    @app.get("/conflict")
    def conflict():
        raise IntegrityError("INSERT ...", {}, Exception("duplicate key"))

    body = assert_problem(app.test_client().get("/conflict"), 409)
    assert "duplicate" not in body["detail"]


def test_engine_error_is_422_with_pointer(app):
    from models.errors import GeometryError, must_be

    @app.get("/engine")
    def engine():
        raise must_be("cross_section.circuits[0].conductors[2].height_m", "> 0 m", -1.0, GeometryError)

    body = assert_problem(app.test_client().get("/engine"), 422)
    assert body["errors"] == [{"pointer": "/cross_section/circuits/0/conductors/2/height_m",
                               "detail": "Input cross_section.circuits[0].conductors[2].height_m must be > 0 m; "
                                         "instead received -1.0."}]


def test_malicious_request_id_is_replaced(client):
    response = client.get("/healthz", headers={"X-Request-Id": "bad id; Injected: 1"})
    assert response.headers["X-Request-Id"] != "bad id; Injected: 1"
    assert len(response.headers["X-Request-Id"]) == 32


@pytest.mark.parametrize("field, expected", [
    ("cross_section.circuits[0].conductors[2].height_m", "/cross_section/circuits/0/conductors/2/height_m"),
    ("circuits[1].bundle.spacing_m", "/cross_section/circuits/1/bundle/spacing_m"),
    ("frequency_hz", "/frequency_hz"),
    ("", ""),
])
def test_engine_field_to_pointer(field, expected):
    assert engine_field_to_pointer(field) == expected


def test_pointer_escapes_rfc6901():
    # RFC 6901 section 3: "~" -> "~0", "/" -> "~1"
    assert pointer(["a/b", "m~n"]) == "/a~1b/m~0n"


def test_flatten_schema_level_messages_belong_to_parent():
    messages = {"profile": {"_schema": ["to_m must exceed from_m."]}, "title": ["Missing data for required field."]}
    assert sorted(flatten_messages(messages), key=lambda e: e["pointer"]) == [
        {"pointer": "/profile", "detail": "to_m must exceed from_m."},
        {"pointer": "/title", "detail": "Missing data for required field."},
    ]
