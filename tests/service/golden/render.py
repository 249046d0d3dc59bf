"""What a user sees of one request, as text: the JSON report, CSV, GeoJSON and HTML page text."""

from __future__ import annotations

import json
import re
from typing import Any

from service import reports

from .scenarios import FIXED_CREATED_AT, FIXED_ID

RECORD_SCENARIOS = ("xs_demo", "xs_points_mixed_heights", "route_load_cases_soil")
"""Scenarios stored in ``records.sqlite3.gz``, in this order (sequence 1, 2, 3)."""

_SVG = re.compile(r"<svg\b.*?</svg>", re.S)


def html_text(page: str) -> str:
    """The page without its inline figures (matplotlib SVG), which are checked through their figures."""
    return _SVG.sub("<svg/>", page)


def rendered(client: Any, body: dict) -> dict[str, str]:
    """``{"json": ..., "csv": ..., "html": ..., ["geojson": ...]}`` for one request body."""
    response = client.post("/v1/evaluate", json=body)
    assert response.status_code == 200, response.get_json()
    text = response.get_data(as_text=True)
    report = json.loads(text)
    report.update(id=FIXED_ID, created_at=FIXED_CREATED_AT)
    out = {"json": text, "csv": reports.render_csv(report),
           "html": html_text(reports.render_html(report, links={"JSON": "report.json", "CSV": "report.csv"}))}
    if reports.is_route_report(report):
        out["geojson"] = json.dumps(reports.render_geojson(report), ensure_ascii=False, indent=0)
    return out
