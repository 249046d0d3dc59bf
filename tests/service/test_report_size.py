"""Reports too large for the configured limit are refused before anything is computed or stored."""

from __future__ import annotations

import json

import pytest

from service import create_app
from service.config import DEFAULTS
from service.report import load_request, report_size_estimate

from .golden.scenarios import scenarios

LIMITS = DEFAULTS  # the service's default limits (service.config)


@pytest.mark.parametrize("name", list(scenarios()))
def test_the_estimate_bounds_the_real_report(client, name):
    body = scenarios()[name]
    actual = len(client.post("/v1/evaluate", json=body).data)
    estimate = report_size_estimate(load_request(body, LIMITS))
    assert actual <= estimate <= 3 * actual + 64 * 1024


def test_a_request_over_the_limit_is_refused_up_front_and_nothing_is_stored(monkeypatch):
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_REPORT_BYTES": 1_000_000})
    client = app.test_client()
    body = {**scenarios()["xs_demo"], "profile": {"from_m": -100, "to_m": 100, "step_m": 0.05, "height_m": 1.0}}

    import service.report as report

    def never(*args, **kwargs):
        raise AssertionError("computed although refused")

    monkeypatch.setattr(report, "build_report", never)
    response = client.post("/v1/assessments", json=body)
    assert response.status_code == 422
    problem = response.get_json()
    assert "MAX_REPORT_BYTES" in problem["errors"][0]["detail"] and problem["errors"][0]["pointer"] == ""
    assert client.get("/v1/assessments").get_json()["data"] == []


def test_max_report_bytes_is_checked():
    with pytest.raises(ValueError, match="MAX_REPORT_BYTES"):
        create_app({"DATABASE_URL": "sqlite://", "MAX_REPORT_BYTES": 0, "WARM_UP_ENGINE": False})
