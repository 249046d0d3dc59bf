"""Request limits that bound time and memory, and the SQLite durability settings.

The route work bounds are checked after discretisation and before any field is
computed; each refusal is a 422 naming the request field and the setting, and nothing is
stored.  The segment counts they compare against are the report's own
``segment_counts`` for the same request: the check is that the bound applies to exactly
those numbers (a limit equal to the count passes, one less refuses).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sqlalchemy import text

from service import create_app, storage

ROUTE = json.loads((Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_route.json")
                   .read_text(encoding="utf-8"))


def app_with(**limits):
    return create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False, **limits})


def stored(app) -> int:
    with storage.storage_of(app).engine.connect() as conn:
        return conn.execute(text("SELECT COUNT(*) FROM assessments")).scalar_one()


@pytest.fixture(scope="module")
def demo_segments() -> dict[str, int]:
    app = app_with()
    report = app.test_client().post("/v1/evaluate", json=ROUTE).get_json()
    storage.storage_of(app).engine.dispose()
    return report["segment_counts"]


def test_segment_bound_is_exact_and_refuses_before_computing(demo_segments):
    largest = max(demo_segments.values())
    fits, over = app_with(MAX_SEGMENTS=largest), app_with(MAX_SEGMENTS=largest - 1)
    try:
        assert fits.test_client().post("/v1/assessments", json=ROUTE).status_code == 201
        problem = over.test_client().post("/v1/assessments", json=ROUTE).get_json()
        assert problem["status"] == 422 and problem["errors"][0]["pointer"] == "/route"
        detail = problem["errors"][0]["detail"]
        assert "MAX_SEGMENTS" in detail and f"{demo_segments['b']} straight segments for B" in detail
        assert stored(over) == 0
    finally:
        for app in (fits, over):
            storage.storage_of(app).engine.dispose()


def test_point_segment_pairs_bound_is_the_product(demo_segments):
    app = app_with(MAX_SEGMENT_POINT_PAIRS=1000)
    problem = app.test_client().post("/v1/assessments", json=ROUTE).get_json()
    detail = problem["errors"][0]["detail"]
    assert problem["status"] == 422 and problem["errors"][0]["pointer"] == "/route"
    assert "MAX_SEGMENT_POINT_PAIRS" in detail
    n_points = int(detail.split(" observation points")[0])
    n_segments = int(detail.split(" x ")[1].split(" segments")[0])
    assert n_segments == demo_segments["b"] + demo_segments["e"]
    assert f"= {n_points * n_segments} field evaluations" in detail
    assert stored(app) == 0
    storage.storage_of(app).engine.dispose()


def test_grid_points_bound_names_the_grid_and_the_setting():
    app = app_with(MAX_GRID_POINTS=100)
    problem = app.test_client().post("/v1/assessments", json=ROUTE).get_json()
    assert problem["status"] == 422
    assert problem["errors"][0]["pointer"] == "/grid/resolution_m"
    assert "MAX_GRID_POINTS" in problem["errors"][0]["detail"] and stored(app) == 0
    storage.storage_of(app).engine.dispose()


def test_sqlite_connections_are_wal_full_sync_with_a_busy_timeout(tmp_path):
    app = create_app({"TESTING": True, "DATABASE_URL": f"sqlite:///{tmp_path / 'd.sqlite3'}", "WARM_UP_ENGINE": False})
    try:
        with storage.storage_of(app).engine.connect() as conn:
            assert conn.execute(text("PRAGMA journal_mode")).scalar_one() == "wal"
            assert conn.execute(text("PRAGMA synchronous")).scalar_one() == 2  # FULL (SQLite: 0 OFF, 1 NORMAL, 2 FULL)
            assert conn.execute(text("PRAGMA busy_timeout")).scalar_one() == 15000
    finally:
        storage.storage_of(app).engine.dispose()
