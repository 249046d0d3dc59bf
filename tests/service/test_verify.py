"""POST /v1/assessments/{id}/verify and GET /v1/audit/verify-chain.

Tamper evidence is checked the way an auditor would meet it: rows changed or deleted
directly in the database with SQL (SQLAlchemy Core statements, which bypass the ORM's
refusal to update stored records), on SQLite and on PostgreSQL (``db_url`` fixture).
The digest itself is recomputed here from its published definition (SHA-256 of
request + newline + report + newline + prev_digest, DEVELOPERS.md) with hashlib,
independently of service.storage.
"""

from __future__ import annotations

import copy
import hashlib
import json
import uuid
from pathlib import Path

import pytest
from sqlalchemy import delete, select, update

from service import create_app
from service.storage import AssessmentRecord, storage_of

DEMO = Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_cross_section.json"


def small_body(title: str = "verify test") -> dict:
    body = json.loads(DEMO.read_text(encoding="utf-8"))
    body["title"] = title
    body["profile"] = {"from_m": -40.0, "to_m": 40.0, "step_m": 5.0, "height_m": 1.0}
    return body


@pytest.fixture
def db_app(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url})
    yield app
    storage_of(app).engine.dispose()


def post(client, title: str = "verify test") -> dict:
    r = client.post("/v1/assessments", json=small_body(title))
    assert r.status_code == 201, r.get_data(as_text=True)
    return r.get_json()


def rows(app) -> list[dict]:
    """Every stored record as a plain dict of its columns, in sequence order."""
    with storage_of(app).engine.connect() as conn:
        result = conn.execute(select(AssessmentRecord.__table__).order_by(AssessmentRecord.sequence))
        return [dict(r._mapping) for r in result]


def execute(app, statement) -> None:
    with storage_of(app).engine.begin() as conn:
        conn.execute(statement)


def sha256_link(request_json: str, report_json: str, prev_digest: str) -> str:
    # Definition from DEVELOPERS.md "Storage and digests", recomputed with hashlib.
    return hashlib.sha256(f"{request_json}\n{report_json}\n{prev_digest}".encode()).hexdigest()


def test_unchanged_record_matches_and_verify_changes_nothing(db_app):
    client = db_app.test_client()
    report = post(client)
    before = rows(db_app)
    r = client.post(f"/v1/assessments/{report['id']}/verify")
    assert r.status_code == 200
    body = r.get_json()
    assert body["verdict"] == "match"
    assert body["record"]["digest_matches"] and body["record"]["consistent"]
    assert body["record"]["stored_digest"] == report["digest"]
    # The digest the service reports equals the published definition, recomputed here.
    row = before[0]
    assert sha256_link(row["request_json"], row["report_json"], row["prev_digest"]) == report["digest"]
    rec = body["recomputation"]
    assert rec["matches"] is True and rec["moved"] == [] and rec["values_compared"] > 17 * 10
    assert rec["tolerance"] == {"rtol": 1e-9, "atol": 1e-12, "rule": rec["tolerance"]["rule"]}
    assert rows(db_app) == before  # verify is read-only
    assert client.get("/v1/audit/verify-chain").get_json()["ok"] is True
    assert rows(db_app) == before


def test_altered_report_row_is_detected(db_app):
    client = db_app.test_client()
    report = post(client)
    row = rows(db_app)[0]
    stored = json.loads(row["report_json"])
    stored["maxima"]["b"]["value_ut"] *= 0.5  # someone halves the reported maximum in the database
    execute(db_app, update(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(report["id"]))
            .values(report_json=json.dumps(stored, separators=(",", ":"), ensure_ascii=False)))
    body = client.post(f"/v1/assessments/{report['id']}/verify").get_json()
    assert body["verdict"] == "tampered"
    assert body["record"]["digest_matches"] is False
    assert any("altered" in p for p in body["record"]["problems"])
    # The recomputation shows which value no longer agrees with the physics.
    assert {"path": "/maxima/b/value_ut", "stored": stored["maxima"]["b"]["value_ut"],
            "recomputed": report["maxima"]["b"]["value_ut"]} in body["recomputation"]["moved"]
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is False
    assert chain["first_break"]["sequence"] == 1 and chain["first_break"]["id"] == report["id"]


def test_altered_undigested_column_is_detected(db_app):
    # outcome is a column used for filtering; the digest covers the report, and verify
    # checks that the column still agrees with it.
    client = db_app.test_client()
    report = post(client)
    assert report["outcome"] == "fail"
    execute(db_app, update(AssessmentRecord.__table__).values(outcome="pass"))
    body = client.post(f"/v1/assessments/{report['id']}/verify").get_json()
    assert body["verdict"] == "tampered"
    assert body["record"]["digest_matches"] is True
    assert any("column outcome" in p for p in body["record"]["problems"])


def test_chain_with_deleted_row_breaks_at_its_successor(db_app):
    client = db_app.test_client()
    ids = [post(client, f"record {k}")["id"] for k in range(4)]
    assert client.get("/v1/audit/verify-chain").get_json()["ok"] is True
    execute(db_app, delete(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[1])))
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is False
    assert chain["records_checked"] == 3
    first = chain["first_break"]
    assert (first["sequence"], first["id"]) == (3, ids[2])
    assert any("sequence 2 missing" in r for r in first["reasons"])
    assert any("prev_digest" in r for r in first["reasons"])
    assert chain["breaks_found"] == 1  # records 1 and 4 are intact


def test_chain_with_last_row_deleted_breaks_at_the_head(db_app):
    client = db_app.test_client()
    ids = [post(client, f"record {k}")["id"] for k in range(3)]
    execute(db_app, delete(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[2])))
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is False
    assert chain["first_break"]["sequence"] == 3 and chain["first_break"]["id"] is None
    assert "deleted at the end" in chain["first_break"]["reasons"][0]


def test_rewritten_row_with_fresh_digest_breaks_the_next_link(db_app):
    # An editor who also recomputes the altered row's digest still breaks the chain:
    # the next record's prev_digest points at the original digest.
    client = db_app.test_client()
    ids = [post(client, f"record {k}")["id"] for k in range(3)]
    row = rows(db_app)[1]
    report = json.loads(row["report_json"])
    report["title"] = "record 1 (edited)"
    new_json = json.dumps(report, separators=(",", ":"), ensure_ascii=False)
    execute(db_app, update(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[1])).values(
        report_json=new_json, title=report["title"],
        digest=sha256_link(row["request_json"], new_json, row["prev_digest"])))
    assert client.post(f"/v1/assessments/{ids[1]}/verify").get_json()["record"]["consistent"] is True
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert (chain["first_break"]["sequence"], chain["first_break"]["id"]) == (3, ids[2])
    assert any("prev_digest" in r for r in chain["first_break"]["reasons"])


def test_empty_chain_is_ok(client):
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is True and chain["records_checked"] == 0 and chain["first_break"] is None


def test_verify_unknown_id_is_404_problem(client):
    r = client.post(f"/v1/assessments/{uuid.uuid4()}/verify")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


def _scaled_engine(monkeypatch, factor: float) -> None:
    """Make the engine's B come out ``factor`` times larger (a changed engine)."""
    import dataclasses

    from models import section_sets

    original = section_sets.evaluate_cross_section

    def changed(*args, **kwargs):
        result = original(*args, **kwargs)
        return dataclasses.replace(result, b_phasor_t=result.b_phasor_t * factor)

    monkeypatch.setattr(section_sets, "evaluate_cross_section", changed)


def test_changed_engine_lists_the_values_that_moved(client, monkeypatch):
    report = post(client)
    _scaled_engine(monkeypatch, 1.0 + 1e-6)  # far above rtol 1e-9
    body = client.post(f"/v1/assessments/{report['id']}/verify").get_json()
    assert body["verdict"] == "mismatch" and body["record"]["consistent"] is True
    rec = body["recomputation"]
    moved = {m["path"]: m for m in rec["moved"]}
    assert "/maxima/b/value_ut" in moved
    m = moved["/maxima/b/value_ut"]
    assert m["stored"] == report["maxima"]["b"]["value_ut"]
    assert m["recomputed"] == pytest.approx(m["stored"] * (1 + 1e-6), rel=1e-12)
    assert "/points/0/b_ut" in moved
    assert not any(p.startswith("/points/0/e_") for p in moved)  # E did not change
    assert rec["moved_count"] >= len(rec["moved"])


def test_change_within_tolerance_still_matches(client, monkeypatch):
    report = post(client)
    _scaled_engine(monkeypatch, 1.0 + 1e-12)  # below rtol 1e-9: rounding-level change
    body = client.post(f"/v1/assessments/{report['id']}/verify").get_json()
    assert body["verdict"] == "match", body["recomputation"]["moved"][:3]


def test_compare_reports_rules():
    from service.audit import compare_reports

    stored = {"id": "a", "points": [{"b_ut": 1.0, "components": {"b_vertical_ut": 1e-15,
                                                                  "b_vertical_phase_deg": 10.0,
                                                                  "b_horizontal_ut": 2.0,
                                                                  "b_horizontal_phase_deg": 179.9999999999}}],
              "outcome": "pass"}
    fresh = copy.deepcopy(stored)
    fresh["id"] = "b"                                                   # not recomputed: ignored
    fresh["points"][0]["components"]["b_vertical_phase_deg"] = -170.0  # phase of a ~0 component
    fresh["points"][0]["components"]["b_horizontal_phase_deg"] = -179.9999999999  # same angle mod 360
    n, diffs = compare_reports(stored, fresh)
    assert diffs == [] and n == 6
    fresh["outcome"] = "fail"
    fresh["points"].append({"b_ut": 2.0})
    _, diffs = compare_reports(stored, fresh)
    assert {d["path"] for d in diffs} == {"/points", "/outcome"}


def test_route_assessment_posted_and_verified(client):
    # The lon/lat demo route through the API (grid coarsened for speed): verify recomputes
    # it through the route schema and builder and finds it unchanged.
    body = json.loads((DEMO.parent / "demo_route_lonlat.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 10.0
    created = client.post("/v1/assessments", json=body)
    assert created.status_code == 201, created.get_data(as_text=True)
    report = created.get_json()
    verified = client.post(f"/v1/assessments/{report['id']}/verify").get_json()
    assert verified["verdict"] == "match", verified["recomputation"].get("moved", [])[:3]
    assert verified["recomputation"]["values_compared"] > 1000
    geo = client.get(f"/v1/assessments/{report['id']}/geojson")
    assert geo.status_code == 200 and geo.mimetype == "application/geo+json"


# --------------------------------------------------------------------------- chain check in pages


def _pages(client, limit: int) -> list[dict]:
    pages, start = [], 1
    while start is not None:
        page = client.get(f"/v1/audit/verify-chain?from_sequence={start}&limit={limit}").get_json()
        pages.append(page)
        start = page["next_from_sequence"]
    return pages


def test_chain_in_pages_covers_every_record_once(db_app):
    client = db_app.test_client()
    for k in range(5):
        post(client, f"record {k}")
    pages = _pages(client, 2)
    assert [(p["from_sequence"], p["to_sequence"], p["complete"]) for p in pages] == [
        (1, 2, False), (3, 4, False), (5, 5, True)]
    assert sum(p["records_checked"] for p in pages) == 5 and all(p["ok"] for p in pages)
    whole = client.get("/v1/audit/verify-chain").get_json()
    assert (whole["from_sequence"], whole["to_sequence"], whole["complete"], whole["next_from_sequence"]) == (
        1, 5, True, None)


def test_paged_check_finds_the_same_breaks_as_the_whole_chain(db_app):
    # A row deleted at a page boundary (sequence 3 is the predecessor of page 4..5) and an
    # altered row inside a page: every break the whole-chain check reports appears on a page.
    client = db_app.test_client()
    ids = [post(client, f"record {k}")["id"] for k in range(6)]
    execute(db_app, delete(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[2])))
    execute(db_app, update(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[4]))
            .values(title="edited"))
    whole = client.get("/v1/audit/verify-chain").get_json()
    paged = [b for p in _pages(client, 3) for b in p["breaks"]]
    assert {b["sequence"] for b in whole["breaks"]} <= {b["sequence"] for b in paged}
    page = client.get("/v1/audit/verify-chain?from_sequence=4&limit=2").get_json()
    assert page["ok"] is False and page["first_break"]["sequence"] == 4
    assert any("no record at sequence 3" in r for r in page["first_break"]["reasons"])


def test_page_before_the_head_does_not_check_the_head(db_app):
    client = db_app.test_client()
    ids = [post(client, f"record {k}")["id"] for k in range(3)]
    execute(db_app, delete(AssessmentRecord.__table__).where(AssessmentRecord.id == uuid.UUID(ids[2])))
    first = client.get("/v1/audit/verify-chain?limit=2").get_json()
    assert first["ok"] is True and first["complete"] is False and first["next_from_sequence"] == 3
    last = client.get("/v1/audit/verify-chain?from_sequence=3").get_json()
    assert last["ok"] is False and "deleted at the end" in last["first_break"]["reasons"][0]


@pytest.mark.parametrize("query, parameter", [
    ("from_sequence=0", "from_sequence"), ("from_sequence=abc", "from_sequence"),
    ("from_sequence=9", "from_sequence"), ("limit=0", "limit"), ("limit=100001", "limit"),
])
def test_bad_page_parameters_are_400_naming_the_parameter(client, query, parameter):
    post(client)
    r = client.get(f"/v1/audit/verify-chain?{query}")
    assert r.status_code == 400 and r.mimetype == "application/problem+json"
    assert [e["parameter"] for e in r.get_json()["errors"]] == [parameter]
