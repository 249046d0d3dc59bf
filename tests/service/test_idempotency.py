"""Idempotency-Key on POST /v1/assessments (service/idempotency.py), on SQLite and PostgreSQL.

The contract (the issue's, and the retry behaviour the batch client relies on): the same key
with the same body returns the original record; the same key with another body is a 409;
nothing is ever stored twice.  Row counts are read with SQL, outside the service.
"""

from __future__ import annotations

import json
import threading

import pytest
from sqlalchemy import text

from service import create_app, storage

from .test_access import auth, new_key
from .test_api import small_body


@pytest.fixture
def db_app(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url, "WARM_UP_ENGINE": False})
    yield app
    storage.storage_of(app).engine.dispose()


def rows(app) -> tuple[int, int]:
    with storage.storage_of(app).engine.connect() as conn:
        return (conn.execute(text("SELECT COUNT(*) FROM assessments")).scalar_one(),
                conn.execute(text("SELECT COUNT(*) FROM idempotency_keys")).scalar_one())


def test_a_retry_with_the_same_key_and_body_returns_the_original(db_app):
    client = db_app.test_client()
    headers = {"Idempotency-Key": "survey-2026-span-14"}
    first = client.post("/v1/assessments", json=small_body(), headers=headers)
    again = client.post("/v1/assessments", json=small_body(), headers=headers)
    assert first.status_code == again.status_code == 201
    assert again.get_data() == first.get_data() and again.headers["Location"] == first.headers["Location"]
    assert again.headers["Idempotency-Replayed"] == "true" and "Idempotency-Replayed" not in first.headers
    # the same JSON value written with other key order and spacing is the same body
    reordered = json.dumps(dict(reversed(list(small_body().items()))), indent=2)
    third = client.post("/v1/assessments", data=reordered, content_type="application/json", headers=headers)
    assert third.status_code == 201 and third.get_json()["id"] == first.get_json()["id"]
    assert rows(db_app) == (1, 1)


def test_the_same_key_with_another_body_is_a_conflict(db_app):
    client = db_app.test_client()
    headers = {"Idempotency-Key": "k-1"}
    assert client.post("/v1/assessments", json=small_body(title="first"), headers=headers).status_code == 201
    clash = client.post("/v1/assessments", json=small_body(title="second"), headers=headers)
    assert clash.status_code == 409 and clash.mimetype == "application/problem+json"
    problem = clash.get_json()
    assert problem["type"] == "urn:emf-assess:problem:idempotency-key-reused"
    assert problem["errors"] == [{"header": "Idempotency-Key", "detail": "Already used with a different body."}]
    assert rows(db_app) == (1, 1)
    other = client.post("/v1/assessments", json=small_body(title="second"), headers={"Idempotency-Key": "k-2"})
    assert other.status_code == 201 and rows(db_app) == (2, 2)
    assert client.post("/v1/assessments", json=small_body(title="second")).status_code == 201  # no key: no check
    assert rows(db_app) == (3, 2)


@pytest.mark.parametrize("key", ["", " leading", "trailing ", "x" * 256, "tab\there", "é"])
def test_a_malformed_key_is_refused_naming_the_header(db_app, key):
    r = db_app.test_client().post("/v1/assessments", json=small_body(),
                                  headers=[("Idempotency-Key", key.encode("utf-8").decode("latin-1"))])
    assert r.status_code == 400 and r.get_json()["errors"][0]["header"] == "Idempotency-Key"
    assert rows(db_app) == (0, 0)


def test_an_invalid_body_with_a_key_stores_nothing_and_frees_nothing(db_app):
    client = db_app.test_client()
    headers = {"Idempotency-Key": "k-bad"}
    bad = small_body()
    bad["frequency_hz"] = -50
    assert client.post("/v1/assessments", json=bad, headers=headers).status_code == 422
    assert rows(db_app) == (0, 0)
    assert client.post("/v1/assessments", json=small_body(), headers=headers).status_code == 201  # key still free


def test_twin_submissions_at_the_same_moment_store_one_record(db_app):
    clients = [db_app.test_client() for _ in range(6)]
    answers: list = [None] * len(clients)
    start = threading.Barrier(len(clients))

    def submit(i: int) -> None:
        start.wait()
        answers[i] = clients[i].post("/v1/assessments", json=small_body(), headers={"Idempotency-Key": "twin"})

    threads = [threading.Thread(target=submit, args=(i,)) for i in range(len(clients))]
    for t in threads:
        t.start()
    for t in threads:
        t.join(60)
    assert [a.status_code for a in answers] == [201] * len(clients)
    assert len({a.get_json()["id"] for a in answers}) == 1
    assert rows(db_app) == (1, 1)
    chain = clients[0].get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is True and chain["records_checked"] == 1


def test_keys_are_per_organisation(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url, "AUTH_REQUIRED": True, "WARM_UP_ENGINE": False})
    try:
        client = app.test_client()
        a, b = new_key(app, "org-a"), new_key(app, "org-b")
        ra = client.post("/v1/assessments", json=small_body(), headers={**auth(a), "Idempotency-Key": "same"})
        rb = client.post("/v1/assessments", json=small_body(), headers={**auth(b), "Idempotency-Key": "same"})
        assert ra.status_code == rb.status_code == 201 and ra.get_json()["id"] != rb.get_json()["id"]
        assert "Idempotency-Replayed" not in rb.headers  # B never learns of A's submission
        assert rows(app) == (2, 2)
    finally:
        storage.storage_of(app).engine.dispose()
