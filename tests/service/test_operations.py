"""``/metrics`` and ``/readyz`` in one process (the multi-process case is in test_gunicorn.py)."""

from __future__ import annotations

from prometheus_client.parser import text_string_to_metric_families
from sqlalchemy.exc import OperationalError

from service import schema_migrations

from .test_api import small_body


def samples(client) -> dict:
    text = client.get("/metrics").get_data(as_text=True)
    out = {}
    for family in text_string_to_metric_families(text):  # the format parses with prometheus_client's parser
        for s in family.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def test_metrics_count_the_requests_made(client):
    before = samples(client)
    for _ in range(3):
        assert client.get("/healthz").status_code == 200
    assert client.post("/v1/assessments", json=small_body()).status_code == 201
    assert client.post("/v1/evaluate", json={"title": "x"}).status_code == 422
    after = samples(client)

    def delta(name, **labels):
        key = (name, tuple(sorted(labels.items())))
        return after.get(key, 0.0) - before.get(key, 0.0)

    assert delta("emf_http_requests_total", method="GET", route="/healthz", status="200") == 3
    assert delta("emf_http_requests_total", method="POST", route="/v1/assessments", status="201") == 1
    assert delta("emf_http_requests_total", method="POST", route="/v1/evaluate", status="422") == 1
    assert delta("emf_assessments_stored_total", kind="cross_section") == 1
    assert delta("emf_report_build_seconds_count", kind="cross_section") == 1
    assert delta("emf_http_request_duration_seconds_count", method="GET", route="/healthz") == 3


def test_readyz_when_the_schema_is_at_head(client):
    body = client.get("/readyz").get_json()
    assert body == {"status": "ready", "database": "ok", "schema_revision": schema_migrations.head_revision()}


def test_not_ready_when_the_schema_is_behind(client, monkeypatch):
    monkeypatch.setattr(schema_migrations, "head_revision", lambda: "9999")
    response = client.get("/readyz")
    assert response.status_code == 503 and "9999" in response.get_json()["detail"]


def test_not_ready_when_the_database_is_down(app, client, monkeypatch):
    engine = app.extensions["emf_storage"].engine

    def down(*args, **kwargs):
        raise OperationalError("connect", {}, Exception("refused"))

    monkeypatch.setattr(engine, "connect", down)
    response = client.get("/readyz")
    assert response.status_code == 503 and response.get_json()["detail"] == "The database is unreachable."
