"""Service overhead: a whole HTTP assessment against the engine call it wraps, in one process.

Scenario: the demo line (service/examples/demo_cross_section.json, invented) on a lateral
profile of N points (401 and 20,001). For each N, interleaved rounds time

* engine: ``evaluate_cross_section`` + ``evaluate_compliance`` on the same points (SI arrays);
* evaluate: ``POST /v1/evaluate`` through Flask's test client (parse, validate, compute,
  build the report in kV/m and µT, serialise);
* store: ``POST /v1/assessments`` on a SQLite file (the above plus digest and insert);
* fetch: ``GET /v1/assessments/{id}`` (the stored text served as stored);
* healthz: ``GET /healthz`` (the framework's own floor: routing, a database ping, JSON);

then the demo route (grid with zones, lateral profile, path, receptors, right-of-way)
through ``POST /v1/evaluate`` and ``POST /v1/assessments``, and the bytes on the wire per
point with and without ``Accept-Encoding: gzip``.

Prints the best wall time of each and the ratios (to the engine call; the 401-point
evaluate also to ``GET /healthz``).  Run: ``.venv/bin/python benchmarks/service.py``.
"""

from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from service import create_app  # noqa: E402
from models.section_sets import section_points  # noqa: E402
from service.report import thresholds  # noqa: E402
from service.schemas import load_assessment_request  # noqa: E402

from models.compliance import evaluate_compliance  # noqa: E402
from models.cross_section import evaluate_cross_section  # noqa: E402


def best(fn, rounds: int) -> float:
    times = []
    for _ in range(rounds):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    demo = json.loads((ROOT / "service" / "examples" / "demo_cross_section.json").read_text(encoding="utf-8"))
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"DATABASE_URL": f"sqlite:///{tmp}/bench.sqlite3"})
        client = app.test_client()
        t_health = min(best(lambda: client.get("/healthz"), 50) for _ in range(3))
        print(f"GET /healthz {t_health * 1e3:.2f} ms")
        print(f"{'points':>7} {'engine':>9} {'evaluate':>9} {'store':>9} {'fetch':>9}   evaluate/engine  "
              "store/engine  evaluate/healthz  bytes/point plain  gzip")
        for step, n_expected in ((0.5, 401), (0.01, 20_001)):
            body = {**demo, "profile": {"from_m": -100, "to_m": 100, "step_m": step, "height_m": 1.0}}
            req = load_assessment_request(body, max_points=20_001, max_conductors=64)
            offsets, heights = section_points(req.sets)
            assert offsets.size == n_expected
            limits = thresholds(req)

            def engine():
                res = evaluate_cross_section(req.cross_section, offsets, heights, req.frequency_hz)
                evaluate_compliance(res, limits, lateral_offset_m=offsets)

            location = client.post("/v1/assessments", json=body).headers["Location"]
            rounds = 5 if n_expected > 1000 else 20
            t_engine = t_eval = t_store = t_fetch = float("inf")
            for _ in range(3):  # interleave so all see the same machine state
                t_engine = min(t_engine, best(engine, rounds))
                t_eval = min(t_eval, best(lambda: client.post("/v1/evaluate", json=body), rounds))
                t_store = min(t_store, best(lambda: client.post("/v1/assessments", json=body), rounds))
                t_fetch = min(t_fetch, best(lambda: client.get(location), rounds))
            plain = len(client.get(location).data) / n_expected
            packed = len(client.get(location, headers={"Accept-Encoding": "gzip"}).data) / n_expected
            print(f"{n_expected:>7} {t_engine * 1e3:>7.1f}ms {t_eval * 1e3:>7.1f}ms {t_store * 1e3:>7.1f}ms "
                  f"{t_fetch * 1e3:>7.1f}ms   {t_eval / t_engine:>15.1f}  {t_store / t_engine:>12.1f}  "
                  f"{t_eval / t_health:>16.1f}  {plain:>17.0f}  {packed:>4.0f}")
        route = json.loads((ROOT / "service" / "examples" / "demo_route.json").read_text(encoding="utf-8"))
        t_route_eval = min(best(lambda: client.post("/v1/evaluate", json=route), 3) for _ in range(3))
        t_route_store = min(best(lambda: client.post("/v1/assessments", json=route), 3) for _ in range(3))
        print(f"demo route: POST /v1/evaluate {t_route_eval * 1e3:.0f} ms, POST /v1/assessments "
              f"{t_route_store * 1e3:.0f} ms")
        app.extensions["emf_storage"].engine.dispose()


if __name__ == "__main__":
    main()
