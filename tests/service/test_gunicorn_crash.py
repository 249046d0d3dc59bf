"""kill -9 of the gunicorn master and all its workers in the middle of a burst of submissions on SQLite.

Every submission acknowledged with 201 before the kill must survive intact; nothing may be
half-written.  After a restart on the same file: ``PRAGMA integrity_check`` says ok
(SQLite documentation, "PRAGMA integrity_check"), every acknowledged id is served with the
same bytes and verifies (digest recomputed, record consistent, recomputation matches),
the chain verifies, the row count equals the chain head's sequence and exceeds the
acknowledged count by at most the submissions in flight (one per client thread), and the
restarted service appends to the chain.  Scenario: the invented line of ``small_body``.
"""

from __future__ import annotations

import json
import sqlite3
import threading
import time

import pytest

from tests.service import gunicorn_proc as gp
from tests.service.test_api import small_body

CLIENT_THREADS = 8
KILL_AFTER = 200  # acknowledged submissions before the kill


@pytest.mark.slow
def test_kill_9_mid_burst_loses_no_acknowledged_submission(tmp_path):
    path = tmp_path / "crash.sqlite3"
    url = f"sqlite:///{path}"
    server = gp.start(tmp_path, url, name="before", workers=2, threads=2)
    acked: dict[str, str] = {}  # id -> SHA-256 of the 201 body
    digests: dict[str, str] = {}  # id -> the report's digest member
    unexpected: list[str] = []
    lock, killed = threading.Lock(), threading.Event()

    def submit(k: int) -> None:
        n = 0
        while not killed.is_set():
            n += 1
            try:
                status, _, raw = gp.call("POST", server.base + "/v1/assessments",
                                         small_body(title=f"Burst {k}-{n}", reference=f"B-{k}-{n}"), timeout=60)
            except Exception as exc:  # the connection dies with the server
                if not killed.is_set():
                    with lock:
                        unexpected.append(f"thread {k}: {exc!r}")
                return
            with lock:
                if status == 201:
                    report = json.loads(raw)
                    acked[report["id"]], digests[report["id"]] = gp.sha256(raw), report["digest"]
                else:
                    unexpected.append(f"thread {k}: {status} {raw[:300]!r}")

    threads = [threading.Thread(target=submit, args=(k,), daemon=True) for k in range(CLIENT_THREADS)]
    try:
        for t in threads:
            t.start()
        deadline = time.monotonic() + 60
        while len(acked) < KILL_AFTER and not unexpected:
            assert time.monotonic() < deadline, f"only {len(acked)} submissions acknowledged:\n{server.log_tail()}"
            time.sleep(0.01)
        killed.set()
        gp.kill_group(server)  # master and workers, SIGKILL, while requests are in flight
    finally:
        killed.set()
        gp.kill_group(server)
        for t in threads:
            t.join(timeout=70)
    assert not unexpected, unexpected[:5]
    assert not any(t.is_alive() for t in threads)
    with lock:
        acked_now, digests_now = dict(acked), dict(digests)
    assert len(acked_now) >= KILL_AFTER

    after = gp.start(tmp_path, url, name="after", workers=2, threads=2)
    try:
        with sqlite3.connect(path) as conn:
            assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        rows, head = gp.db_counts(url)
        assert rows == head, "a record without its chain-head update, or the reverse"
        assert len(acked_now) <= rows <= len(acked_now) + CLIENT_THREADS
        for rid, body_sha in acked_now.items():
            status, _, raw = gp.call("GET", f"{after.base}/v1/assessments/{rid}")
            assert status == 200 and gp.sha256(raw) == body_sha, rid
            checked = json.loads(gp.call("POST", f"{after.base}/v1/assessments/{rid}/verify")[2])
            record = checked["record"]
            assert checked["verdict"] == "match", checked
            assert record["consistent"] and record["digest_matches"] and record["stored_digest"] == digests_now[rid]
        chain = gp.verify_chain(after.base)
        assert chain["ok"] is True and chain["records_checked"] == rows, chain
        assert gp.call("POST", after.base + "/v1/assessments", small_body(title="After restart"))[0] == 201
        chain = gp.verify_chain(after.base)
        assert chain["ok"] is True and chain["records_checked"] == rows + 1, chain
    finally:
        gp.stop(after)
