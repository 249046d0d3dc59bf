"""Access control: API keys, organisations and roles (service/access.py), with access control on.

Independent checks: the stored hash is recomputed here with ``hashlib.scrypt`` (RFC 7914)
from the documented parameters; ``WWW-Authenticate`` follows RFC 6750, section 3; "another
organisation's id answers like a missing id" is checked by comparing the two answers.
"""

from __future__ import annotations

import base64
import hashlib
import io
import logging
import re

import pytest
from sqlalchemy import select, text, update

from service import access, batches, create_app, storage

from .test_api import small_body
from .test_batches import items

KEY_RE = re.compile(r"^emf_[0-9a-f]{16}\.[A-Za-z0-9_-]{43}$")


@pytest.fixture
def secured(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url, "AUTH_REQUIRED": True, "WARM_UP_ENGINE": False})
    yield app
    storage.storage_of(app).engine.dispose()


def new_key(app, tenant: str, role: str = "submit") -> str:
    """A key made with the documented command (``flask --app service keys create``), as printed."""
    result = app.test_cli_runner().invoke(args=["keys", "create", "--tenant", tenant, "--role", role])
    assert result.exit_code == 0, result.output
    token = result.stdout.strip().splitlines()[-1]
    assert KEY_RE.match(token)
    return token


def auth(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def count_rows(app) -> int:
    with storage.storage_of(app).engine.connect() as conn:
        return conn.execute(text("SELECT COUNT(*) FROM assessments")).scalar_one()


def test_missing_malformed_unknown_keys_get_401_with_a_bearer_challenge(secured):
    client = secured.test_client()
    token = new_key(secured, "org-a")
    forged = token[:-4] + ("AAAA" if not token.endswith("AAAA") else "BBBB")
    cases = [({}, None), ({"Authorization": "Basic dXNlcjpwdw=="}, "invalid_request"),
             ({"Authorization": "Bearer"}, "invalid_request"), (auth("not-a-key"), "invalid_token"),
             (auth(forged), "invalid_token"), (auth("emf_0123456789abcdef." + "A" * 43), "invalid_token")]
    for headers, error in cases:
        for method, path in (("get", "/v1/assessments"), ("post", "/v1/assessments"), ("post", "/v1/evaluate"),
                             ("get", "/v1/audit/verify-chain"), ("post", "/v1/batches")):
            r = getattr(client, method)(path, json=small_body(), headers=headers)
            assert r.status_code == 401, (headers, path)
            assert r.mimetype == "application/problem+json" and r.get_json()["status"] == 401
            challenge = r.headers["WWW-Authenticate"]
            assert challenge.startswith('Bearer realm="emf-assess"')
            assert (f'error="{error}"' in challenge) if error else ("error=" not in challenge)
    assert count_rows(secured) == 0


def test_open_endpoints_need_no_key(secured):
    client = secured.test_client()
    for path in ("/healthz", "/readyz", "/openapi.json", "/metrics", "/v1/reference-levels"):
        assert client.get(path).status_code == 200, path


def test_the_key_is_stored_only_as_a_salted_scrypt_hash(secured):
    token = new_key(secured, "org-a")
    key_id, secret = token[len("emf_"):].split(".")
    with storage.storage_of(secured).engine.connect() as conn:
        row = conn.execute(select(storage.ApiKey).where(storage.ApiKey.key_id == key_id)).one()
        dump = "\n".join(str(v) for r in conn.execute(text("SELECT * FROM api_keys")) for v in r)
    assert secret not in dump and token not in dump
    expected = hashlib.scrypt(secret.encode(), salt=bytes.fromhex(row.salt), n=2**14, r=8, p=1, dklen=32).hex()
    assert row.secret_hash == expected  # RFC 7914 scrypt, recomputed with hashlib
    assert len(bytes.fromhex(row.salt)) == 16 and len(base64.urlsafe_b64decode(secret + "=")) == 32
    other = new_key(secured, "org-a")
    with storage.storage_of(secured).engine.connect() as conn:
        salts = conn.execute(text("SELECT salt FROM api_keys")).scalars().all()
    assert len(set(salts)) == 2 and other != token


def test_each_organisation_sees_only_its_own_assessments(secured):
    client = secured.test_client()
    a, b = new_key(secured, "org-a"), new_key(secured, "org-b")
    mine = client.post("/v1/assessments", json=small_body(title="A's line"), headers=auth(a))
    theirs = client.post("/v1/assessments", json=small_body(title="B's line"), headers=auth(b))
    assert mine.status_code == theirs.status_code == 201
    b_id = theirs.get_json()["id"]
    missing = "00000000-0000-4000-8000-000000000000"
    for suffix, method in (("", "get"), ("/report", "get"), ("/report?format=html", "get"),
                           ("/report?format=csv", "get"), ("/geojson", "get"), ("/geopackage", "get"),
                           ("/geotiff", "get"), ("/verify", "post")):
        other = getattr(client, method)(f"/v1/assessments/{b_id}{suffix}", headers=auth(a))
        absent = getattr(client, method)(f"/v1/assessments/{missing}{suffix}", headers=auth(a))
        assert other.status_code == absent.status_code == 404, suffix
        strip = lambda d: {k: v.replace(b_id, "ID").replace(missing, "ID") if isinstance(v, str) else v  # noqa: E731
                           for k, v in d.items() if k != "request_id"}
        assert strip(other.get_json()) == strip(absent.get_json()), suffix  # no hint that the id exists
        assert b"B's line" not in other.get_data()
    listed = client.get("/v1/assessments", headers=auth(a)).get_json()["data"]
    assert [r["title"] for r in listed] == ["A's line"]
    assert client.get(f"/v1/assessments?reference={small_body()['reference']}",
                      headers=auth(a)).get_json()["pagination"]["count"] == 1
    assert client.get(f"/v1/assessments/{b_id}", headers=auth(b)).status_code == 200


def test_batches_belong_to_the_organisation_that_submitted_them(secured):
    client = secured.test_client()
    a, b = new_key(secured, "org-a"), new_key(secured, "org-b")
    batch = client.post("/v1/batches", json={"items": items(3)}, headers=auth(b))
    assert batch.status_code == 202
    assert batches.process_pending(secured) == 3
    batch_id = batch.get_json()["id"]
    assert client.get(f"/v1/batches/{batch_id}", headers=auth(a)).status_code == 404
    assert client.get(f"/v1/batches/{batch_id}/summary", headers=auth(a)).status_code == 404
    doc = client.get(f"/v1/batches/{batch_id}", headers=auth(b)).get_json()
    assert doc["counts"]["done"] == 3
    for item in doc["items"]:  # the batch's assessments are B's
        assert client.get(item["url"], headers=auth(b)).status_code == 200
        assert client.get(item["url"], headers=auth(a)).status_code == 404
    assert client.get("/v1/assessments", headers=auth(a)).get_json()["data"] == []


def test_a_read_key_reads_verifies_and_evaluates_but_cannot_submit(secured):
    client = secured.test_client()
    submit, read = new_key(secured, "org-a"), new_key(secured, "org-a", "read")
    stored = client.post("/v1/assessments", json=small_body(), headers=auth(submit)).get_json()
    for path, body in (("/v1/assessments", small_body()), ("/v1/batches", {"items": items(1)})):
        r = client.post(path, json=body, headers=auth(read))
        assert r.status_code == 403 and 'error="insufficient_scope"' in r.headers["WWW-Authenticate"]
    assert count_rows(secured) == 1
    assert client.get(f"/v1/assessments/{stored['id']}", headers=auth(read)).status_code == 200
    assert client.post(f"/v1/assessments/{stored['id']}/verify", headers=auth(read)).get_json()["verdict"] == "match"
    assert client.post("/v1/evaluate", json=small_body(), headers=auth(read)).status_code == 200
    assert count_rows(secured) == 1  # evaluate stores nothing


def test_a_revoked_key_is_refused_at_once(secured):
    client = secured.test_client()
    token = new_key(secured, "org-a")
    assert client.get("/v1/assessments", headers=auth(token)).status_code == 200  # verified and remembered
    key_id = token[len("emf_"):].split(".")[0]
    result = secured.test_cli_runner().invoke(args=["keys", "revoke", key_id])
    assert result.exit_code == 0, result.output
    assert client.get("/v1/assessments", headers=auth(token)).status_code == 401
    again = secured.test_cli_runner().invoke(args=["keys", "revoke", key_id])
    assert again.exit_code != 0 and "No active key" in again.output
    listing = secured.test_cli_runner().invoke(args=["keys", "list"]).stdout
    assert key_id in listing and token.split(".")[1] not in listing


def test_keys_never_reach_logs_or_responses(secured):
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(secured.logger.handlers[0].formatter if secured.logger.handlers else None)
    secured.logger.addHandler(handler)
    try:
        client = secured.test_client()
        token = new_key(secured, "org-a")
        secret = token.split(".")[1]
        answers = [client.post("/v1/assessments", json=small_body(), headers=auth(token)),
                   client.get("/v1/assessments", headers=auth(token)),
                   client.get("/v1/assessments", headers=auth(token + "x")),
                   client.post("/v1/assessments", json={"title": 1}, headers=auth(token))]
        answers.append(client.get(answers[0].headers["Location"] + "/report?format=html", headers=auth(token)))
        for r in answers:
            assert secret not in r.get_data(as_text=True)
            assert all(secret not in v for _, v in r.headers.items())
        logged = stream.getvalue()
        assert "request" in logged and secret not in logged and token[:24] not in logged
    finally:
        secured.logger.removeHandler(handler)


def test_moving_a_record_to_another_organisation_breaks_the_chain(secured):
    client = secured.test_client()
    a, b = new_key(secured, "org-a"), new_key(secured, "org-b")
    b_id = client.post("/v1/assessments", json=small_body(title="B's"), headers=auth(b)).get_json()["id"]
    client.post("/v1/assessments", json=small_body(title="A's"), headers=auth(a))
    assert client.get("/v1/audit/verify-chain", headers=auth(a)).get_json()["ok"] is True
    with storage.storage_of(secured).engine.begin() as conn:
        conn.execute(update(storage.AssessmentRecord).where(storage.AssessmentRecord.sequence == 1)
                     .values(tenant="org-a"))
    # now A would see it: but its digest no longer matches, and the audit says so
    chain_a = client.get("/v1/audit/verify-chain", headers=auth(a)).get_json()
    assert chain_a["ok"] is False and chain_a["first_break"]["sequence"] == 1
    assert chain_a["first_break"]["id"] == b_id  # now recorded as A's: named to A
    verify = client.post(f"/v1/assessments/{b_id}/verify", headers=auth(a)).get_json()
    assert verify["verdict"] == "tampered"
    chain_b = client.get("/v1/audit/verify-chain", headers=auth(b)).get_json()
    assert chain_b["first_break"]["id"] is None  # another organisation's record is not named
    assert "another organisation" in chain_b["first_break"]["reasons"][-1]


def test_auth_off_keeps_the_single_user_contract(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url, "AUTH_REQUIRED": False, "WARM_UP_ENGINE": False})
    try:
        client = app.test_client()
        r = client.post("/v1/assessments", json=small_body())
        assert r.status_code == 201 and "WWW-Authenticate" not in r.headers
        assert client.get(r.headers["Location"]).status_code == 200
        with storage.storage_of(app).engine.connect() as conn:
            assert conn.execute(text("SELECT tenant FROM assessments")).scalar_one() is None
    finally:
        storage.storage_of(app).engine.dispose()


def test_access_control_is_on_by_default():
    from service.config import DEFAULTS

    assert DEFAULTS["AUTH_REQUIRED"] is True


def test_organisation_names_are_checked():
    for bad in ("", " a", "a b", "x" * 101, "../etc", "a;drop"):
        with pytest.raises(ValueError, match="organisation name"):
            access.check_tenant(bad)
    assert access.check_tenant("north-grid.ops_2") == "north-grid.ops_2"
