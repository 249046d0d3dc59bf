"""Cable screens through the service (the circuit ``screen`` member and the report's ``cable_screens``).

References: IEC 60287-1-1:2006, clause 2.3.1 (three single-core cables in trefoil, both ends
bonded: |I_s| = |I| X / sqrt(R_s^2 + X^2), X = 2 omega 1e-7 ln(2 s / d) ohm/m; from memory);
the plain engine's result with the screens left out (single-point bonding must give the same
B); the OpenAPI document for the response shape; RFC 9457 problems naming the field by
JSON Pointer.
"""

from __future__ import annotations

import cmath
import copy
import json
import math
from pathlib import Path

import pytest

from service.schema_fields import to_plain
from service.schemas import load_assessment_request

from .test_api import PROBLEM
from .test_openapi import check_response, spec  # noqa: F401 (fixture)

EXAMPLE = Path(__file__).resolve().parents[2] / "docs" / "examples" / "cable_trench.json"


def example() -> dict:
    return json.loads(EXAMPLE.read_text(encoding="utf-8"))


def trefoil_body(bonding="both_ends", spacing_m=0.1, current_a=1000.0):
    h = spacing_m * math.sqrt(3) / 2
    body = example()
    del body["load_cases"]
    body["cross_section"]["circuits"] = [{
        "id": "t", "kind": "underground", "voltage_kv": 132, "current_a": current_a,
        "bundle": {"subconductor_diameter_m": 0.04},
        "screen": {"bonding": bonding, "resistance_ohm_per_km": 0.08, "mean_diameter_m": 0.09},
        "conductors": [{"phase": "L1", "offset_m": -spacing_m / 2, "height_m": -1.2},
                       {"phase": "L2", "offset_m": spacing_m / 2, "height_m": -1.2},
                       {"phase": "L3", "offset_m": 0.0, "height_m": -1.2 + h}]}]
    return body


def test_example_reports_screen_currents(client, spec):
    response = client.post("/v1/assessments", json=example())
    assert response.status_code == 201, response.get_data(as_text=True)
    check_response(spec, response)
    report = response.get_json()
    keys = list(report)
    assert keys.index("points") + 1 == keys.index("cable_screens")
    hv, mv = report["cable_screens"]["circuits"]
    assert (hv["circuit_id"], hv["bonding"], mv["bonding"]) == ("hv", "both_ends", "single_point")
    assert all(c["screen_current_a"] > 100.0 for c in hv["cables"])
    assert hv["net_screen_current_a"] < 1e-9 * 800.0                  # they circulate
    assert all(c["screen_current_a"] == 0.0 for c in mv["cables"])
    assert [c["phase"] for c in hv["cables"]] == ["L1", "L2", "L3"]
    assert any("bonded at both ends" in a for a in report["assumptions"])
    assert client.post(response.headers["Location"] + "/verify").get_json()["verdict"] == "match"
    html = client.get(response.headers["Location"] + "/report?format=html").get_data(as_text=True)
    assert "Cable screens" in html


def test_the_page_shows_what_the_example_gives(client):
    page = (EXAMPLE.parents[1] / "underground-cables.md").read_text(encoding="utf-8")
    bonded = client.post("/v1/evaluate", json=example()).get_json()
    body = example()
    del body["cross_section"]["circuits"][0]["screen"]
    plain = client.post("/v1/evaluate", json=body).get_json()
    cable = bonded["cable_screens"]["circuits"][0]["cables"][0]
    assert f'"screen_current_a": {cable["screen_current_a"]:.2f}' in page
    assert f'"screen_angle_deg": {cable["screen_angle_deg"]:.2f}' in page
    assert f'"screen_to_conductor_ratio": {cable["screen_to_conductor_ratio"]:.3f}' in page
    assert f'from {plain["maxima"]["b"]["value_ut"]:.1f} µT' in page
    assert f'to {bonded["maxima"]["b"]["value_ut"]:.1f} µT' in page


def test_trefoil_screen_current_matches_iec_60287_hand_calculation(client):
    report = client.post("/v1/evaluate", json=trefoil_body()).get_json()
    rs = 0.08e-3
    x = 2 * (2 * math.pi * 50) * 1e-7 * math.log(2 * 0.1 / 0.09)    # IEC 60287-1-1 2.3.1 (from memory)
    expected = 1000.0 * x / math.hypot(rs, x)
    for cable in report["cable_screens"]["circuits"][0]["cables"]:
        assert cable["screen_current_a"] == pytest.approx(expected, rel=1e-8)   # CODATA mu0 vs 4 pi 1e-7
        # I_s = -j X / (Rs + j X) I (same derivation)
        i_c = cmath.rect(cable["conductor_current_a"], math.radians(cable["conductor_angle_deg"]))
        i_s = cmath.rect(cable["screen_current_a"], math.radians(cable["screen_angle_deg"]))
        assert abs(i_s - (-1j * x / (rs + 1j * x)) * i_c) < 1e-6 * expected


def test_single_point_bonding_gives_the_plain_conductor_field(client):
    open_ = client.post("/v1/evaluate", json=trefoil_body("single_point")).get_json()
    body = trefoil_body()
    del body["cross_section"]["circuits"][0]["screen"]
    plain = client.post("/v1/evaluate", json=body).get_json()
    bonded = client.post("/v1/evaluate", json=trefoil_body()).get_json()
    assert [p["b_ut"] for p in open_["points"]] == [p["b_ut"] for p in plain["points"]]
    assert "cable_screens" not in plain
    # trefoil: every cable carries I + I_s = I Rs / (Rs + j X), one common factor, so B scales by
    # Rs / sqrt(Rs^2 + X^2) at every point (IEC 60287-1-1 2.3.1's X, from memory)
    rs, x = 0.08e-3, 2 * (2 * math.pi * 50) * 1e-7 * math.log(2 * 0.1 / 0.09)
    for a, b in zip(bonded["points"], plain["points"]):
        assert a["b_ut"] == pytest.approx(b["b_ut"] * rs / math.hypot(rs, x), rel=1e-8)


def test_normalised_input_loads_again_to_the_same_request():
    request = load_assessment_request(example(), max_points=20_001, max_conductors=64)
    again = load_assessment_request(to_plain(request), max_points=20_001, max_conductors=64)
    assert again == request
    assert to_plain(request)["cross_section"]["circuits"][1]["screen"] == {"bonding": "single_point",
                                                                            "mean_diameter_m": 0.05}


def _bad(edit):
    body = example()
    edit(body)
    return body


def _circuit(body, i=0):
    return body["cross_section"]["circuits"][i]


@pytest.mark.parametrize("edit, pointer", [
    (lambda b: _circuit(b)["screen"].pop("resistance_ohm_per_km"),
     "/cross_section/circuits/0/screen/resistance_ohm_per_km"),
    (lambda b: _circuit(b)["screen"].pop("mean_diameter_m"), "/cross_section/circuits/0/screen/mean_diameter_m"),
    (lambda b: _circuit(b)["screen"].update(bonding="sometimes"), "/cross_section/circuits/0/screen/bonding"),
    (lambda b: _circuit(b)["screen"].update(resistance_ohm_per_km=0), "/cross_section/circuits/0/screen/resistance_ohm_per_km"),
    (lambda b: _circuit(b)["screen"].update(mean_diameter_m="wide"), "/cross_section/circuits/0/screen/mean_diameter_m"),
    (lambda b: _circuit(b)["screen"].update(mean_diameter_m=0.03), "/cross_section/circuits/0/screen/mean_diameter_m"),
    (lambda b: _circuit(b)["bundle"].update(count=2, spacing_m=0.1), "/cross_section/circuits/0/bundle/count"),
    (lambda b: _circuit(b).update(kind="overhead"), "/cross_section/circuits/0/screen"),
    (lambda b: _circuit(b)["conductors"][1].update(offset_m=-0.17), "/cross_section/circuits/0/conductors/1"),
])
def test_bad_screen_input_is_a_problem_naming_the_field(client, edit, pointer):
    response = client.post("/v1/assessments", json=_bad(edit))
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    assert pointer in [e["pointer"] for e in response.get_json()["errors"]]


def test_route_circuits_take_no_screen(client):
    body = json.loads((Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_route.json")
                      .read_text(encoding="utf-8"))
    body = copy.deepcopy(body)
    body["route"]["circuits"][0]["screen"] = {"bonding": "both_ends", "resistance_ohm_per_km": 0.1,
                                              "mean_diameter_m": 0.08}
    response = client.post("/v1/evaluate", json=body)
    assert response.status_code == 422
    assert "/route/circuits/0/screen" in [e["pointer"] for e in response.get_json()["errors"]]
