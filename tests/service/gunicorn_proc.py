"""Real gunicorn processes for tests: start one, wait for /healthz, stop or kill it, talk HTTP.

Every instance runs ``deploy/gunicorn.conf.py`` (or another config) on 127.0.0.1 and a
port the kernel picks, in its own process group (``start_new_session``), so
:func:`kill_group` can SIGKILL the master and all its workers at once, as a crash of the
whole container would.  Each gets its own log file and Prometheus folder under the
test's ``tmp_path``; the log's tail goes into failure messages.  Access control is
switched off (``EMF_AUTH_REQUIRED=false``) so the tests exercise storage and
concurrency, not keys; the engine is not warmed up at start-up
(``EMF_WARM_UP_ENGINE=false``: /healthz answers sooner, each worker loads the numba
kernels from the disk cache on its first assessment instead).  The client is the
standard library's ``urllib`` (one connection per request), safe to use from threads.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import signal
import subprocess
import sys
import time
import urllib.error
import urllib.request
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[2]
DEPLOY_CONFIG = ROOT / "deploy" / "gunicorn.conf.py"


LISTENING = re.compile(r"Listening at: (http://127\.0\.0\.1:\d+) \((\d+)\)")


@dataclass
class Instance:
    """One running gunicorn master (its process group id is its pid)."""

    proc: subprocess.Popen
    log: Path
    env: dict[str, str] = field(repr=False)
    base: str = ""

    def log_tail(self, chars: int = 3000) -> str:
        try:
            return self.log.read_text(encoding="utf-8", errors="replace")[-chars:]
        except OSError:
            return "(no log)"


def start(tmp_path: Path, database_url: str, *, name: str = "gunicorn", workers: int = 2, threads: int = 1,
          env: dict[str, str] | None = None, config: Path = DEPLOY_CONFIG, up_timeout_s: float = 90.0) -> Instance:
    """Start gunicorn on 127.0.0.1 and wait until ``/healthz`` answers 200.

    The port is 0 (the kernel picks a free one, so parallel test runs on one machine
    cannot take each other's); the master logs the address it got, with its pid.
    """
    log = tmp_path / f"{name}.log"
    full_env = {**os.environ, "HOST": "127.0.0.1", "PORT": "0", "WEB_CONCURRENCY": str(workers),
                "GUNICORN_THREADS": str(threads), "EMF_DATABASE_URL": database_url,
                "EMF_AUTH_REQUIRED": "false", "EMF_LOG_REQUESTS": "false", "EMF_WARM_UP_ENGINE": "false",
                "PROMETHEUS_MULTIPROC_DIR": str(tmp_path / f"{name}-metrics"), **(env or {})}
    with open(log, "ab") as out:
        proc = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", str(config)], cwd=ROOT, env=full_env,
                                stdout=out, stderr=subprocess.STDOUT, start_new_session=True)
    inst = Instance(proc, log, full_env)
    try:
        wait_healthy(inst, up_timeout_s)
    except BaseException:
        kill_group(inst)
        raise
    return inst


def wait_healthy(inst: Instance, timeout_s: float) -> None:
    """Wait for the master's "Listening at" line, then for ``/healthz`` to answer 200."""
    deadline = time.monotonic() + timeout_s
    while True:
        assert inst.proc.poll() is None, f"gunicorn exited with {inst.proc.returncode}:\n{inst.log_tail()}"
        if not inst.base:
            found = [m for m in LISTENING.finditer(inst.log_tail(100_000)) if int(m[2]) == inst.proc.pid]
            inst.base = found[0][1] if found else ""
        try:
            if inst.base and call("GET", inst.base + "/healthz", timeout=2)[0] == 200:
                return
        except OSError:
            pass
        assert time.monotonic() < deadline, f"gunicorn did not answer /healthz within {timeout_s} s:\n{inst.log_tail()}"
        time.sleep(0.1)


def _group_members(pgid: int) -> list[int]:
    """Live (not zombie) processes of a process group, from /proc (Linux)."""
    members = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2:].split()  # after "pid (comm) ": state ppid pgrp ...
        if int(fields[2]) == pgid and fields[0] != "Z":
            members.append(int(entry))
    return members


def kill_group(inst: Instance, timeout_s: float = 15.0) -> None:
    """SIGKILL the master and every worker (the whole process group) and wait until none is left."""
    pgid = inst.proc.pid
    try:
        os.killpg(pgid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    inst.proc.wait(timeout=timeout_s)
    deadline = time.monotonic() + timeout_s
    while (left := _group_members(pgid)):
        assert time.monotonic() < deadline, f"processes {left} of group {pgid} survived SIGKILL"
        time.sleep(0.05)


def stop(inst: Instance, timeout_s: float = 30.0) -> None:
    """Graceful stop (SIGTERM to the master); SIGKILL to the group if it does not end in time."""
    if inst.proc.poll() is None:
        inst.proc.terminate()
        try:
            inst.proc.wait(timeout=timeout_s)
        except subprocess.TimeoutExpired:
            pass
    kill_group(inst)


def call(method: str, url: str, body: Any = None, *, timeout: float = 30.0) -> tuple[int, dict[str, str], bytes]:
    """One HTTP request; (status, headers, body) for every status (HTTP errors are not raised)."""
    data = None if body is None else (body if isinstance(body, bytes) else json.dumps(body).encode())
    req = urllib.request.Request(url, data=data, method=method,
                                 headers={"Content-Type": "application/json"} if data is not None else {})
    try:
        with urllib.request.urlopen(req, timeout=timeout) as resp:
            return resp.status, dict(resp.headers), resp.read()
    except urllib.error.HTTPError as exc:
        with exc:
            return exc.code, dict(exc.headers), exc.read()


def get_json(url: str, *, timeout: float = 30.0) -> Any:
    status, _, raw = call("GET", url, timeout=timeout)
    assert status == 200, (url, status, raw[:500])
    return json.loads(raw)


def sha256(raw: bytes) -> str:
    return hashlib.sha256(raw).hexdigest()


def verify_chain(base: str) -> dict[str, Any]:
    """``GET /v1/audit/verify-chain`` of the whole chain."""
    return get_json(base + "/v1/audit/verify-chain", timeout=120)


def list_all_ids(base: str, page: int = 100) -> list[str]:
    """Every assessment id from ``GET /v1/assessments``, newest first, following the cursors."""
    ids: list[str] = []
    url = f"{base}/v1/assessments?limit={page}"
    while True:
        doc = get_json(url)
        ids += [r["id"] for r in doc["data"]]
        cursor = doc["pagination"]["next_cursor"]
        if cursor is None:
            return ids
        url = f"{base}/v1/assessments?limit={page}&cursor={cursor}"


def wait_batch_done(base: str, batch_id: str, timeout_s: float = 60.0) -> dict[str, Any]:
    """Poll ``GET /v1/batches/{id}`` until no item is pending or running; the batch document."""
    deadline = time.monotonic() + timeout_s
    while (doc := get_json(f"{base}/v1/batches/{batch_id}"))["status"] != "done":
        assert time.monotonic() < deadline, f"batch not done within {timeout_s} s: {doc['counts']}"
        time.sleep(0.1)
    return doc


def db_counts(database_url: str) -> tuple[int, int]:
    """(rows in ``assessments``, chain head sequence), read directly from the database."""
    from sqlalchemy.orm import Session

    from service import storage

    engine = storage.make_engine(database_url)
    try:
        with Session(engine) as session:
            return storage.count_assessments(session), storage.chain_head(session)[0]
    finally:
        engine.dispose()
