"""Structured logs: JSON lines with the client's request id, one per request, no request contents."""

from __future__ import annotations

import io
import json
import logging

import pytest

from service import create_app
from service.logs import JsonFormatter

from .test_api import small_body


@pytest.fixture
def logged():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False})
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    app.logger.addHandler(handler)
    yield app, stream
    app.extensions["emf_storage"].engine.dispose()


def lines(stream: io.StringIO) -> list[dict]:
    return [json.loads(line) for line in stream.getvalue().splitlines()]


def test_one_json_line_per_request_with_the_clients_request_id(logged):
    app, stream = logged
    client = app.test_client()
    secret = "Bearer sk-live-do-not-log-0123456789"
    response = client.post("/v1/assessments", json=small_body(title="Confidential span"),
                           headers={"X-Request-Id": "batch-42.item-7", "Authorization": secret})
    assert response.status_code == 201 and response.headers["X-Request-Id"] == "batch-42.item-7"
    (entry,) = [e for e in lines(stream) if e["message"] == "request"]
    assert entry["request_id"] == "batch-42.item-7" and entry["status"] == 201
    assert entry["method"] == "POST" and entry["path"] == "/v1/assessments" and entry["duration_ms"] > 0
    assert entry["level"] == "INFO" and entry["time"].endswith("Z")
    text = stream.getvalue()
    assert "sk-live" not in text and "Confidential" not in text


def test_a_generated_request_id_is_logged_and_returned(logged):
    app, stream = logged
    response = app.test_client().get("/healthz", headers={"X-Request-Id": "not a valid id!"})
    rid = response.headers["X-Request-Id"]
    assert rid != "not a valid id!" and lines(stream)[-1]["request_id"] == rid


def test_log_settings_are_checked():
    for bad in ({"LOG_FORMAT": "xml"}, {"LOG_REQUESTS": "yes"}):
        with pytest.raises(ValueError, match=next(iter(bad))):
            create_app({"DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False, **bad})
