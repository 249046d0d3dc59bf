"""The golden scenarios: the demo requests and their right-of-way and load-case variants.

Each scenario is an invented request (demo data, see ``service/examples``).  The files
beside this module hold what the service answered for each one when the golden files
were written (``python -m tests.service.golden.make``); ``test_golden_reports.py``
checks that the service still answers exactly that.  Regenerate only for a change that
is meant to alter what users see, and say so in the commit.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

EXAMPLES = Path(__file__).resolve().parents[3] / "service" / "examples"
HERE = Path(__file__).resolve().parent

FIXED_ID = "00000000-0000-4000-8000-000000000000"
FIXED_CREATED_AT = "2026-01-01T00:00:00Z"


def _example(name: str) -> dict:
    return json.loads((EXAMPLES / f"{name}.json").read_text(encoding="utf-8"))


def _without(body: dict, *keys: str) -> dict:
    out = copy.deepcopy(body)
    for k in keys:
        out.pop(k, None)
    return out


def scenarios() -> dict[str, dict]:
    """Scenario name -> request body."""
    xs = _example("demo_cross_section")
    route = _example("demo_route")
    lonlat = _example("demo_route_lonlat")
    mixed_points = [{"offset_m": o, "height_m": h} for o, h in
                    [(-40.0, 1.0), (-20.0, 1.5), (-5.0, 1.0), (0.0, 2.0), (12.5, 1.0), (30.0, 0.5), (60.0, 1.0)]]
    out = {
        "xs_demo": xs,
        "xs_points_mixed_heights": {**_without(xs, "profile", "load_cases"), "points": mixed_points},
        "xs_points_one_height_one_case": {
            **_without(xs, "profile"), "points": [{"offset_m": o, "height_m": 1.0} for o in (-50.0, -10.0, 0.0, 25.0)],
            "load_cases": xs["load_cases"][:1]},
        "xs_no_row_soil": {**_without(xs, "right_of_way", "load_cases"), "soil_resistivity_ohm_m": 100.0},
        "route_demo": route,
        "route_lonlat": lonlat,
        "route_load_cases_soil": {
            **_without(route, "grid", "zones"), "soil_resistivity_ohm_m": 100.0,
            "load_cases": [
                {"id": "peak", "label": "Peak", "current_scale": 1.5},
                {"id": "one-out", "currents_a": {route["route"]["circuits"][0]["id"]: 0.0}},
            ]},
        "route_no_row": _without(route, "right_of_way"),
    }
    return out
