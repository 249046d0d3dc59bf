"""Peak resident memory of one 20,001-point assessment against the size of its report.

Scenario: the demo line (service/examples/demo_cross_section.json, invented, with its
three load cases) on a lateral profile of 20,001 points, stored on a SQLite file.  In a
fresh process: build the app (kernels warm), run one small assessment (so lazy imports
and caches are in place), read the peak RSS, run the 20,001-point ``POST
/v1/assessments``, read the peak RSS again.  Prints the growth of the peak, the report
size and their ratio.  Run: ``.venv/bin/python benchmarks/report_memory.py``.
"""

from __future__ import annotations

import json
import resource
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from service import create_app  # noqa: E402


def peak_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: KiB


def main() -> int:
    demo = json.loads((ROOT / "service" / "examples" / "demo_cross_section.json").read_text(encoding="utf-8"))
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"DATABASE_URL": f"sqlite:///{tmp}/mem.sqlite3"})
        client = app.test_client()
        client.post("/v1/assessments", json=demo)
        before = peak_mib()
        body = {**demo, "profile": {"from_m": -100, "to_m": 100, "step_m": 0.01, "height_m": 1.0}}
        response = client.post("/v1/assessments", json=body)
        assert response.status_code == 201
        after = peak_mib()
        size = len(response.data) / 2**20
        print(f"report {size:.1f} MiB; peak RSS {before:.0f} -> {after:.0f} MiB (+{after - before:.0f} MiB), "
              f"growth / report = {(after - before) / size:.2f}")
        app.extensions["emf_storage"].engine.dispose()
    return 0


if __name__ == "__main__":
    sys.exit(main())
