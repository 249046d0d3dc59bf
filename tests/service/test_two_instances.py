"""Two service instances on one database serve each other's assessments and batches (PostgreSQL, and SQLite).

The instances are two separately built apps (own engines and pools), as two deployments
would be; on PostgreSQL (127.0.0.1:5432) this is the several-instances set-up of docs/operations.md.
"""

from __future__ import annotations

from service import batches, create_app

from .test_api import small_body
from .test_batches import items


def test_each_instance_serves_what_the_other_stored(db_url):
    a = create_app({"TESTING": True, "DATABASE_URL": db_url})
    b = create_app({"TESTING": True, "DATABASE_URL": db_url})
    ca, cb = a.test_client(), b.test_client()
    try:
        stored = ca.post("/v1/assessments", json=small_body(title="Stored by A"))
        assert stored.status_code == 201
        url = stored.headers["Location"]
        assert cb.get(url).get_data() == ca.get(url).get_data()
        assert cb.post(url + "/verify").get_json()["verdict"] == "match"
        assert cb.post("/v1/assessments", json=small_body(title="Stored by B")).status_code == 201
        assert [r["title"] for r in ca.get("/v1/assessments").get_json()["data"]] == ["Stored by B", "Stored by A"]
        batch = ca.post("/v1/batches", json={"items": items(4)}).get_json()
        assert batches.process_pending(b, limit=2) == 2 and batches.process_pending(a) == 2  # both work on it
        doc = cb.get(f"/v1/batches/{batch['id']}").get_json()
        assert doc["status"] == "done" and doc["counts"]["done"] == 4
        chain = ca.get("/v1/audit/verify-chain").get_json()
        assert chain["ok"] is True and chain["records_checked"] == 6
    finally:
        for app in (a, b):
            app.extensions["emf_storage"].engine.dispose()
