"""kill -9 of gunicorn (master and workers) in the middle of a batch, then a restart: every item ends exactly once.

The batch (30 invented variants of the demo line, two of them invalid) is processed by
the background thread of the worker that received it.  When some items are done and one
is claimed (``running``), the whole process group is stopped (SIGSTOP, so the state can
be read without it moving), checked, and killed with SIGKILL.  The restarted instance
resumes the batch; the claim of the dead worker is taken over once older than
``EMF_BATCH_LEASE_S`` (2 s).  Afterwards each valid item is ``done`` with exactly one
stored assessment (counted by reference in the database), items finished before the kill
keep their assessment, the invalid items are ``error`` with an RFC 9457 problem naming
the field, and the chain verifies.
"""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import time
import uuid

import pytest

from tests.service import gunicorn_proc as gp
from tests.service.test_batches import EXAMPLES, items

ITEMS = 30
INVALID = {7, 19}
ENV = {"EMF_BATCH_WORKER": "true", "EMF_BATCH_LEASE_S": "2", "EMF_BATCH_POLL_S": "0.2"}


def batch_items() -> list[dict]:
    """``items`` with the demo line's three load cases and an 801-point profile (tens of ms per item)."""
    load_cases = json.loads((EXAMPLES / "demo_cross_section.json").read_text(encoding="utf-8"))["load_cases"]
    out = items(ITEMS, invalid=INVALID)
    for item in out:
        item["request"]["load_cases"] = load_cases
        item["request"]["profile"] = {"from_m": -100.0, "to_m": 100.0, "step_m": 0.25, "height_m": 1.0}
    return out


def item_states(conn: sqlite3.Connection) -> dict[int, tuple[str, str | None]]:
    rows = conn.execute("SELECT position, status, assessment_id FROM batch_items").fetchall()
    return {pos: (status, aid and str(uuid.UUID(aid))) for pos, status, aid in rows}


def counts(states: dict[int, tuple[str, str | None]]) -> dict[str, int]:
    out = {s: 0 for s in ("pending", "running", "done", "error")}
    for status, _ in states.values():
        out[status] += 1
    return out


@pytest.mark.slow
def test_kill_9_mid_batch_then_restart_ends_every_item_exactly_once(tmp_path):
    path = tmp_path / "batch.sqlite3"
    url = f"sqlite:///{path}"
    server = gp.start(tmp_path, url, name="before", workers=2, env=ENV)
    conn = sqlite3.connect(path, timeout=5)
    try:
        check_kill_and_restart(tmp_path, url, server, conn)
    finally:
        conn.close()


def check_kill_and_restart(tmp_path, url: str, server: gp.Instance, conn: sqlite3.Connection) -> None:
    try:
        status, _, raw = gp.call("POST", server.base + "/v1/batches", {"title": "Restart", "items": batch_items()})
        assert status == 202, raw[:500]
        batch_id = json.loads(raw)["id"]
        deadline = time.monotonic() + 60
        while True:
            c = counts(item_states(conn))
            assert c["done"] + c["error"] < ITEMS, "the batch ended before it could be interrupted"
            assert time.monotonic() < deadline, f"batch did not progress: {c}\n{server.log_tail()}"
            if c["done"] >= 1 and c["running"] >= 1:
                os.killpg(server.proc.pid, signal.SIGSTOP)  # freeze master and workers
                at_kill = item_states(conn)
                c = counts(at_kill)
                if c["running"] >= 1 and c["done"] + c["error"] < ITEMS:
                    break
                os.killpg(server.proc.pid, signal.SIGCONT)  # between two items: go on
            time.sleep(0.002)
    finally:
        gp.kill_group(server)
    done_before = {pos: aid for pos, (status, aid) in at_kill.items() if status == "done"}
    running_before = [pos for pos, (status, _) in at_kill.items() if status == "running"]
    assert done_before and running_before and len(done_before) < ITEMS - len(INVALID)
    print(f"at the kill: {counts(at_kill)}")

    after = gp.start(tmp_path, url, name="after", workers=2, env=ENV)
    try:
        doc = gp.wait_batch_done(after.base, batch_id, timeout_s=60)
        assert doc["counts"] == {"pending": 0, "running": 0, "done": ITEMS - len(INVALID), "error": len(INVALID)}
        for item in doc["items"]:
            if item["position"] in INVALID:
                assert item["status"] == "error" and item["assessment_id"] is None
                problem = item["problem"]
                assert problem["status"] == 422
                assert problem["errors"][0]["pointer"] == "/cross_section/circuits/0/current_a"
            else:
                assert item["status"] == "done" and item["problem"] is None
                report = gp.get_json(after.base + item["url"])
                assert report["reference"] == item["name"] and report["id"] == item["assessment_id"]
        ids = [i["assessment_id"] for i in doc["items"] if i["status"] == "done"]
        assert len(set(ids)) == len(ids)
        final = item_states(conn)
        assert {pos: final[pos][1] for pos in done_before} == done_before  # not redone after the restart
        assert all(final[pos][0] == "done" for pos in running_before)  # the dead worker's claim was taken over
        per_reference = dict(conn.execute("SELECT reference, count(*) FROM assessments GROUP BY reference"))
        assert per_reference == {f"span-{i}": 1 for i in range(ITEMS) if i not in INVALID}
        assert gp.db_counts(url) == (ITEMS - len(INVALID),) * 2
        chain = gp.verify_chain(after.base)
        assert chain["ok"] is True and chain["records_checked"] == ITEMS - len(INVALID), chain
    finally:
        gp.stop(after)
