"""GET /v1/assessments/{id}/report (content negotiation) and /geojson over HTTP.

Media types and status codes follow RFC 9110 (Accept, 406 Not Acceptable, ETag and
If-None-Match -> 304, Vary); problem documents RFC 9457.  CSV is parsed with the
standard csv module (RFC 4180 dialect), HTML with the standard html.parser.
"""

from __future__ import annotations

import csv
import io
import json
import uuid
from html.parser import HTMLParser
from pathlib import Path

import pytest

DEMO = Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_cross_section.json"
BROWSER_ACCEPT = "text/html,application/xhtml+xml,application/xml;q=0.9,image/avif,*/*;q=0.8"


@pytest.fixture(scope="module")
def client():
    """One app for the module: the demo is stored once and its pages rendered once (cached)."""
    from service import create_app

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    yield app.test_client()
    app.extensions["emf_storage"].engine.dispose()


@pytest.fixture(scope="module")
def stored(client) -> dict:
    body = json.loads(DEMO.read_text(encoding="utf-8"))
    r = client.post("/v1/assessments", json=body)
    assert r.status_code == 201
    return r.get_json()


def report_url(report: dict) -> str:
    return f"/v1/assessments/{report['id']}/report"


@pytest.mark.parametrize("accept, mimetype", [
    ("application/json", "application/json"),
    ("text/html", "text/html"),
    ("text/csv", "text/csv"),
    (BROWSER_ACCEPT, "text/html"),
    ("*/*", "application/json"),
    ("text/csv;q=0.9, text/html;q=0.5", "text/csv"),
])
def test_accept_header_chooses_the_format(client, stored, accept, mimetype):
    r = client.get(report_url(stored), headers={"Accept": accept})
    assert r.status_code == 200
    assert r.mimetype == mimetype
    assert "Accept" in r.headers["Vary"]


def test_json_report_is_the_stored_report(client, stored):
    r = client.get(report_url(stored), headers={"Accept": "application/json"})
    assert r.get_json() == stored == client.get(f"/v1/assessments/{stored['id']}").get_json()


@pytest.mark.parametrize("fmt, mimetype", [("json", "application/json"), ("html", "text/html"), ("csv", "text/csv")])
def test_format_parameter_overrides_accept(client, stored, fmt, mimetype):
    r = client.get(report_url(stored) + f"?format={fmt}", headers={"Accept": "application/pdf"})
    assert r.status_code == 200 and r.mimetype == mimetype


def test_unsupported_type_is_406_problem(client, stored):
    r = client.get(report_url(stored), headers={"Accept": "application/pdf"})
    assert r.status_code == 406
    assert r.mimetype == "application/problem+json"
    assert "text/html" in r.get_json()["detail"]


def test_unknown_format_parameter_is_400_problem(client, stored):
    r = client.get(report_url(stored) + "?format=pdf")
    assert r.status_code == 400 and r.mimetype == "application/problem+json"
    assert r.get_json()["errors"][0]["parameter"] == "format"


@pytest.mark.parametrize("suffix", ["report", "geojson"])
def test_unknown_id_is_404_problem(client, suffix):
    r = client.get(f"/v1/assessments/{uuid.uuid4()}/{suffix}")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


def test_etag_gives_304(client, stored):
    first = client.get(report_url(stored) + "?format=html")
    etag = first.headers["ETag"]
    again = client.get(report_url(stored) + "?format=html", headers={"If-None-Match": etag})
    assert again.status_code == 304 and again.data == b""
    other = client.get(report_url(stored) + "?format=csv", headers={"If-None-Match": etag})
    assert other.status_code == 200  # each format has its own ETag


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def test_html_is_self_contained_with_strict_policy(client, stored):
    r = client.get(report_url(stored), headers={"Accept": "text/html"})
    assert r.headers["Content-Security-Policy"].startswith("default-src 'none'")
    assert r.headers["X-Content-Type-Options"] == "nosniff"
    parser = _Collector()
    parser.feed(r.get_data(as_text=True))
    tags = parser.tags
    assert not [t for t, a in tags if t in ("script", "img", "iframe", "object", "embed", "link")]
    assert not [a for t, a in tags if "src" in a]
    ids = {a.get("id") for _, a in tags}
    assert {"verdict", "compliance", "profile", "drawing", "assumptions", "cautions"} <= ids
    assert sum(1 for t, _ in tags if t == "svg") >= 2
    # The links to the other formats resolve on this service.
    hrefs = [a["href"] for t, a in tags if t == "a"]
    assert hrefs and all(h.startswith("/v1/") for h in hrefs)
    for href in hrefs:
        assert client.get(href).status_code == 200


def test_csv_over_http_parses_and_matches_json(client, stored):
    r = client.get(report_url(stored), headers={"Accept": "text/csv"})
    assert r.headers["Content-Disposition"].endswith(f'assessment-{stored["id"]}.csv"')
    rows = list(csv.DictReader(io.StringIO(r.get_data(as_text=True))))
    assert len(rows) == len(stored["points"])
    for row, point in zip(rows, stored["points"]):
        assert float(row["offset_m"]) == point["offset_m"]
        assert float(row["b_ut"]) == point["b_ut"]
        assert float(row["e_vertical_kv_m"]) == point["components"]["e_vertical_kv_m"]


def test_geojson_of_cross_section_is_404_no_geometry(client, stored):
    r = client.get(f"/v1/assessments/{stored['id']}/geojson")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"
    problem = r.get_json()
    assert problem["type"] == "urn:emf-assess:problem:no-geometry"
    assert "cross-section" in problem["detail"]


def test_report_responses_match_the_openapi_document(client, stored):
    from tests.service.test_openapi import SPEC_PATH, check_response

    import yaml

    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    check_response(spec, client.get(report_url(stored), headers={"Accept": "application/json"}))
    check_response(spec, client.get(report_url(stored), headers={"Accept": "application/pdf"}))      # 406
    check_response(spec, client.get(report_url(stored) + "?format=x"))                               # 400
    check_response(spec, client.get(f"/v1/assessments/{stored['id']}/geojson"))                      # 404
    check_response(spec, client.post(f"/v1/assessments/{stored['id']}/verify"))
    check_response(spec, client.get("/v1/audit/verify-chain"))
    check_response(spec, client.get("/v1/audit/verify-chain?from_sequence=1&limit=1"))
    check_response(spec, client.get("/v1/audit/verify-chain?limit=0"))                              # 400


@pytest.fixture(scope="module")
def stored_route(client) -> dict:
    """The invented lon/lat demo route (grid coarsened to 10 m), stored the way POST stores a report."""
    from service import storage
    from service.report import build_report
    from service.route_schemas import load_route_request

    body = json.loads((DEMO.parent / "demo_route_lonlat.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 10.0
    report = build_report(load_route_request(body, max_route_points=200_000, max_conductors=64))
    app = client.application
    session = storage.storage_of(app).sessionmaker()
    with session.begin():
        record = storage.insert_assessment(session, storage.canonical_json(report["input"]), report)
    session.close()
    return client.get(f"/v1/assessments/{record.id}").get_json()


def test_route_geojson_over_http(client, stored_route):
    from shapely.geometry import shape

    r = client.get(f"/v1/assessments/{stored_route['id']}/geojson")
    assert r.status_code == 200 and r.mimetype == "application/geo+json"
    fc = json.loads(r.get_data(as_text=True))
    assert fc["type"] == "FeatureCollection" and "coordinate_reference" not in fc  # lon/lat request
    kinds = {f["properties"]["kind"] for f in fc["features"]}
    assert {"route", "support", "path", "lateral_profile", "receptor", "zone"} <= kinds
    for f in fc["features"]:
        assert shape(f["geometry"]).is_valid
    from tests.service.test_openapi import SPEC_PATH, check_response

    import yaml

    check_response(yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8")), r)
    assert client.get(f"/v1/assessments/{stored_route['id']}/geojson",
                      headers={"If-None-Match": r.headers["ETag"]}).status_code == 304


def test_route_report_pages(client, stored_route):
    page = client.get(f"/v1/assessments/{stored_route['id']}/report", headers={"Accept": "text/html"})
    assert page.status_code == 200
    text = page.get_data(as_text=True)
    assert 'id="plan"' in text and 'id="zones"' in text
    assert f'/v1/assessments/{stored_route["id"]}/geojson' in text  # linked from the page
    rows = list(csv.DictReader(io.StringIO(client.get(
        f"/v1/assessments/{stored_route['id']}/report?format=csv").get_data(as_text=True))))
    receptors = [r for r in rows if r["set"] == "receptors"]
    assert [r["name"] for r in receptors] == [p["name"] for p in stored_route["results"]["receptors"]]
