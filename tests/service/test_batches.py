"""Compliance batches: stored first, each item assessed exactly once, per-item problems, restarts survived.

Runs on SQLite and PostgreSQL (``db_url``).  Scenarios are invented variants of the demo
line (``service/examples``).
"""

from __future__ import annotations

import csv
import io
import json
import time
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

from service import batch_store, batches, create_app, storage

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"


def demo(step_m: float = 4.0) -> dict:
    """The demo line without its load cases on a short, coarse lateral profile (fast to assess)."""
    body = json.loads((EXAMPLES / "demo_cross_section.json").read_text(encoding="utf-8"))
    body.pop("load_cases")
    body["profile"] = {"from_m": -40.0, "to_m": 40.0, "step_m": step_m, "height_m": 1.0}
    return body


def items(n: int, invalid: set[int] = frozenset()) -> list[dict]:
    out = []
    for i in range(n):
        body = demo()
        body["reference"] = f"span-{i}"
        body["cross_section"]["circuits"][0]["current_a"] = 300.0 + 50.0 * i
        if i in invalid:
            body["cross_section"]["circuits"][0]["current_a"] = -1.0
        out.append({"name": f"span-{i}", "request": body})
    return out


@pytest.fixture
def batch_app(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url})
    yield app
    app.extensions["emf_storage"].engine.dispose()


def assessments_count(app) -> int:
    with storage.storage_of(app).sessionmaker() as session:
        return storage.count_assessments(session)


def test_batch_with_invalid_items_reports_exactly_those(batch_app):
    client = batch_app.test_client()
    created = client.post("/v1/batches", json={"title": "Rating change", "items": items(8, invalid={2, 5, 6})})
    assert created.status_code == 202
    doc = created.get_json()
    assert doc["status"] == "pending" and doc["counts"]["pending"] == 8 and assessments_count(batch_app) == 0
    assert batches.process_pending(batch_app) == 8
    doc = client.get(created.headers["Location"]).get_json()
    assert doc["status"] == "done" and doc["counts"] == {"pending": 0, "running": 0, "done": 5, "error": 3}
    errors = [i for i in doc["items"] if i["status"] == "error"]
    assert [i["name"] for i in errors] == ["span-2", "span-5", "span-6"]
    for item in errors:
        problem = item["problem"]
        assert problem["status"] == 422 and problem["errors"][0]["pointer"] == "/cross_section/circuits/0/current_a"
    for item in (i for i in doc["items"] if i["status"] == "done"):
        report = client.get(item["url"]).get_json()  # an ordinary stored assessment
        assert report["reference"] == item["name"] and report["outcome"] == item["verdict"]
        assert item["max_b_ut"] == report["maxima"]["b"]["value_ut"]
        assert item["worst_exposure_index"] == max(c["exposure_index"] for c in report["compliance"])
    assert assessments_count(batch_app) == 5
    rows = list(csv.DictReader(io.StringIO(client.get(doc["summary_url"]).get_data(as_text=True))))
    assert [r["status"] for r in rows] == [i["status"] for i in doc["items"]] and len(rows) == 8
    assert rows[2]["problem"].endswith("/cross_section/circuits/0/current_a: Must be from 0 to 100000 A.")


def test_a_worker_that_dies_mid_item_is_taken_over_and_nothing_is_duplicated(batch_app):
    client = batch_app.test_client()
    client.post("/v1/batches", json={"items": items(3)})
    make = storage.storage_of(batch_app).sessionmaker
    with make() as session, session.begin():
        dead = batch_store.claim_next(session, lease_s=300.0)  # a worker claims item 0, then is killed
    assert batches.process_pending(batch_app) == 2  # the others proceed; item 0 waits for the lease
    with make() as session, session.begin():
        assert batch_store.claim_next(session, lease_s=300.0) is None
        later = datetime.now(timezone.utc) + timedelta(seconds=301)
        takeover = batch_store.claim_next(session, lease_s=300.0, now=later)
    assert (takeover.batch_id, takeover.position) == (dead.batch_id, dead.position)
    # the dead worker's late finish is refused; the new claim finishes it once
    from service.report import compute_report

    report = compute_report(json.loads(dead.request_json), batch_app.config)
    with make() as session, session.begin():
        assert batch_store.finish_item(session, dead, report=report,
                                       canonical_request=storage.canonical_json(report["input"])) is False
    with make() as session, session.begin():
        record = batch_store.finish_item(session, takeover, report=report,
                                         canonical_request=storage.canonical_json(report["input"]),
                                         summary=batches.summary(report))
        assert record is not False
    with make() as session, session.begin():
        assert batch_store.finish_item(session, takeover, report=report,
                                       canonical_request=storage.canonical_json(report["input"])) is False
    doc = client.get(f"/v1/batches/{dead.batch_id}").get_json()
    assert doc["counts"]["done"] == 3 and assessments_count(batch_app) == 3
    assert len({i["assessment_id"] for i in doc["items"]}) == 3


def test_restart_in_the_middle_of_a_batch_resumes_it(tmp_path):
    url = f"sqlite:///{tmp_path / 'restart.sqlite3'}"
    first = create_app({"DATABASE_URL": url, "BATCH_WORKER": False})
    batch_id = first.test_client().post("/v1/batches", json={"items": items(6)}).get_json()["id"]
    batches.process_pending(first, limit=2)  # the worker stops after two items (restart)
    first.extensions["emf_storage"].engine.dispose()
    second = create_app({"DATABASE_URL": url, "BATCH_POLL_S": 0.2})  # resumes in its background thread
    client = second.test_client()
    deadline = time.monotonic() + 60
    while (doc := client.get(f"/v1/batches/{batch_id}").get_json())["status"] != "done":
        assert time.monotonic() < deadline, doc["counts"]
        time.sleep(0.1)
    assert doc["counts"]["done"] == 6 and assessments_count(second) == 6
    second.extensions["emf_storage"].engine.dispose()


@pytest.mark.parametrize("body, pointer", [
    ({"items": []}, "/items"),
    ({"items": [{"name": "a", "request": {}}, {"name": "a", "request": {}}]}, "/items/1/name"),
    ({"items": [{"name": "a"}]}, "/items/0/request"),
    ({"items": [{"name": "a", "request": {}}], "colour": "red"}, "/colour"),
])
def test_malformed_batches_are_refused_and_nothing_is_stored(batch_app, body, pointer):
    client = batch_app.test_client()
    response = client.post("/v1/batches", json=body)
    assert response.status_code == 422
    assert pointer in [e["pointer"] for e in response.get_json()["errors"]]
    with storage.storage_of(batch_app).sessionmaker() as session:
        assert session.query(storage.BatchRecord).count() == 0


def test_too_many_items_names_the_limit(db_url):
    app = create_app({"TESTING": True, "DATABASE_URL": db_url, "MAX_BATCH_ITEMS": 2})
    response = app.test_client().post("/v1/batches", json={"items": items(3)})
    assert response.status_code == 422 and "MAX_BATCH_ITEMS" in response.get_json()["errors"][0]["detail"]
    app.extensions["emf_storage"].engine.dispose()


def test_unknown_batch_is_404(batch_app):
    assert batch_app.test_client().get("/v1/batches/00000000-0000-4000-8000-000000000000").status_code == 404


def test_batch_answers_match_the_openapi_document(batch_app):
    import yaml

    from .test_openapi import SPEC_PATH, check_response

    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    client = batch_app.test_client()
    created = client.post("/v1/batches", json={"title": "t", "items": items(2, invalid={1})})
    check_response(spec, created)
    batches.process_pending(batch_app)
    check_response(spec, client.get(created.headers["Location"]))
    check_response(spec, client.post("/v1/batches", json={"items": []}))
