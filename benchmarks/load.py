"""Throughput and latency under gunicorn: a typical 401-point assessment against ``GET /healthz``, same run.

Starts gunicorn (``deploy/gunicorn.conf.py``, 2 workers) on 127.0.0.1 with a temporary
SQLite file, then drives it from 4 client threads: ``GET /healthz`` (the framework's own
ceiling: routing, a database ping, JSON) and ``POST /v1/assessments`` of the demo line
(service/examples/demo_cross_section.json, invented, with its three load cases) on a
401-point lateral profile, interleaved in rounds.  Prints requests/s and p50/p99
latency of each and their ratios.  Bounded: ``--requests`` per kind (default 400).
Run: ``.venv/bin/python benchmarks/load.py``.
"""

from __future__ import annotations

import argparse
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


HEADERS: dict[str, str] = {}
"""Sent with every assessment request (``--auth``: the organisation's key)."""


def timed(url: str, data: bytes | None) -> float:
    req = urllib.request.Request(url, data=data, method="POST" if data else "GET",
                                 headers={"Content-Type": "application/json", **HEADERS} if data else {})
    t0 = time.perf_counter()
    with urllib.request.urlopen(req, timeout=60) as resp:
        resp.read()
    return time.perf_counter() - t0


def drive(url: str, data: bytes | None, n: int, threads: int) -> tuple[float, list[float]]:
    t0 = time.perf_counter()
    with ThreadPoolExecutor(max_workers=threads) as pool:
        lat = list(pool.map(lambda _: timed(url, data), range(n)))
    return n / (time.perf_counter() - t0), lat


def pct(values: list[float], q: float) -> float:
    return statistics.quantiles(values, n=100)[q - 1] if len(values) > 1 else values[0]


def make_key(env: dict[str, str]) -> str:
    """A submit key on the benchmark's database, made with the documented command before gunicorn starts."""
    out = subprocess.run([sys.executable, "-m", "flask", "--app", "service", "keys", "create", "--tenant", "bench",
                          "--role", "submit"], cwd=ROOT, env=env, capture_output=True, text=True, check=True)
    return out.stdout.strip().splitlines()[-1]


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--requests", type=int, default=400)
    ap.add_argument("--threads", type=int, default=4)
    ap.add_argument("--auth", action="store_true",
                    help="access control on (the default deployment): assessments carry an organisation's key")
    args = ap.parse_args()
    demo = json.loads((ROOT / "service" / "examples" / "demo_cross_section.json").read_text(encoding="utf-8"))
    demo["profile"] = {"from_m": -100.0, "to_m": 100.0, "step_m": 0.5, "height_m": 1.0}
    body = json.dumps(demo).encode()
    port = free_port()
    with tempfile.TemporaryDirectory() as tmp:
        env = {**os.environ, "HOST": "127.0.0.1", "PORT": str(port), "WEB_CONCURRENCY": "2",
               "EMF_DATABASE_URL": f"sqlite:///{tmp}/load.sqlite3", "EMF_LOG_REQUESTS": "false",
               "EMF_AUTH_REQUIRED": "true" if args.auth else "false",
               "PROMETHEUS_MULTIPROC_DIR": f"{tmp}/metrics"}
        if args.auth:
            HEADERS["Authorization"] = "Bearer " + make_key(env)
        server = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", str(ROOT / "deploy" / "gunicorn.conf.py")],
                                  cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        base = f"http://127.0.0.1:{port}"
        try:
            deadline = time.monotonic() + 120
            while True:
                try:
                    timed(base + "/healthz", None)
                    break
                except OSError:
                    if time.monotonic() > deadline or server.poll() is not None:
                        raise SystemExit("gunicorn did not come up")
                    time.sleep(0.3)
            for _ in range(20):  # both workers warm
                timed(base + "/v1/assessments", body)
            results = {"healthz": ([], []), "assessment": ([], [])}
            for _ in range(2):
                for kind, url, data in (("healthz", base + "/healthz", None),
                                        ("assessment", base + "/v1/assessments", body)):
                    rate, lat = drive(url, data, args.requests // 2, args.threads)
                    results[kind][0].append(rate)
                    results[kind][1].extend(lat)
        finally:
            server.terminate()
            server.wait(timeout=30)
    out = {}
    for kind, (rates, lat) in results.items():
        out[kind] = (max(rates), pct(lat, 50) * 1e3, pct(lat, 99) * 1e3)
        print(f"{kind:>10}: {out[kind][0]:7.1f} req/s   p50 {out[kind][1]:7.2f} ms   p99 {out[kind][2]:7.2f} ms")
    h, a = out["healthz"], out["assessment"]
    print(f"assessment / healthz: throughput {h[0] / a[0]:.1f}x lower, p50 {a[1] / h[1]:.1f}x, p99 {a[2] / h[2]:.1f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
