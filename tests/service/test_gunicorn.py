"""Several gunicorn workers (separate processes) writing to one SQLite file keep one linear chain; /metrics adds up the workers."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service import storage
from tests.service.test_api import small_body

ROOT = Path(__file__).resolve().parents[2]


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.mark.slow
def test_two_workers_concurrent_posts_keep_chain_linear(tmp_path):
    port = _free_port()
    url = "sqlite:///" + str(tmp_path / "workers.sqlite3")
    env = {**os.environ, "HOST": "127.0.0.1", "PORT": str(port), "WEB_CONCURRENCY": "2", "EMF_DATABASE_URL": url}
    server = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", str(ROOT / "deploy" / "gunicorn.conf.py")],
                              cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 90
        while True:
            assert server.poll() is None, "gunicorn exited"
            try:
                with urllib.request.urlopen(base + "/healthz", timeout=2):
                    break
            except OSError:
                assert time.monotonic() < deadline, "service did not come up"
                time.sleep(0.2)

        def post(n: int) -> int:
            body = json.dumps(small_body(title=f"Worker test {n}")).encode()
            req = urllib.request.Request(base + "/v1/assessments", data=body, method="POST",
                                         headers={"Content-Type": "application/json"})
            with urllib.request.urlopen(req, timeout=60) as resp:
                return resp.status

        with ThreadPoolExecutor(max_workers=4) as pool:
            assert list(pool.map(post, range(12))) == [201] * 12
        # /metrics adds up both workers (prometheus-client multi-process mode, deploy/gunicorn.conf.py)
        with urllib.request.urlopen(base + "/metrics", timeout=10) as resp:
            families = {f.name: f for f in text_string_to_metric_families(resp.read().decode())}
        posts = sum(s.value for s in families["emf_http_requests"].samples
                    if s.name == "emf_http_requests_total" and s.labels["route"] == "/v1/assessments"
                    and s.labels["status"] == "201")
        stored = sum(s.value for s in families["emf_assessments_stored"].samples
                     if s.name == "emf_assessments_stored_total")
        assert posts == 12 and stored == 12
        with urllib.request.urlopen(base + "/readyz", timeout=10) as resp:
            assert resp.status == 200 and json.loads(resp.read())["status"] == "ready"
    finally:
        server.terminate()
        server.wait(timeout=30)
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
