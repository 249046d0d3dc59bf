"""Two gunicorn instances (separate masters, 2 worker processes each) on one PostgreSQL database.

Clients alternate between the instances for 2,000 submissions while each instance also
processes a batch; afterwards each instance serves what was stored through the other:
the report by id (same SHA-256 of the body), the list, the recomputation check and the
batch.  Row count and chain are exact.  This is the several-instances set-up of
docs/operations.md; PostgreSQL at 127.0.0.1:5432 (``postgres_schema_url``: own schema).
Scenarios: the invented 132 kV line of ``small_body`` and the demo-line batch items.
"""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor

import pytest

from tests.service import gunicorn_proc as gp
from tests.service.conftest import drop_service_tables
from tests.service.test_api import small_body
from tests.service.test_batches import items

SUBMISSIONS = 2_000
CLIENT_THREADS = 8
BATCH_ITEMS = 4


@pytest.fixture
def pg_url(postgres_schema_url):
    drop_service_tables(postgres_schema_url)
    yield postgres_schema_url
    drop_service_tables(postgres_schema_url)


@pytest.mark.slow
@pytest.mark.postgres
def test_two_instances_share_postgresql_and_serve_each_others_records(tmp_path, pg_url):
    env = {"EMF_BATCH_POLL_S": "0.2"}
    a = gp.start(tmp_path, pg_url, name="a", workers=2, threads=2, env=env)
    try:
        b = gp.start(tmp_path, pg_url, name="b", workers=2, threads=2, env=env)
    except BaseException:
        gp.stop(a)
        raise
    instances = (a.base, b.base)
    try:
        batch_ids = []
        for k, base in enumerate(instances):
            body = {"title": f"Batch via {'ab'[k]}", "items": items(BATCH_ITEMS)}
            status, _, raw = gp.call("POST", base + "/v1/batches", body)
            assert status == 202, raw[:500]
            batch_ids.append(json.loads(raw)["id"])

        def post(n: int) -> tuple[int, str, str]:
            status, _, raw = gp.call("POST", instances[n % 2] + "/v1/assessments",
                                     small_body(title=f"Shared {n}", reference=f"S-{n}"), timeout=60)
            assert status == 201, (n, status, raw[:500])
            return n, json.loads(raw)["id"], gp.sha256(raw)

        def fetch_from_other(item: tuple[int, str, str]) -> bool:
            n, rid, digest = item
            status, _, raw = gp.call("GET", f"{instances[1 - n % 2]}/v1/assessments/{rid}", timeout=60)
            return status == 200 and gp.sha256(raw) == digest

        def verify_on_other(item: tuple[int, str, str]) -> str:
            n, rid, _ = item
            status, _, raw = gp.call("POST", f"{instances[1 - n % 2]}/v1/assessments/{rid}/verify", timeout=60)
            assert status == 200, raw[:500]
            return json.loads(raw)["verdict"]

        with ThreadPoolExecutor(max_workers=CLIENT_THREADS) as pool:
            created = list(pool.map(post, range(SUBMISSIONS)))
            assert len({rid for _, rid, _ in created}) == SUBMISSIONS
            assert list(pool.map(fetch_from_other, created)).count(True) == SUBMISSIONS
            sample = created[::40]  # 50 recomputations, half of them stored through each instance
            assert list(pool.map(verify_on_other, sample)) == ["match"] * len(sample)

        # each batch is served, finished, by the instance it was not submitted to
        expected = {rid for _, rid, _ in created}
        for k, batch_id in enumerate(batch_ids):
            other = instances[1 - k]
            doc = gp.wait_batch_done(other, batch_id)
            assert doc["counts"]["done"] == BATCH_ITEMS and doc["item_count"] == BATCH_ITEMS
            for item in doc["items"]:
                report = gp.get_json(other + item["url"])
                assert report["reference"] == item["name"] and report["id"] == item["assessment_id"]
                expected.add(item["assessment_id"])

        listed = [gp.list_all_ids(base) for base in instances]
        assert listed[0] == listed[1]
        assert len(listed[0]) == SUBMISSIONS + 2 * BATCH_ITEMS and set(listed[0]) == expected
        for base in instances:
            chain = gp.verify_chain(base)
            assert chain["ok"] is True and chain["records_checked"] == SUBMISSIONS + 2 * BATCH_ITEMS, chain
    finally:
        try:
            gp.stop(a)
        finally:
            gp.stop(b)
    assert gp.db_counts(pg_url) == (SUBMISSIONS + 2 * BATCH_ITEMS,) * 2
