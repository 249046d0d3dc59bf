"""Golden reports: what users see of the demo scenarios stays as it was written.

The golden files (``tests/service/golden``) were written by the service before the
evaluation model was unified (``python -m tests.service.golden.make``).  These tests
compare today's answers with them: same members in the same order, same strings, and
numbers equal to 1e-9 relative.  Floating-point noise between machines and library builds
(numba/LLVM vectorisation, BLAS) was measured at up to 5e-11 relative, in the quantities
that come from near-cancellations: contoured zone widths, the phase of a near-zero field
component, axial ratios; a changed formula or a changed selection of points moves values
by far more than 1e-9.  The HTML is
compared as text outside its figures, so every printed number counts.  A database of
records stored by that earlier service must still verify (``POST /verify`` -> match)
and its chain must check.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
import math
import shutil

import pytest

from service import create_app

from .golden.render import RECORD_SCENARIOS, rendered
from .golden.scenarios import HERE, scenarios

RTOL = 1e-9
ATOL = 1e-15


def _golden(name: str, suffix: str) -> str:
    with gzip.open(HERE / f"{name}.{suffix}.gz", "rt", encoding="utf-8") as fh:
        return fh.read()


def _pairs(text: str):
    return json.loads(text, object_pairs_hook=lambda items: ("__object__", items))


def _same(old, new, where: str = "") -> None:
    if isinstance(old, tuple) and old[0] == "__object__":
        assert isinstance(new, tuple) and new[0] == "__object__", f"{where}: object became {type(new).__name__}"
        old_keys, new_keys = [k for k, _ in old[1]], [k for k, _ in new[1]]
        assert old_keys == new_keys, f"{where}: members {old_keys} became {new_keys}"
        for (k, a), (_, b) in zip(old[1], new[1]):
            _same(a, b, f"{where}/{k}")
    elif isinstance(old, list):
        assert isinstance(new, list) and len(old) == len(new), f"{where}: list length/type changed"
        for i, (a, b) in enumerate(zip(old, new)):
            _same(a, b, f"{where}/{i}")
    elif isinstance(old, float) or (isinstance(old, int) and not isinstance(old, bool) and isinstance(new, float)):
        assert isinstance(new, (int, float)) and not isinstance(new, bool), f"{where}: {old!r} became {new!r}"
        assert type(old) is type(new), f"{where}: {old!r} ({type(old).__name__}) became {new!r}"
        assert math.isclose(old, new, rel_tol=RTOL, abs_tol=ATOL), f"{where}: {old!r} became {new!r}"
    else:
        assert old == new and type(old) is type(new), f"{where}: {old!r} became {new!r}"


def _same_csv(old: str, new: str) -> None:
    a, b = list(csv.reader(io.StringIO(old))), list(csv.reader(io.StringIO(new)))
    assert len(a) == len(b), "CSV row count changed"
    for r, (ra, rb) in enumerate(zip(a, b)):
        assert len(ra) == len(rb), f"CSV row {r}: {ra} became {rb}"
        for c, (x, y) in enumerate(zip(ra, rb)):
            if x == y:
                continue
            try:
                fx, fy = float(x), float(y)
            except ValueError:
                raise AssertionError(f"CSV row {r} column {c}: {x!r} became {y!r}") from None
            assert math.isclose(fx, fy, rel_tol=RTOL, abs_tol=ATOL), f"CSV row {r} column {c}: {x} became {y}"


@pytest.fixture(scope="module")
def golden_client():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    yield app.test_client()
    app.extensions["emf_storage"].engine.dispose()


@pytest.mark.parametrize("name", list(scenarios()))
def test_reports_equal_the_golden_files(golden_client, name: str) -> None:
    now = rendered(golden_client, scenarios()[name])
    expected = {"json", "csv", "html"} | ({"geojson"} if name.startswith("route") else set())
    assert set(now) == expected
    _same(_pairs(_golden(name, "json")), _pairs(now["json"]), "report")
    _same_csv(_golden(name, "csv"), now["csv"])
    assert now["html"] == _golden(name, "html")
    if "geojson" in now:
        _same(_pairs(_golden(name, "geojson")), _pairs(now["geojson"]), "geojson")


def test_records_stored_before_still_verify(tmp_path) -> None:
    db = tmp_path / "records.sqlite3"
    with gzip.open(HERE / "records.sqlite3.gz", "rb") as src, open(db, "wb") as dst:
        shutil.copyfileobj(src, dst)
    app = create_app({"TESTING": True, "DATABASE_URL": f"sqlite:///{db}"})  # migrated to head on start
    try:
        client = app.test_client()
        listed = client.get("/v1/assessments?limit=10").get_json()["data"]
        assert [r["title"] for r in reversed(listed)] == [scenarios()[n]["title"] for n in RECORD_SCENARIOS]
        for row in listed:
            served = client.get(row["url"])
            assert served.status_code == 200
            verdict = client.post(row["url"] + "/verify").get_json()
            assert verdict["verdict"] == "match", verdict
            assert verdict["recomputation"]["values_compared"] > 100
        chain = client.get("/v1/audit/verify-chain").get_json()
        assert chain["ok"] is True and chain["records_checked"] == len(RECORD_SCENARIOS), chain
    finally:
        app.extensions["emf_storage"].engine.dispose()
