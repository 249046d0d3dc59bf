"""service.reports and service.plots as pure functions.

External references: the csv module (RFC 4180 parsing), html.parser, xml.etree (SVG
is well-formed XML), shapely (GeoJSON geometry validity and ring orientation, which
RFC 7946 section 3.1.6 fixes as counter-clockwise exteriors and clockwise holes), and
the chord length of a regular polygon, s = 2 A sin(pi/n) (elementary geometry), for the
bundle layout.
"""

from __future__ import annotations

import copy
import csv
import io
import json
import math
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import shapely
from shapely.geometry import shape

from service import plots, reports

DEMO = Path(__file__).resolve().parents[2] / "service" / "examples" / "demo_cross_section.json"


@pytest.fixture(scope="module")
def report() -> dict:
    """The demo assessment as stored (via the service, in memory)."""
    from service import create_app

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    body = json.loads(DEMO.read_text(encoding="utf-8"))
    body["profile"]["step_m"] = 2.0  # 101 points: quick
    r = app.test_client().post("/v1/assessments", json=body)
    assert r.status_code == 201
    app.extensions["emf_storage"].engine.dispose()
    return r.get_json()


# --------------------------------------------------------------------------- CSV


def test_csv_parses_and_equals_the_json_report(report):
    text = reports.render_csv(report)
    rows = list(csv.reader(io.StringIO(text)))
    header, body = rows[0], rows[1:]
    assert len(body) == len(report["points"])
    for col in ("offset_m", "height_m", "e_kv_m", "b_ut", "e_max_kv_m", "b_max_ut", "b_horizontal_ut",
                "e_vertical_phase_deg"):
        assert col in header
    for line, point in zip(body, report["points"]):
        row = dict(zip(header, line))
        assert row["set"] == "profile"
        flat = {**point, **point["components"]}
        for key, value in flat.items():
            if key != "components":
                assert float(row[key]) == value, key  # exact: shortest round-trip repr
    # One exposure-index column per compliance entry; its largest value over the points is
    # the report's exposure index for that entry (value / limit at the worst point).
    for c in report["compliance"]:
        col = f"exposure_index:{c['level_id']}:{c['quantity']}"
        largest = max(float(dict(zip(header, line))[col]) for line in body)
        assert largest == pytest.approx(c["exposure_index"], rel=1e-12)


def test_csv_of_explicit_points_keeps_their_order():
    rep = {"input": {"points": [{"offset_m": 5.0, "height_m": 2.0}, {"offset_m": -5.0, "height_m": 1.0}]},
           "compliance_quantity": "resultant", "compliance": [],
           "points": [{"offset_m": 5.0, "height_m": 2.0, "e_kv_m": 1.0, "b_ut": 2.0},
                      {"offset_m": -5.0, "height_m": 1.0, "e_kv_m": 3.0, "b_ut": 4.0}]}
    rows = list(csv.DictReader(io.StringIO(reports.render_csv(rep))))
    assert [(r["set"], r["offset_m"], r["b_ut"]) for r in rows] == [("points", "5.0", "2.0"), ("points", "-5.0", "4.0")]


# --------------------------------------------------------------------------- HTML


class _Text(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.text = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def test_html_shows_identification_verdict_table_and_cautions(report):
    page = reports.render_html(report)
    parser = _Text()
    parser.feed(page)
    text = " ".join(" ".join(parser.text).split())
    for item in (report["title"], report["reference"], report["id"], report["created_at"], report["digest"],
                 report["engine_version"], report["catalogue_version"], reports.canonical_input_digest(report)):
        assert item in text
    assert ("FAIL" if report["outcome"] == "fail" else "PASS") in text
    for c in report["compliance"]:
        assert c["title"] in text
    for caution in report["cautions"]:
        assert " ".join(caution.split()) in text
    for a in report["assumptions"]:
        assert " ".join(a.split()) in text
    assert "resultant" in text and "2-D" in text


def test_input_digest_is_sha256_of_the_stored_request(report):
    import hashlib

    from service.storage import canonical_json

    expected = hashlib.sha256(canonical_json(report["input"]).encode("utf-8")).hexdigest()
    assert reports.canonical_input_digest(report) == expected


def test_user_text_is_escaped_everywhere(report):
    evil = copy.deepcopy(report)
    evil["title"] = "<script>alert('t')</script> & co"
    evil["reference"] = '"><img src=x onerror=alert(1)>'
    circuit = evil["input"]["cross_section"]["circuits"][0]
    circuit["id"] = "<b>west</b> $\\frac{1}{0}$"  # also not mathtext for matplotlib
    circuit["conductors"][0]["phase"] = "L1</text><script>x()</script>"
    evil["compliance"][0]["title"] = "<iframe src=//example.org>"
    page = reports.render_html(evil)
    parser = _Text()
    parser.feed(page)
    assert not [t for t, _ in parser.tags if t in ("script", "img", "iframe", "b")]
    assert "&lt;script&gt;alert(&#39;t&#39;)&lt;/script&gt; &amp; co" in page


def test_figures_are_well_formed_svg_with_unique_ids(report):
    ctx = reports.html_context(report)
    svgs = [str(f["svg"]) for f in ctx["figures"]] + [str(ctx["drawing"])]
    ids: list[str] = []
    for svg in svgs:
        root = ET.fromstring(svg)
        assert root.tag.endswith("svg") and root.get("viewBox")
        ids += [el.get("id") for el in root.iter() if el.get("id")]
        assert "<!--" not in svg
    assert len(ids) == len(set(ids))  # several figures in one page without clashes


# --------------------------------------------------------------------------- figures


def section() -> dict:
    return json.loads(DEMO.read_text(encoding="utf-8"))["cross_section"]


def test_cross_section_is_drawn_to_scale():
    fig = plots.cross_section_figure(section(), evaluation_heights_m=[1.0])
    fig.canvas.draw()
    ax = fig.axes[0]
    (x0, y0), (x1, y1) = ax.transData.transform([(0.0, 0.0), (1.0, 1.0)])
    assert x1 - x0 == pytest.approx(y1 - y0, rel=1e-6)  # 1 m across = 1 m up on the page
    xlim, ylim = ax.get_xlim(), ax.get_ylim()
    for c in section()["circuits"][0]["conductors"]:
        assert xlim[0] < c["offset_m"] < xlim[1] and ylim[0] < c["height_m"] < ylim[1]
    # The evaluation height and the ground are drawn as horizontal lines at 1 m and 0 m.
    levels = {round(line.get_ydata()[0], 9) for line in ax.lines
              if len(line.get_ydata()) == 2 and line.get_ydata()[0] == line.get_ydata()[1]}
    assert {0.0, 1.0} <= levels


@pytest.mark.parametrize("count", [2, 3, 4, 6])
def test_bundle_layout_has_the_stated_spacing(count):
    spacing = 0.45
    pos = plots.bundle_positions_m(count, spacing)
    assert pos.shape == (count, 2)
    # Adjacent subconductors on the circle are one chord apart: s = 2 A sin(pi/n) by construction.
    ring = np.vstack([pos, pos[:1]])
    assert np.allclose(np.hypot(*np.diff(ring, axis=0).T), spacing, rtol=1e-12)
    assert np.allclose(pos.mean(axis=0), 0.0, atol=1e-12)
    # One flat side at the bottom (models.geometry.Bundle): the two lowest share a height.
    lowest = np.sort(pos[:, 1])[:2]
    assert lowest[0] == pytest.approx(lowest[1], abs=1e-12)


def _horizontal_levels(ax) -> set[float]:
    return {round(float(line.get_ydata()[0]), 9) for line in ax.lines
            if len(line.get_ydata()) == 2 and line.get_ydata()[0] == line.get_ydata()[1]}


def _vertical_positions(ax) -> set[float]:
    return {round(float(line.get_xdata()[0]), 9) for line in ax.lines
            if len(line.get_xdata()) == 2 and line.get_xdata()[0] == line.get_xdata()[1]}


def test_profile_plot_marks_thresholds_and_right_of_way():
    x = np.linspace(-50, 50, 101)
    e, b = 4.0 / (1 + (x / 15) ** 2), 25.0 / (1 + (x / 20) ** 2)
    fig = plots.lateral_profile_figure(x, e, b, e_thresholds=[plots.Threshold("level A", 5.0)],
                                       b_thresholds=[plots.Threshold("level B", 20.0),
                                                     plots.Threshold("far above", 1000.0)],
                                       right_of_way={"left_m": -25.0, "right_m": 30.0}, height_m=1.0)
    ax_e, ax_b = fig.axes
    assert 5.0 in _horizontal_levels(ax_e) and 20.0 in _horizontal_levels(ax_b)
    assert 1000.0 not in _horizontal_levels(ax_b)  # listed as "above the plot" instead
    assert any("far above" in t.get_text() for t in ax_b.texts)
    for ax in (ax_e, ax_b):
        assert {-25.0, 30.0} <= _vertical_positions(ax)
    assert ax_e.get_ylabel() == "E resultant (kV/m)" and ax_b.get_ylabel() == "B resultant (µT)"
    assert "(m)" in ax_b.get_xlabel()
    # Black and white: the two curves differ by line style and marker, not only colour.
    (le,), (lb,) = ([ln for ln in ax.lines if len(ln.get_xdata()) == len(x)] for ax in (ax_e, ax_b))
    assert (le.get_linestyle(), le.get_marker()) != (lb.get_linestyle(), lb.get_marker())

    plain = plots.lateral_profile_figure(x, e, b)
    assert not any(_vertical_positions(ax) - {0.0} for ax in plain.axes)  # no right-of-way given


# --------------------------------------------------------------------------- GeoJSON


def route_report(crs: str = "EPSG:4326") -> dict:
    """A route report in the shape of issue 5's results (values invented, geometry lon/lat)."""
    lon0, lat0 = 9.1, 45.2
    ring_cw = [[lon0, lat0 - 0.001], [lon0 + 0.01, lat0 - 0.001], [lon0 + 0.01, lat0 + 0.001],
               [lon0, lat0 + 0.001], [lon0, lat0 - 0.001]][::-1]  # clockwise exterior: wrong winding
    hole_ccw = [[lon0 + 0.004, lat0 - 0.0002], [lon0 + 0.005, lat0 - 0.0002], [lon0 + 0.005, lat0 + 0.0002],
                [lon0 + 0.004, lat0 + 0.0002], [lon0 + 0.004, lat0 - 0.0002]]  # counter-clockwise hole: wrong
    return {
        "id": "00000000-0000-4000-8000-000000000001", "title": "route", "reference": "R-1", "outcome": "fail",
        "compliance_quantity": "resultant",
        "input": {"route": {"crs": crs, "supports": [{"id": "S1", "x": lon0, "y": lat0},
                                                     {"id": "S2", "x": lon0 + 0.01, "y": lat0}],
                            "circuits": []}},
        "compliance": [{"level_id": "custom-1ut", "quantity": "B", "limit_ut": 1.0, "title": "1 µT"}],
        "results": {
            "path": [{"x": lon0 + 0.005, "y": lat0 - 0.002 + 0.0005 * k, "distance_m": 55.0 * k, "height_m": 1.0,
                      "e_kv_m": 0.1 * k, "b_ut": 0.5 * k} for k in range(5)],
            "receptors": [{"id": "r1", "name": "house 12", "x": lon0 + 0.002, "y": lat0 + 0.0015, "height_m": 1.5,
                           "e_kv_m": 0.2, "b_ut": 0.7}],
        },
        "zones": {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {"threshold": "1 µT"},
             "geometry": {"type": "Polygon", "coordinates": [ring_cw, hole_ccw]}}]},
    }


def test_geojson_follows_rfc7946_and_loads_in_shapely():
    fc = reports.render_geojson(route_report())
    assert fc["type"] == "FeatureCollection" and "coordinate_reference" not in fc
    kinds = [f["properties"]["kind"] for f in fc["features"]]
    assert kinds.count("path") == 5 and kinds.count("receptor") == 1 and kinds.count("zone") == 1
    for feature in fc["features"]:
        geom = shape(feature["geometry"])
        assert geom.is_valid
        xs, ys = np.asarray(shapely.get_coordinates(geom)).T
        assert np.all((-180 <= xs) & (xs <= 180)) and np.all((-90 <= ys) & (ys <= 90))  # lon, lat
    zone = shape(next(f for f in fc["features"] if f["properties"]["kind"] == "zone")["geometry"])
    assert zone.exterior.is_ccw and not any(r.is_ccw for r in zone.interiors)  # right-hand rule
    assert len(zone.interiors) == 1  # the hole is kept
    receptor = next(f for f in fc["features"] if f["properties"]["kind"] == "receptor")
    assert receptor["properties"]["name"] == "house 12"
    assert receptor["properties"]["exposure_index:custom-1ut:B"] == pytest.approx(0.7)
    assert receptor["geometry"]["coordinates"] == [9.1 + 0.002, 45.2 + 0.0015]  # unchanged lon/lat
    json.dumps(fc, allow_nan=False)


def test_geojson_of_projected_route_is_lonlat_unless_native_is_asked():
    fc = reports.render_geojson(route_report("EPSG:32632"))
    assert "coordinate_reference" not in fc  # transformed to lon/lat (RFC 7946 section 4)
    native = reports.render_geojson(route_report("EPSG:32632"), native=True)
    assert "EPSG:32632" in native["coordinate_reference"]


def test_geojson_refuses_cross_section(report):
    with pytest.raises(reports.NotARouteReport):
        reports.render_geojson(report)


def test_route_report_html_has_plan_view():
    rep = route_report()
    rep["results"]["lateral_profile"] = [{"offset_m": float(o), "x": 9.105, "y": 45.2 + o * 1e-5, "height_m": 1.0,
                                          "e_kv_m": 1.0 / (1 + o * o / 100), "b_ut": 2.0 / (1 + o * o / 400)}
                                         for o in range(-50, 51, 5)]
    page = reports.render_html(rep)
    assert 'id="plan"' in page and 'id="plot-path"' in page and 'id="plot-lateral-profile"' in page
    # Two profile figures, a plan and a drawing in one page: no element id may repeat, or one
    # figure would be drawn with another's glyph and clip definitions.
    ids = re.findall(r'\bid="([^"]+)"', page)
    assert len(ids) == len(set(ids))
    refs = set(re.findall(r'(?:href="#|url\(#)([^")]+)', page))
    assert refs <= set(ids)


@pytest.mark.parametrize("value, text", [(4.120042302090758, "4.120"), (200.00000000000003, "200.0"),
                                         (0.054858921, "0.05486"), (1.5e-7, "1.500e-07"), (0.0, "0"),
                                         (None, "–"), (float("nan"), "–")])
def test_format_number(value, text):
    assert reports.format_number(value) == text
    if isinstance(value, float) and math.isfinite(value) and value:
        assert float(text) == pytest.approx(value, rel=5e-4)


# --------------------------------------------------------------------------- real route reports


@pytest.fixture(scope="module", params=["demo_route_lonlat", "demo_route"])
def real_route_report(request) -> dict:
    """A route report from the route builder (the invented demo route), grid coarsened to 10 m for speed."""
    from service.report import build_report
    from service.route_schemas import load_route_request

    body = json.loads((DEMO.parent / f"{request.param}.json").read_text(encoding="utf-8"))
    body["grid"]["resolution_m"] = 10.0
    rep = build_report(load_route_request(body, max_route_points=200_000, max_conductors=64))
    return {"id": "00000000-0000-4000-8000-000000000003", "created_at": "2026-12-01T00:00:00.000000Z",
            **rep, "digest": "0" * 64}


def test_real_route_geojson_is_rfc7946(real_route_report):
    rep = real_route_report
    fc = reports.render_geojson(rep)
    assert "coordinate_reference" not in fc  # lon/lat for both demo routes
    assert ("coordinate_reference" in reports.render_geojson(rep, native=True)) is (not rep["crs"]["geographic"])
    kinds = [f["properties"]["kind"] for f in fc["features"]]
    assert kinds.count("receptor") == len(rep["results"]["receptors"]) == 5
    assert kinds.count("path") == len(rep["results"]["path"])
    zones = [f for f in fc["features"] if f["properties"]["kind"] == "zone"]
    assert zones and any(f["geometry"]["coordinates"] for f in zones)
    for f in fc["features"]:
        geom = shape(f["geometry"])
        assert geom.is_valid, f["properties"]
        xs, ys = np.asarray(shapely.get_coordinates(geom)).reshape(-1, 2).T  # RFC 7946: lon, lat in degrees
        assert np.all(np.abs(xs) <= 180) and np.all(np.abs(ys) <= 90)
        for poly in getattr(geom, "geoms", [geom]) if f["properties"]["kind"] == "zone" else ():
            assert poly.exterior.is_ccw and not any(r.is_ccw for r in poly.interiors)
    # Points are where the report says they are, in the request's coordinates (native output).
    fc = reports.render_geojson(rep, native=True)
    route_line = next(f for f in fc["features"] if f["properties"]["kind"] == "route")
    assert route_line["geometry"]["coordinates"] == [[s["x"], s["y"]] for s in rep["input"]["route"]["supports"]]
    first = next(f for f in fc["features"] if f["properties"]["kind"] == "receptor")
    r0 = rep["results"]["receptors"][0]
    assert first["geometry"]["coordinates"] == [r0["x"], r0["y"]] and first["properties"]["b_ut"] == r0["b_ut"]
    json.dumps(fc, allow_nan=False)


def test_real_route_csv_and_html(real_route_report):
    rep = real_route_report
    rows = list(csv.DictReader(io.StringIO(reports.render_csv(rep))))
    by_set: dict[str, list] = {}
    for row in rows:
        by_set.setdefault(row["set"], []).append(row)
    grid = rep["results"]["grid"]
    assert len(by_set["grid"]) == grid["nx"] * grid["ny"]
    for name in ("path", "lateral_profile", "receptors"):
        assert [float(r["b_ut"]) for r in by_set[name]] == [p["b_ut"] for p in rep["results"][name]]
    assert float(by_set["grid"][-1]["b_ut"]) == grid["b_ut"][-1][-1]
    assert max(float(r["b_ut"]) for r in rows) == rep["maxima"]["b"]["value_ut"]
    if not rep["crs"]["geographic"]:
        return  # the page is rendered once, for the lon/lat variant (a few seconds)
    page = reports.render_html(rep)
    for element in ('id="plan"', 'id="plot-path"', 'id="plot-lateral-profile"', 'id="drawing"', 'id="zones"'):
        assert element in page
    ids = re.findall(r'\bid="([^"]+)"', page)
    assert len(ids) == len(set(ids))


def test_several_load_cases_get_a_figure_and_a_table(report):
    rep = copy.deepcopy(report)
    pts = rep["points"]
    rep["load_cases"] = [
        {"label": "maximum rating", "points": pts, "maxima": rep["maxima"], "outcome": "fail"},
        {"label": "annual mean", "points": [{**p, "b_ut": p["b_ut"] / 2} for p in pts],
         "maxima": {"e": rep["maxima"]["e"], "b": {**rep["maxima"]["b"], "value_ut": rep["maxima"]["b"]["value_ut"] / 2}},
         "outcome": "fail"}]
    ctx = reports.html_context(rep)
    assert ctx["cases"]["figure"] and [c["label"] for c in ctx["cases"]["table"]] == ["maximum rating", "annual mean"]
    assert ctx["cases"]["table"][1]["b"] == reports.format_number(rep["maxima"]["b"]["value_ut"] / 2)
    assert 'id="load-cases"' in reports.render_html(rep)
    single = {k: v for k, v in report.items() if k not in ("load_cases", "load_case_summary")}
    assert reports.html_context(single)["cases"] is None  # one case: nothing extra


def test_demo_load_cases_come_from_the_service(report):
    # The demo request has three load cases; the section lists the base case and those, with
    # the maxima the service computed for each (superposition: 1.8 x the current, 1.8 x B).
    ctx = reports.html_context(report)
    labels = [c["label"] for c in ctx["cases"]["table"]]
    assert labels == ["As requested", "Winter peak rating (fictitious)",
                      "East circuit out of service, west carrying both", "Annual mean load (fictitious)"]
    base, peak = report["load_cases"][0], report["load_cases"][1]
    assert peak["maxima"]["b"]["value_ut"] == pytest.approx(1.8 * base["maxima"]["b"]["value_ut"], rel=1e-12)
    assert ctx["cases"]["table"][1]["b"] == reports.format_number(peak["maxima"]["b"]["value_ut"])
    # the summary: the 0.4 µT planning threshold fails in every case; the governing case for B
    # is the one with the largest current (west carrying 2000 A or 1.8 x 1000 A on both)
    assert ctx["cases"]["summary"]["outcome"] == report["load_case_summary"]["outcome"] == "fail"
    assert ctx["cases"]["summary"]["failing"] == labels
    page = reports.render_html(report)
    assert 'id="load-case-outcome"' in page and "Governing load case per threshold" in page
    governing = {(g["level_id"], g["quantity"]): g["case_id"] for g in report["load_case_summary"]["governing"]}
    assert governing[("planning-0.4ut", "B")] in ("winter-peak", "east-out")
