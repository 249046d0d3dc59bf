"""HTTP behaviour of the assessment routes: success paths, pagination, bad input.

Physics is the engine's; here two closed forms (Ampère's law for B, the image
solution for E) check that the service hands the engine the right input and
converts its SI output to µT and kV/m correctly.
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import pytest
import scipy.constants

from service import create_app, storage
from service.schema_fields import to_plain
from service.schemas import load_assessment_request

DEMO = Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_cross_section.json"
PROBLEM = "application/problem+json"


@pytest.fixture
def demo() -> dict:
    return json.loads(DEMO.read_text(encoding="utf-8"))


def small_body(**changes) -> dict:
    """One 132 kV circuit, five points: quick to compute."""
    body = {
        "title": "Small test line", "reference": "T-1", "frequency_hz": 50,
        "cross_section": {"circuits": [{
            "id": "c1", "kind": "overhead", "voltage_kv": 132, "current_a": 500,
            "conductors": [{"phase": "L1", "offset_m": -4, "height_m": 12},
                           {"phase": "L2", "offset_m": 0, "height_m": 12},
                           {"phase": "L3", "offset_m": 4, "height_m": 12}],
            "bundle": {"subconductor_diameter_m": 0.03}}]},
        "profile": {"from_m": -20, "to_m": 20, "step_m": 10, "height_m": 1},
        "reference_levels": ["icnirp-2010-public"],
    }
    body.update(changes)
    return body


def stored_count(app) -> int:
    with storage.storage_of(app).sessionmaker() as session:
        return storage.count_assessments(session)


# --------------------------------------------------------------------------- success paths


def test_create_then_get_returns_same_report(client, demo):
    created = client.post("/v1/assessments", json=demo)
    assert created.status_code == 201
    body = created.get_json()
    assert created.headers["Location"] == f"/v1/assessments/{body['id']}"
    fetched = client.get(created.headers["Location"])
    assert fetched.status_code == 200
    assert fetched.get_json() == body
    assert body["created_at"].endswith("Z")
    assert len(body["digest"]) == 64
    assert len(body["points"]) == 401  # -100 .. 100 m every 0.5 m, both ends included
    assert body["points"][0]["offset_m"] == -100.0 and body["points"][-1]["offset_m"] == 100.0


def test_report_content(client, demo):
    body = client.post("/v1/assessments", json=demo).get_json()
    point = body["points"][200]
    assert point["offset_m"] == 0.0 and point["height_m"] == 1.0
    # resultant^2 = sum of squared component rms values (definition, see models/results.py)
    c = point["components"]
    assert math.isclose(point["b_ut"], math.hypot(c["b_horizontal_ut"], c["b_vertical_ut"]), rel_tol=1e-12)
    assert math.isclose(point["e_kv_m"], math.hypot(c["e_horizontal_kv_m"], c["e_vertical_kv_m"]), rel_tol=1e-12)
    # ellipse semi-major axis between resultant/sqrt(2) and resultant (ellipse geometry)
    assert point["b_ut"] / math.sqrt(2) - 1e-12 <= point["b_max_ut"] <= point["b_ut"] + 1e-12
    assert 0.0 <= point["b_axial_ratio"] <= 1.0
    best_b = max(body["points"], key=lambda p: p["b_ut"])
    assert body["maxima"]["b"]["value_ut"] == best_b["b_ut"]
    assert body["maxima"]["b"]["offset_m"] == best_b["offset_m"]
    levels = {(e["level_id"], e["quantity"]) for e in body["compliance"]}
    assert ("icnirp-2010-public", "E") in levels and ("planning-0.4ut", "B") in levels
    planning = next(e for e in body["compliance"] if e["level_id"] == "planning-0.4ut")
    assert planning["unit"] == "µT" and planning["limit_ut"] == pytest.approx(0.4)
    assert planning["exposure_index"] == pytest.approx(planning["max_ut"] / 0.4)
    assert planning["passes"] is False and body["outcome"] == "fail"
    assert planning["distance_left_m"] > 0 and planning["distance_right_m"] > 0
    icnirp_e = next(e for e in body["compliance"] if e["level_id"] == "icnirp-2010-public" and e["quantity"] == "E")
    assert icnirp_e["limit_kv_m"] == pytest.approx(5.0)  # ICNIRP 2010, 5 kV/m at 50 Hz (ICNIRP 2010, Health Phys. 99(6):818-836, Table 4)
    assert icnirp_e["margin_kv_m"] == pytest.approx(5.0 - icnirp_e["max_kv_m"])
    text = " ".join(body["cautions"])
    for phrase in ("IEC 62110", "IEEE Std 644", "pacemaker", "regulator", "licensed engineer"):
        assert phrase in text
    assert body["assumptions"] and body["engine_version"] and body["catalogue_version"]


def test_normalised_input_loads_to_the_same_request(client, demo):
    body = client.post("/v1/assessments", json=demo).get_json()
    again = load_assessment_request(body["input"], max_points=20_001, max_conductors=64)
    assert to_plain(again) == body["input"]
    assert body["input"]["cross_section"]["circuits"][0]["reverse_sequence"] is False  # default filled in


def test_b_matches_amperes_law_for_one_conductor(client):
    # Ampère's law for an infinite straight conductor: B = mu0 I / (2 pi r) (scipy.constants CODATA mu0).
    body = small_body(profile=None, points=[{"offset_m": 0.0, "height_m": 0.0}, {"offset_m": 10.0, "height_m": 0.0}])
    del body["profile"]
    body["cross_section"]["circuits"][0].update(voltage_kv=0, current_a=1000,
                                                conductors=[{"phase": "L1", "offset_m": 0, "height_m": 10}])
    points = client.post("/v1/evaluate", json=body).get_json()["points"]
    for p, r in zip(points, (10.0, math.hypot(10.0, 10.0))):
        expected_ut = scipy.constants.mu_0 * 1000 / (2 * math.pi * r) * 1e6
        assert p["b_ut"] == pytest.approx(expected_ut, rel=1e-9)


def test_e_matches_image_solution_for_one_conductor(client):
    # One line charge at height h over perfectly conducting ground (image method):
    # V = q/(2 pi eps0) ln(2h/r) and at the ground below E = 2 q/(2 pi eps0 h) = 2 V / (h ln(2h/r)).
    # The exact cylinder has arccosh(h/r) in place of ln(2h/r): relative difference ~ (r/2h)^2 = 2.5e-7 here.
    h, r, v = 10.0, 0.01, 10e3
    body = small_body(points=[{"offset_m": 0.0, "height_m": 0.0}])
    del body["profile"]
    body["cross_section"]["circuits"][0].update(
        current_a=0, conductors=[{"phase": "L1", "offset_m": 0, "height_m": h,
                                  "voltage_to_ground": {"magnitude_kv": v / 1e3, "angle_deg": 0}}],
        bundle={"subconductor_diameter_m": 2 * r})
    point = client.post("/v1/evaluate", json=body).get_json()["points"][0]
    assert point["e_kv_m"] == pytest.approx(2 * v / (h * math.log(2 * h / r)) / 1e3, rel=1e-5)
    assert point["components"]["e_horizontal_kv_m"] == pytest.approx(0.0, abs=1e-9)


def test_evaluate_stores_nothing(app, client):
    response = client.post("/v1/evaluate", json=small_body())
    assert response.status_code == 200
    body = response.get_json()
    assert body["id"] is None and body["digest"] is None and len(body["points"]) == 5
    assert stored_count(app) == 0


def test_explicit_points_keep_order(client):
    body = small_body(points=[{"offset_m": 7.5, "height_m": 2.0}, {"offset_m": -3.0, "height_m": 0.5}])
    del body["profile"]
    points = client.post("/v1/evaluate", json=body).get_json()["points"]
    assert [(p["offset_m"], p["height_m"]) for p in points] == [(7.5, 2.0), (-3.0, 0.5)]


def test_reference_levels_endpoint(client):
    body = client.get("/v1/reference-levels?frequency_hz=60").get_json()
    assert body["frequency_hz"] == 60.0 and body["catalogue_version"]
    b = next(t for t in body["thresholds"] if t["level_id"] == "icnirp-1998-public" and t["quantity"] == "B")
    assert b["limit_ut"] == pytest.approx(83.3, rel=1e-3)  # ICNIRP 1998: 5/f(kHz) µT = 83.3 µT at 60 Hz (SEEN)
    assert b["citation"]
    default = client.get("/v1/reference-levels").get_json()
    assert default["frequency_hz"] == 50.0


@pytest.mark.parametrize("query", ["frequency_hz=abc", "frequency_hz=-5", "frequency_hz=nan", "frequency_hz=inf"])
def test_reference_levels_bad_frequency(client, query):
    response = client.get("/v1/reference-levels?" + query)
    assert response.status_code == 400 and response.mimetype == PROBLEM
    assert response.get_json()["errors"][0]["parameter"] == "frequency_hz"


def test_openapi_json_served(client):
    response = client.get("/openapi.json")
    assert response.status_code == 200
    assert response.get_json()["openapi"].startswith("3.1")


# --------------------------------------------------------------------------- listing


def test_list_newest_first_with_cursor_pages_and_filters(client):
    ids = []
    for n in range(5):
        body = small_body(reference="SITE-A" if n < 3 else "SITE-B", title=f"Run {n}")
        ids.append(client.post("/v1/assessments", json=body).get_json()["id"])
    page = client.get("/v1/assessments?limit=2").get_json()
    assert [d["id"] for d in page["data"]] == [ids[4], ids[3]]
    assert page["pagination"]["limit"] == 2 and page["pagination"]["count"] == 2
    seen = [d["id"] for d in page["data"]]
    while page["pagination"]["next_cursor"]:
        page = client.get(f"/v1/assessments?limit=2&cursor={page['pagination']['next_cursor']}").get_json()
        seen += [d["id"] for d in page["data"]]
    assert seen == ids[::-1]
    site_a = client.get("/v1/assessments?reference=SITE-A").get_json()["data"]
    assert [d["id"] for d in site_a] == [ids[2], ids[1], ids[0]]
    assert client.get("/v1/assessments?outcome=fail").get_json()["data"] == []
    assert len(client.get("/v1/assessments?outcome=pass").get_json()["data"]) == 5
    third = client.get(f"/v1/assessments/{ids[2]}").get_json()["created_at"]
    after = client.get("/v1/assessments", query_string={"created_after": third}).get_json()["data"]
    assert [d["id"] for d in after] == [ids[4], ids[3]]
    before = client.get("/v1/assessments", query_string={"created_before": third}).get_json()["data"]
    assert [d["id"] for d in before] == [ids[1], ids[0]]
    assert client.get("/v1/assessments").get_json()["data"][0]["url"] == f"/v1/assessments/{ids[4]}"


def test_list_limit_default_and_clamp(app, client):
    assert client.get("/v1/assessments").get_json()["pagination"]["limit"] == app.config["PAGE_SIZE_DEFAULT"] == 20
    assert client.get("/v1/assessments?limit=1000").get_json()["pagination"]["limit"] == 100


@pytest.mark.parametrize("query, parameter", [
    ("limit=0", "limit"), ("limit=-2", "limit"), ("limit=abc", "limit"), ("outcome=maybe", "outcome"),
    ("created_after=yesterday", "created_after"), ("created_before=2026-01-01T00:00:00", "created_before"),
    ("cursor=%21%21", "cursor"), ("cursor=eyJiZWZvcmUiOiAwfQ", "cursor"), ("colour=red", "colour"),
])
def test_list_bad_query(client, query, parameter):
    response = client.get("/v1/assessments?" + query)
    assert response.status_code == 400 and response.mimetype == PROBLEM
    assert [e["parameter"] for e in response.get_json()["errors"]] == [parameter]


# --------------------------------------------------------------------------- bad input: problem + nothing stored


def _set(path: str, value):
    """Mutation setting ``body[path]`` (dotted, list indices as numbers); value ``...`` deletes."""
    def mutate(body):
        *parents, last = [int(p) if p.isdigit() else p for p in path.split(".")]
        target = body
        for p in parents:
            target = target[p]
        if value is ...:
            del target[last]
        else:
            target[last] = value
    return mutate


C0 = "cross_section.circuits.0"
BAD_BODIES = [
    pytest.param(_set("frequency_hz", "50"), "/frequency_hz", id="string-for-number"),
    pytest.param(_set(f"{C0}.conductors.0.offset_m", True), f"/{C0.replace('.', '/')}/conductors/0/offset_m",
                 id="bool-for-number"),
    pytest.param(_set("cross_section.circuits", {"id": "c1"}), "/cross_section/circuits", id="object-for-list"),
    pytest.param(_set(f"{C0}.bundle.count", 1.5), f"/{C0.replace('.', '/')}/bundle/count", id="float-for-integer"),
    pytest.param(_set("title", ...), "/title", id="missing-title"),
    pytest.param(_set(f"{C0}.voltage_kv", ...), f"/{C0.replace('.', '/')}/voltage_kv", id="missing-voltage"),
    pytest.param(_set("cross_section", ...), "/cross_section", id="missing-cross-section"),
    pytest.param(_set("profile", ...), "/profile", id="missing-profile-and-points"),
    pytest.param(_set("unexpected", 1), "/unexpected", id="unknown-field"),
    pytest.param(_set(f"{C0}.bundle.subconductor_diameter_m", 0), f"/{C0.replace('.', '/')}/bundle/subconductor_diameter_m",
                 id="zero-diameter"),
    pytest.param(_set(f"{C0}.current_a", -10), f"/{C0.replace('.', '/')}/current_a", id="negative-current"),
    pytest.param(_set(f"{C0}.conductors.2.height_m", -3.0), f"/{C0.replace('.', '/')}/conductors/2/height_m",
                 id="overhead-conductor-below-ground"),
    pytest.param(_set(f"{C0}.conductors.1", {"phase": "L2", "offset_m": -4.01, "height_m": 12}),
                 f"/{C0.replace('.', '/')}/conductors/1", id="conductors-inside-each-other"),
    pytest.param(_set(f"{C0}.conductors.1.phase", "Q"), f"/{C0.replace('.', '/')}/conductors/1/phase",
                 id="unknown-phase-label"),
    pytest.param(_set("frequency_hz", 5000), "/frequency_hz", id="frequency-out-of-range"),
    pytest.param(_set("reference_levels", ["icnirp-2010-public", "no-such-level"]), "/reference_levels/1",
                 id="unknown-reference-level"),
    pytest.param(_set("reference_levels", []), "/reference_levels", id="no-threshold"),
    pytest.param(_set("custom_limits", [{"id": "x", "quantity": "B", "value": 0.4, "unit": "gauss"}]),
                 "/custom_limits/0/unit", id="custom-limit-unit"),
    pytest.param(_set("profile.to_m", -30), "/profile/to_m", id="profile-from-greater-than-to"),
    pytest.param(_set("profile.step_m", 0), "/profile/step_m", id="profile-zero-step"),
    pytest.param(_set("profile.step_m", -1), "/profile/step_m", id="profile-negative-step"),
    pytest.param(_set("profile.step_m", 0.001), "/profile/step_m", id="profile-too-many-points"),
    pytest.param(_set("profile.height_m", -1), "/profile/height_m", id="profile-below-ground"),
    pytest.param(_set("points", [{"offset_m": 0, "height_m": 1}]), "/profile", id="profile-and-points"),
]


@pytest.mark.parametrize("route", ["/v1/assessments", "/v1/evaluate"])
@pytest.mark.parametrize("mutate, pointer", BAD_BODIES)
def test_bad_body_is_422_problem_naming_field_and_nothing_stored(app, client, route, mutate, pointer):
    body = small_body()
    mutate(body)
    response = client.post(route, json=body)
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    problem = response.get_json()
    assert problem["status"] == 422 and problem["instance"] == route
    assert pointer in [e["pointer"] for e in problem["errors"]], problem
    assert stored_count(app) == 0


@pytest.mark.parametrize("path, token", [("frequency_hz", "NaN"), ("cross_section.circuits.0.conductors.1.height_m", "Infinity"),
                                         ("profile.from_m", "-Infinity")])
def test_raw_nan_and_infinity_tokens_rejected(app, client, path, token):
    body = small_body()
    _set(path, "__TOKEN__")(body)
    raw = json.dumps(body).replace('"__TOKEN__"', token)
    response = client.post("/v1/assessments", data=raw, content_type="application/json")
    assert response.status_code == 422 and response.mimetype == PROBLEM
    assert "/" + path.replace(".", "/") in [e["pointer"] for e in response.get_json()["errors"]]
    assert stored_count(app) == 0


def test_point_inside_conductor_names_the_point(app, client):
    body = small_body(points=[{"offset_m": 0, "height_m": 1}, {"offset_m": 0, "height_m": 12}])
    del body["profile"]
    response = client.post("/v1/assessments", json=body)
    assert response.status_code == 422
    assert response.get_json()["errors"][0]["pointer"] == "/points/1"
    assert stored_count(app) == 0


def test_body_must_be_an_object(app, client):
    response = client.post("/v1/assessments", json=[small_body()])
    assert response.status_code == 422
    assert response.get_json()["errors"][0]["pointer"] == ""


def test_too_many_points_and_conductors_by_config():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_POINTS": 3, "MAX_CONDUCTORS": 2})
    client = app.test_client()
    body = small_body(points=[{"offset_m": float(i), "height_m": 1.0} for i in range(4)])
    del body["profile"]
    problem = client.post("/v1/assessments", json=body).get_json()
    pointers = [e["pointer"] for e in problem["errors"]]
    assert problem["status"] == 422 and "/points" in pointers
    body["points"] = body["points"][:3]
    problem = client.post("/v1/assessments", json=body).get_json()
    assert problem["status"] == 422 and [e["pointer"] for e in problem["errors"]] == ["/cross_section"]
    assert stored_count(app) == 0


@pytest.mark.parametrize("content_type", ["text/plain", "application/x-www-form-urlencoded", None])
def test_non_json_body_is_415(app, client, content_type):
    kwargs = {"data": json.dumps(small_body())}
    if content_type:
        kwargs["content_type"] = content_type
    response = client.post("/v1/assessments", **kwargs)
    assert response.status_code == 415 and response.mimetype == PROBLEM
    assert stored_count(app) == 0


@pytest.mark.parametrize("raw", ['{"title": ', "{'title': 'single quotes'}", "", '{"a": 1} trailing',
                                 "[" * 100_000, '{"title": ' + "9" * 5000 + "}", b"\xff\xfe{"],
                         ids=["truncated", "single-quotes", "empty", "trailing", "deep-nesting", "huge-int", "bad-utf"])
def test_malformed_json_is_400(app, client, raw):
    response = client.post("/v1/assessments", data=raw, content_type="application/json")
    assert response.status_code == 400 and response.mimetype == PROBLEM
    assert stored_count(app) == 0


def test_oversize_body_is_413():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "MAX_CONTENT_LENGTH": 1000})
    body = small_body(title="x" * 200, reference="y" * 200)
    body["padding"] = "z" * 2000
    response = app.test_client().post("/v1/assessments", json=body)
    assert response.status_code == 413 and response.mimetype == PROBLEM
    assert "1000 bytes" in response.get_json()["detail"]
    assert stored_count(app) == 0


@pytest.mark.parametrize("path", ["/v1/assessments/00000000-0000-4000-8000-000000000000",
                                  "/v1/assessments/not-a-uuid", "/v1/assessments/1234"])
def test_unknown_or_malformed_id_is_404(client, path):
    response = client.get(path)
    assert response.status_code == 404 and response.mimetype == PROBLEM


@pytest.mark.parametrize("method, path", [("put", "/v1/assessments"), ("delete", "/v1/assessments"),
                                          ("get", "/v1/evaluate"), ("post", "/v1/reference-levels")])
def test_wrong_method_is_405_with_allow(client, method, path):
    response = getattr(client, method)(path)
    assert response.status_code == 405 and response.mimetype == PROBLEM
    assert response.headers["Allow"]


def test_stored_record_cannot_be_changed_through_the_api(client):
    location = client.post("/v1/assessments", json=small_body()).headers["Location"]
    for method in ("put", "patch", "delete"):
        assert getattr(client, method)(location, json=small_body()).status_code == 405
    assert client.get(location).status_code == 200


# --------------------------------------------------------------------------- robustness

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

JSON_VALUES = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=True, allow_infinity=True)
    | st.text(max_size=10),
    lambda children: st.lists(children, max_size=3) | st.dictionaries(st.text(max_size=5), children, max_size=3),
    max_leaves=6,
)


def _leaf_paths(obj, prefix=()):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield prefix + (k,)
            yield from _leaf_paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield prefix + (i,)
            yield from _leaf_paths(v, prefix + (i,))


SMALL_PATHS = list(_leaf_paths(small_body()))


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(path=st.sampled_from(SMALL_PATHS), value=JSON_VALUES)
def test_any_value_anywhere_is_answered_without_500(client, path, value):
    # "Never a 500 for bad input": replace one member of a valid body by an arbitrary JSON value.
    body = small_body()
    target = body
    for p in path[:-1]:
        target = target[p]
    target[path[-1]] = value
    response = client.post("/v1/evaluate", data=json.dumps(body), content_type="application/json")
    assert response.status_code in (200, 422), response.get_data(as_text=True)
    if response.status_code == 422:
        assert response.mimetype == PROBLEM and response.get_json()["errors"]


def test_greek_mu_unit_is_microtesla(client):
    body = small_body(custom_limits=[{"id": "site", "quantity": "B", "value": 0.4, "unit": "\u03bcT"}])
    report = client.post("/v1/evaluate", json=body).get_json()
    assert report["input"]["custom_limits"][0]["unit"] == "\u00b5T"
    site = next(e for e in report["compliance"] if e["level_id"] == "site")
    assert site["limit_ut"] == pytest.approx(0.4)
