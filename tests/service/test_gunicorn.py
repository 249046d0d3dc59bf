"""Several gunicorn workers (separate processes) writing to one SQLite file keep one linear chain; /metrics adds up the workers."""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service import storage
from tests.service import gunicorn_proc as gp
from tests.service.test_api import small_body


@pytest.mark.slow
def test_two_workers_concurrent_posts_keep_chain_linear(tmp_path):
    url = "sqlite:///" + str(tmp_path / "workers.sqlite3")
    server = gp.start(tmp_path, url, workers=2)
    base = server.base
    try:
        def post(n: int) -> int:
            return gp.call("POST", base + "/v1/assessments", small_body(title=f"Worker test {n}"), timeout=60)[0]

        with ThreadPoolExecutor(max_workers=4) as pool:
            assert list(pool.map(post, range(12))) == [201] * 12
        # /metrics adds up both workers (prometheus-client multi-process mode, deploy/gunicorn.conf.py)
        status, _, raw = gp.call("GET", base + "/metrics", timeout=10)
        assert status == 200
        families = {f.name: f for f in text_string_to_metric_families(raw.decode())}
        posts = sum(s.value for s in families["emf_http_requests"].samples
                    if s.name == "emf_http_requests_total" and s.labels["route"] == "/v1/assessments"
                    and s.labels["status"] == "201")
        stored = sum(s.value for s in families["emf_assessments_stored"].samples
                     if s.name == "emf_assessments_stored_total")
        assert posts == 12 and stored == 12
        assert gp.get_json(base + "/readyz", timeout=10)["status"] == "ready"
    finally:
        gp.stop(server)
    engine = storage.make_engine(url)
    from sqlalchemy.orm import Session

    with Session(engine) as session:
        chain = list(storage.iter_chain(session))
        assert [r.sequence for r in chain] == list(range(1, 13))
        prev = storage.GENESIS_DIGEST
        for rec in chain:
            assert rec.prev_digest == prev
            assert rec.digest == storage.record_digest(rec.request_json, rec.report_json, prev)
            prev = rec.digest
    engine.dispose()
