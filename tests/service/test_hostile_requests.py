"""A table of malformed and hostile requests, each refused with a problem that names what is wrong.

Run with access control on and an organisation's submit key, as deployed.  Each request
must get a 4xx RFC 9457 problem (never a 5xx) whose ``errors`` name the field (JSON
Pointer), query parameter or header, or, for a body that cannot be read at all, whose
``detail`` says why; and no table changes (row counts of assessments, batches, batch
items and idempotency keys, read with SQL, before and after).  Stack traces, file paths
and setting values never appear.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import text

from service import create_app, storage

from .test_access import new_key
from .test_api import small_body

ROUTE = json.loads((Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_route.json")
                   .read_text(encoding="utf-8"))
TABLES = ("assessments", "batches", "batch_items", "idempotency_keys", "api_keys")
LEAKS = ("Traceback", "/work/", "site-packages", ".py\"", "sqlalchemy", "DATABASE_URL", "sqlite:///")


def changed(base: dict, path: str, value: Any) -> dict:
    """``base`` with the member at ``path`` (``a/b/0/c``; ``+name`` adds a member) set to ``value``."""
    body = copy.deepcopy(base)
    *parents, last = path.split("/")
    node: Any = body
    for part in parents:
        node = node[int(part)] if isinstance(node, list) else node[part]
    if isinstance(node, list):
        node[int(last)] = value
    else:
        node[last.lstrip("+")] = value
    return body


def xs(path: str, value: Any) -> bytes:
    return json.dumps(changed(small_body(), path, value), allow_nan=True).encode()


def route(path: str, value: Any) -> bytes:
    return json.dumps(changed(ROUTE, path, value), allow_nan=True).encode()


def raw_token(path: str, token: str) -> bytes:
    """A cross-section body with a raw JSON token (``NaN``, ``Infinity``, ``1e400``) at ``path``."""
    return xs(path, "@@").replace(b'"@@"', token.encode())


CONDUCTOR = "cross_section/circuits/0/conductors/0"
JSON = {"Content-Type": "application/json"}

# (id, method, path, body bytes or None, extra headers, expected status, what must be named)
# named: "/pointer" (prefix of an errors[].pointer), "?param", "!header", or "~words in detail".
CASES: list[tuple[str, str, str, bytes | None, dict[str, str], int, str]] = [
    # wrong types
    ("title-number", "POST", "/v1/assessments", xs("title", 42), JSON, 422, "/title"),
    ("frequency-string", "POST", "/v1/assessments", xs("frequency_hz", "fifty"), JSON, 422, "/frequency_hz"),
    ("voltage-bool", "POST", "/v1/assessments", xs("cross_section/circuits/0/voltage_kv", True), JSON, 422,
     "/cross_section/circuits/0/voltage_kv"),
    ("conductors-object", "POST", "/v1/assessments", xs("cross_section/circuits/0/conductors", {"a": 1}), JSON,
     422, "/cross_section/circuits/0/conductors"),
    ("height-list", "POST", "/v1/assessments", xs(f"{CONDUCTOR}/height_m", [12]), JSON, 422,
     f"/{CONDUCTOR}/height_m"),
    ("body-array", "POST", "/v1/assessments", b"[1, 2, 3]", JSON, 422, "/"),
    ("body-string", "POST", "/v1/assessments", b'"assess this"', JSON, 422, "/"),
    ("body-null", "POST", "/v1/assessments", b"null", JSON, 422, "/"),
    # non-finite and huge numbers
    ("nan-current", "POST", "/v1/assessments", raw_token("cross_section/circuits/0/current_a", "NaN"), JSON, 422,
     "/cross_section/circuits/0/current_a"),
    ("infinity-height", "POST", "/v1/assessments", raw_token(f"{CONDUCTOR}/height_m", "Infinity"), JSON, 422,
     f"/{CONDUCTOR}/height_m"),
    ("minus-infinity-offset", "POST", "/v1/assessments", raw_token(f"{CONDUCTOR}/offset_m", "-Infinity"), JSON,
     422, f"/{CONDUCTOR}/offset_m"),
    ("overflowing-float", "POST", "/v1/assessments", raw_token("frequency_hz", "1e400"), JSON, 422,
     "/frequency_hz"),
    ("huge-frequency", "POST", "/v1/assessments", xs("frequency_hz", 1e300), JSON, 422, "/frequency_hz"),
    ("huge-current", "POST", "/v1/assessments", xs("cross_section/circuits/0/current_a", 1e308), JSON, 422,
     "/cross_section/circuits/0/current_a"),
    ("integer-of-5000-digits", "POST", "/v1/assessments", raw_token("frequency_hz", "9" * 5000), JSON, 400,
     "~not valid JSON"),
    # physically impossible values
    ("negative-height", "POST", "/v1/assessments", xs(f"{CONDUCTOR}/height_m", -3), JSON, 422,
     f"/{CONDUCTOR}/height_m"),
    ("zero-frequency", "POST", "/v1/assessments", xs("frequency_hz", 0), JSON, 422, "/frequency_hz"),
    ("zero-step", "POST", "/v1/assessments", xs("profile/step_m", 0), JSON, 422, "/profile/step_m"),
    ("profile-backwards", "POST", "/v1/assessments", xs("profile/to_m", -30), JSON, 422, "/profile"),
    ("unknown-phase", "POST", "/v1/assessments", xs(f"{CONDUCTOR}/phase", "L4"), JSON, 422, f"/{CONDUCTOR}/phase"),
    ("zero-bundle-count", "POST", "/v1/assessments", xs("cross_section/circuits/0/bundle/+count", 0), JSON, 422,
     "/cross_section/circuits/0/bundle/count"),
    ("negative-soil", "POST", "/v1/assessments", xs("+soil_resistivity_ohm_m", -100), JSON, 422,
     "/soil_resistivity_ohm_m"),
    ("nan-load-case", "POST", "/v1/assessments",
     xs("+load_cases", [{"id": "x", "current_scale": "@@"}]).replace(b'"@@"', b"NaN"), JSON, 422,
     "/load_cases/0/current_scale"),
    # sizes
    ("ten-million-points", "POST", "/v1/assessments", xs("profile/step_m", 4e-6), JSON, 422, "/profile/step_m"),
    ("ten-million-points-evaluate", "POST", "/v1/evaluate", xs("profile/step_m", 4e-6), JSON, 422,
     "/profile/step_m"),
    ("65-conductors", "POST", "/v1/assessments", xs("cross_section/circuits/0/conductors", [
        {"phase": ("L1", "L2", "L3")[i % 3], "offset_m": i * 0.5, "height_m": 12} for i in range(65)]), JSON,
     422, "/cross_section"),  # the limit counts every circuit's conductors and the earth wires
    ("17-load-cases", "POST", "/v1/assessments", xs("+load_cases", [
        {"id": f"c{i}", "current_scale": 1.1} for i in range(17)]), JSON, 422, "/load_cases"),
    ("oversized-body", "POST", "/v1/assessments", xs("title", "x" * (3 * 1024 * 1024)), JSON, 413,
     "~exceeds the limit"),
    ("deep-nesting", "POST", "/v1/assessments", b"[" * 100_000 + b"]" * 100_000, JSON, 400, "~nested too deeply"),
    # duplicates and unknown fields
    ("duplicate-conductors", "POST", "/v1/assessments", xs("cross_section/circuits/0/conductors/1",
                                                          {"phase": "L2", "offset_m": -4, "height_m": 12}), JSON,
     422, "/cross_section/circuits/0/conductors"),
    ("duplicate-circuit-ids", "POST", "/v1/assessments",
     xs("cross_section/circuits", small_body()["cross_section"]["circuits"] * 2), JSON, 422,
     "/cross_section/circuits/1"),
    ("unknown-top-field", "POST", "/v1/assessments", xs("+colour", "red"), JSON, 422, "/colour"),
    ("unknown-nested-field", "POST", "/v1/assessments", xs(f"{CONDUCTOR}/+sag", 3), JSON, 422, f"/{CONDUCTOR}/sag"),
    # transport
    ("text-plain", "POST", "/v1/assessments", json.dumps(small_body()).encode(), {"Content-Type": "text/plain"},
     415, "~Content-Type: application/json"),
    ("no-content-type", "POST", "/v1/assessments", json.dumps(small_body()).encode(), {}, 415,
     "~Content-Type: application/json"),
    ("form-encoded", "POST", "/v1/assessments", b"title=x", {"Content-Type": "application/x-www-form-urlencoded"},
     415, "~Content-Type: application/json"),
    ("truncated-json", "POST", "/v1/assessments", json.dumps(small_body()).encode()[:-7], JSON, 400,
     "~not valid JSON"),
    ("empty-body", "POST", "/v1/assessments", b"", JSON, 400, "~not valid JSON"),
    ("invalid-utf8", "POST", "/v1/assessments", xs("title", "@@").replace(b"@@", b"\xff\xfe\xc3"), JSON, 400,
     "~not valid JSON"),
    ("bad-idempotency-key", "POST", "/v1/assessments", json.dumps(small_body()).encode(),
     {**JSON, "Idempotency-Key": " padded "}, 400, "!Idempotency-Key"),
    # SQL-looking strings where they cannot be valid
    ("sql-reference-level", "POST", "/v1/assessments", xs("reference_levels", ["x'; DROP TABLE assessments; --"]),
     JSON, 422, "/reference_levels/0"),
    ("sql-phase", "POST", "/v1/assessments", xs(f"{CONDUCTOR}/phase", "L1' OR '1'='1"), JSON, 422,
     f"/{CONDUCTOR}/phase"),
    ("sql-cursor", "GET", "/v1/assessments?cursor=1%27%20OR%201%3D1%20--", None, {}, 400, "?cursor"),
    ("sql-outcome", "GET", "/v1/assessments?outcome=pass%27%3B%20DELETE%20FROM%20assessments%3B--", None, {}, 400,
     "?outcome"),
    # query parameters
    ("negative-limit", "GET", "/v1/assessments?limit=-1", None, {}, 400, "?limit"),
    ("limit-not-a-number", "GET", "/v1/assessments?limit=ten", None, {}, 400, "?limit"),
    ("bad-date", "GET", "/v1/assessments?created_after=yesterday", None, {}, 400, "?created_after"),
    ("chain-from-zero", "GET", "/v1/audit/verify-chain?from_sequence=0", None, {}, 400, "?from_sequence"),
    ("catalogue-frequency-nan", "GET", "/v1/reference-levels?frequency_hz=nan", None, {}, 400, "?frequency_hz"),
    # routes
    ("route-zone-threshold-number", "POST", "/v1/assessments", route("zones/thresholds", [5]), JSON, 422,
     "/zones/thresholds/0"),
    ("route-zone-threshold-nested-list", "POST", "/v1/assessments", route("zones/thresholds", [[1]]), JSON, 422,
     "/zones/thresholds/0"),
    ("route-unknown-crs", "POST", "/v1/assessments", route("route/crs", "EPSG:99999999"), JSON, 422, "/route/crs"),
    ("route-nan-support", "POST", "/v1/assessments",
     route("route/supports/1/x", "@@").replace(b'"@@"', b"NaN"), JSON, 422, "/route/supports/1/x"),
    ("route-201-supports", "POST", "/v1/assessments", route("route/supports", [
        {**ROUTE["route"]["supports"][0], "id": f"T{i}", "x": 612400.0 + 50 * i} for i in range(201)]), JSON, 422,
     "/route/supports"),
    ("route-grid-too-fine", "POST", "/v1/assessments", route("grid/resolution_m", 0.05), JSON, 422,
     "/grid/resolution_m"),
    # batches
    ("batch-without-items", "POST", "/v1/batches", json.dumps({"items": []}).encode(), JSON, 422, "/items"),
    ("batch-duplicate-names", "POST", "/v1/batches", json.dumps({"items": [
        {"name": "a", "request": small_body()}, {"name": "a", "request": small_body()}]}).encode(), JSON, 422,
     "/items/1/name"),
    ("batch-request-not-object", "POST", "/v1/batches", json.dumps({"items": [
        {"name": "a", "request": "DROP TABLE batches"}]}).encode(), JSON, 422, "/items/0/request"),
]


@pytest.fixture(scope="module")
def hostile():
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "AUTH_REQUIRED": True, "WARM_UP_ENGINE": False})
    key = new_key(app, "org-a")
    assert app.test_client().post("/v1/assessments", json=small_body(),
                                  headers={"Authorization": f"Bearer {key}"}).status_code == 201
    yield app, key
    storage.storage_of(app).engine.dispose()


def counts(app) -> dict[str, int]:
    with storage.storage_of(app).engine.connect() as conn:
        return {t: conn.execute(text(f"SELECT COUNT(*) FROM {t}")).scalar_one() for t in TABLES}


def names(problem: dict[str, Any], named: str) -> bool:
    errors = problem.get("errors") or []
    kind, what = named[0], named[1:]
    if kind == "/":
        return any(e.get("pointer", "").startswith(named.rstrip("/") or "") for e in errors)
    if kind == "?":
        return any(e.get("parameter") == what for e in errors)
    if kind == "!":
        return any(e.get("header") == what for e in errors)
    return what in problem.get("detail", "")


def test_the_table_is_large_enough():
    assert len(CASES) >= 40 and len({c[0] for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_hostile_request_is_refused_naming_the_field(hostile, case):
    app, key = hostile
    _, method, path, body, headers, status, named = case
    before = counts(app)
    response = app.test_client().open(path, method=method, data=body,
                                      headers={**headers, "Authorization": f"Bearer {key}"})
    problem = response.get_json(force=True, silent=True) or {}
    assert response.status_code == status, (response.status_code, problem)
    assert response.mimetype == "application/problem+json" and problem["status"] == status
    assert names(problem, named), problem
    text_ = response.get_data(as_text=True)
    assert not [leak for leak in LEAKS if leak in text_], text_[:500]
    assert counts(app) == before


def test_a_sql_looking_title_is_stored_as_text_and_harms_nothing(hostile):
    app, key = hostile
    before = counts(app)
    title = "Robert'); DROP TABLE assessments; --"
    r = app.test_client().post("/v1/assessments", json=small_body(title=title),
                               headers={"Authorization": f"Bearer {key}"})
    assert r.status_code == 201 and r.get_json()["title"] == title
    assert counts(app) == {**before, "assessments": before["assessments"] + 1}

