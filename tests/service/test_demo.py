"""The quick-start demo (``python -m service.demo``, run by ``make demo``) end to end under gunicorn."""

from __future__ import annotations

import json
import os
import queue
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def _busy_port() -> tuple[socket.socket, int]:
    sock = socket.socket()
    sock.bind(("127.0.0.1", 0))
    sock.listen(1)
    return sock, sock.getsockname()[1]


@pytest.mark.slow
def test_demo_starts_submits_prints_id_and_url(tmp_path):
    blocker, busy = _busy_port()  # the demo must notice and move to another port
    env = {**os.environ, "EMF_PORT": str(busy), "WEB_CONCURRENCY": "1", "EMF_AUTH_REQUIRED": "true",
           "EMF_DATABASE_URL": "sqlite:///" + str(tmp_path / "demo.sqlite3")}  # the quick start: keys on
    proc = subprocess.Popen([sys.executable, "-m", "service.demo"], cwd=ROOT, env=env, text=True,
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
    lines: queue.Queue[str] = queue.Queue()

    def read() -> None:
        with proc.stdout:
            for line in proc.stdout:
                lines.put(line)

    reader = threading.Thread(target=read, daemon=True)
    reader.start()
    seen: dict[str, str] = {}
    try:
        deadline = time.monotonic() + 120
        while "Serving" not in seen and time.monotonic() < deadline:
            try:
                line = lines.get(timeout=1)
            except queue.Empty:
                assert proc.poll() is None, "demo exited early"
                continue
            key = line.split(":", 1)[0].split()[0] if line.strip() else ""
            seen[key] = line.strip()
        assert "Serving" in seen, seen
        assert f"Port {busy} is busy" in seen["Port"]
        assessment_id = seen["Assessment"].split(":", 1)[1].strip()
        json_url = seen["JSON"].split(None, 1)[1]
        assert json_url.endswith("/v1/assessments/" + assessment_id)
        key = seen["Demo"].split(":", 1)[1].strip()  # printed once
        with pytest.raises(urllib.error.HTTPError) as refused:  # no key, no record
            urllib.request.urlopen(json_url, timeout=30)
        assert refused.value.code == 401
        request = urllib.request.Request(json_url, headers={"Authorization": f"Bearer {key}"})
        with urllib.request.urlopen(request, timeout=30) as resp:
            body = json.loads(resp.read())
        assert body["id"] == assessment_id and body["reference"] == "DEMO-400-DC-001"
        report_url = seen["Report"].split(None, 1)[1]
        request = urllib.request.Request(report_url, headers={"Accept": "text/html", "Authorization": f"Bearer {key}"})
        with urllib.request.urlopen(request, timeout=60) as resp:
            assert resp.status == 200
            page = resp.read()
        saved = Path(seen["Saved"].split(":", 1)[1].strip())
        assert saved.read_bytes() == page and assessment_id.encode() in page
    finally:
        blocker.close()
        proc.send_signal(signal.SIGINT)
        try:
            proc.wait(timeout=40)
        except subprocess.TimeoutExpired:
            proc.kill()
            raise
        reader.join(timeout=10)
