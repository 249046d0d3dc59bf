"""The ``emf-batch`` command-line client against a running service (a real HTTP server on 127.0.0.1).

Scenarios are invented variants of the demo line (``service/examples``): the same line
at other currents.  Checks: every scenario gets one summary row with the service's own
values, invalid scenarios are reported by name as errors (and only those), the exit
status gates on the verdicts, transient failures are retried without storing twice.
"""

from __future__ import annotations

import copy
import csv
import json
import threading
from pathlib import Path

import pytest
from werkzeug.serving import make_server

from service import batch_client, create_app

from .test_batches import demo as batch_demo

def demo() -> dict:
    return batch_demo(step_m=2.0)


class FlakyGateway:
    """WSGI middleware answering 503 to the first attempt of every Idempotency-Key (a restarting proxy)."""

    def __init__(self, app):
        self.app, self.seen, self.lock = app, set(), threading.Lock()

    def __call__(self, environ, start_response):
        key = environ.get("HTTP_IDEMPOTENCY_KEY")
        with self.lock:
            first = key is not None and key not in self.seen
            self.seen.add(key)
        if first:
            start_response("503 Service Unavailable", [("Content-Type", "application/problem+json")])
            return [b'{"type":"about:blank","title":"Service Unavailable","status":503}']
        return self.app(environ, start_response)


@pytest.fixture
def service(tmp_path):
    app = create_app({"DATABASE_URL": f"sqlite:///{tmp_path / 'batch.sqlite3'}"})
    servers = []

    def start(wsgi=None):
        server = make_server("127.0.0.1", 0, wsgi or app, threaded=True)
        threading.Thread(target=server.serve_forever, daemon=True).start()
        servers.append(server)
        return f"http://127.0.0.1:{server.server_port}"

    yield app, start
    for s in servers:
        s.shutdown()
    app.extensions["emf_storage"].engine.dispose()


def read_csv(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def stored_count(app) -> int:
    return len(app.test_client().get("/v1/assessments?limit=100").get_json()["data"])


def test_two_hundred_scenarios_with_five_invalid(service, tmp_path, capsys):
    app, start = service
    url = start()
    folder = tmp_path / "scenarios"
    folder.mkdir()
    invalid = {"s017", "s050", "s101", "s150", "s199"}
    for i in range(200):
        body = demo()
        body["reference"] = f"span-{i:03d}"
        body["cross_section"]["circuits"][0]["current_a"] = 200.0 + 10.0 * i
        if f"s{i:03d}" in invalid:
            body["frequency_hz"] = "fifty"  # refused by the service: 422 naming /frequency_hz
        (folder / f"s{i:03d}.json").write_text(json.dumps(body), encoding="utf-8")
    out = tmp_path / "summary.csv"
    status = batch_client.main([str(folder), "--url", url, "--out", str(out), "--workers", "4"])
    rows = read_csv(out)
    assert [r["scenario"] for r in rows] == [f"s{i:03d}" for i in range(200)]
    assert {r["scenario"] for r in rows if r["verdict"] == "error"} == invalid
    assert all("/frequency_hz" in r["detail"] for r in rows if r["verdict"] == "error")
    assert status == (0 if all(r["verdict"] == "pass" for r in rows) else 1) == 1  # errors fail the gate
    err = capsys.readouterr().err
    assert "assessments" in err and "200 scenarios" in err  # tqdm's bar and the closing line
    # the rows carry the service's own values
    client = app.test_client()
    row = rows[3]
    report = client.get(f"/v1/assessments/{row['id']}").get_json()
    assert float(row["max_b_ut"]) == report["maxima"]["b"]["value_ut"]
    assert float(row["worst_exposure_index"]) == max(c["exposure_index"] for c in report["compliance"])
    assert row["verdict"] == report["outcome"]


def test_exit_status_gates_on_failing_scenarios(service, tmp_path):
    app, start = service
    url = start()
    lines = []
    for name, limit in (("loose", 1000.0), ("strict", 0.001)):
        body = demo()
        body["reference_levels"] = []
        body["custom_limits"] = [{"id": "policy", "quantity": "B", "value": limit, "unit": "µT"}]
        lines.append(json.dumps({"name": name, "request": body}))
    src = tmp_path / "two.jsonl"
    src.write_text("\n".join(lines[:1]) + "\n", encoding="utf-8")
    assert batch_client.main([str(src), "--url", url, "--out", str(tmp_path / "a.csv"), "--quiet"]) == 0
    src.write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert batch_client.main([str(src), "--url", url, "--out", str(tmp_path / "b.csv"), "--quiet"]) == 1
    rows = {r["scenario"]: r["verdict"] for r in read_csv(tmp_path / "b.csv")}
    assert rows == {"loose": "pass", "strict": "fail"}


def test_transient_failures_are_retried_and_stored_once(service, tmp_path):
    app, start = service
    url = start(FlakyGateway(app.wsgi_app))
    src = tmp_path / "s.jsonl"
    src.write_text("\n".join(json.dumps({**demo(), "reference": f"r{i}"}) for i in range(6)) + "\n", encoding="utf-8")
    status = batch_client.main([str(src), "--url", url, "--out", str(tmp_path / "s.csv"), "--quiet"])
    rows = read_csv(tmp_path / "s.csv")
    assert all(r["verdict"] in ("pass", "fail") for r in rows) and status in (0, 1)
    assert len({r["id"] for r in rows}) == 6 and stored_count(app) == 6


def test_unreachable_service_is_an_error_not_a_crash(tmp_path):
    src = tmp_path / "s.jsonl"
    src.write_text(json.dumps(demo()) + "\n", encoding="utf-8")
    status = batch_client.main([str(src), "--url", "http://127.0.0.1:9", "--out", str(tmp_path / "s.csv"),
                                "--quiet", "--retries", "1"])
    row = read_csv(tmp_path / "s.csv")[0]
    assert status == 1 and row["verdict"] == "error" and "gave up after 2 attempts" in row["detail"]


@pytest.mark.parametrize("content, message", [(None, "no such file"), ("{bad", "not JSON"),
                                              ('{"name": "a", "request": {}}\n{"name": "a", "request": {}}', "twice")])
def test_usage_errors_submit_nothing(tmp_path, capsys, content, message):
    src = tmp_path / "in.jsonl"
    if content is not None:
        src.write_text(content, encoding="utf-8")
    assert batch_client.main([str(src), "--out", str(tmp_path / "x.csv")]) == 2
    assert message in capsys.readouterr().err and not (tmp_path / "x.csv").exists()


def test_idempotency_key_is_stable_per_name_and_content():
    a = batch_client.Scenario("s1", {"x": 1, "y": [1, 2]})
    assert a.idempotency_key == batch_client.Scenario("s1", {"y": [1, 2], "x": 1}).idempotency_key
    assert a.idempotency_key != batch_client.Scenario("s2", {"x": 1, "y": [1, 2]}).idempotency_key
    assert a.idempotency_key != copy.deepcopy(batch_client.Scenario("s1", {"x": 2, "y": [1, 2]})).idempotency_key


def test_the_key_comes_from_the_environment_and_scenarios_belong_to_its_organisation(tmp_path, monkeypatch):
    from .test_access import new_key

    app = create_app({"DATABASE_URL": f"sqlite:///{tmp_path / 'keyed.sqlite3'}", "AUTH_REQUIRED": True})
    server = make_server("127.0.0.1", 0, app, threaded=True)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    url = f"http://127.0.0.1:{server.server_port}"
    try:
        src = tmp_path / "s.jsonl"
        src.write_text("\n".join(json.dumps({**demo(), "reference": f"k{i}"}) for i in range(3)) + "\n",
                       encoding="utf-8")
        monkeypatch.delenv(batch_client.KEY_VARIABLE, raising=False)
        assert batch_client.main([str(src), "--url", url, "--out", str(tmp_path / "none.csv"), "--quiet"]) == 1
        assert all(r["verdict"] == "error" and "API key" in r["detail"]
                   for r in read_csv(tmp_path / "none.csv"))
        key = new_key(app, "org-batch")
        monkeypatch.setenv(batch_client.KEY_VARIABLE, key)
        status = batch_client.main([str(src), "--url", url, "--out", str(tmp_path / "keyed.csv"), "--quiet"])
        rows = read_csv(tmp_path / "keyed.csv")
        assert status in (0, 1) and all(r["verdict"] in ("pass", "fail") for r in rows)
        listed = app.test_client().get("/v1/assessments", headers={"Authorization": f"Bearer {key}"}).get_json()
        assert sorted(r["id"] for r in listed["data"]) == sorted(r["id"] for r in rows)
    finally:
        server.shutdown()
        app.extensions["emf_storage"].engine.dispose()
