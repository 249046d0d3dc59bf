"""2,000 concurrent submissions to 4 gunicorn worker processes (2 threads each) on one SQLite file.

Every POST answers 201 with its own id, every stored report is served back byte for byte
(same SHA-256 of the body), the table holds exactly 2,000 rows and the record chain
verifies.  The scenario is the invented 132 kV line of ``small_body`` (5 points).
"""

from __future__ import annotations

import json
from concurrent.futures import ThreadPoolExecutor

import pytest

from tests.service import gunicorn_proc as gp
from tests.service.test_api import small_body

SUBMISSIONS = 2_000
CLIENT_THREADS = 8


@pytest.mark.slow
def test_2000_concurrent_submissions_on_sqlite_are_all_stored_once(tmp_path):
    url = "sqlite:///" + str(tmp_path / "load.sqlite3")
    server = gp.start(tmp_path, url, workers=4, threads=2)
    try:
        def post(n: int) -> tuple[int, str, str]:
            status, headers, raw = gp.call("POST", server.base + "/v1/assessments",
                                           small_body(title=f"Load {n}", reference=f"L-{n}"), timeout=60)
            assert status == 201, (n, status, raw[:500])
            report = json.loads(raw)
            assert headers["Location"] == f"/v1/assessments/{report['id']}" and report["reference"] == f"L-{n}"
            return status, report["id"], gp.sha256(raw)

        def fetch(item: tuple[str, str]) -> bool:
            status, _, raw = gp.call("GET", f"{server.base}/v1/assessments/{item[0]}", timeout=60)
            return status == 200 and gp.sha256(raw) == item[1]

        with ThreadPoolExecutor(max_workers=CLIENT_THREADS) as pool:
            created = list(pool.map(post, range(SUBMISSIONS)))
            ids = {rid: digest for _, rid, digest in created}
            assert len(ids) == SUBMISSIONS  # all distinct
            served = list(pool.map(fetch, ids.items()))
        assert served.count(True) == SUBMISSIONS
        chain = gp.verify_chain(server.base)
        assert chain["ok"] is True and chain["records_checked"] == SUBMISSIONS, chain
    finally:
        gp.stop(server)
    assert gp.db_counts(url) == (SUBMISSIONS, SUBMISSIONS)  # rows, chain head sequence
