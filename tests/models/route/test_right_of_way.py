"""Right-of-way edges of a route (models.route.right_of_way): polylines and samples.

Independent references:
* shapely/GEOS: ``LineString.offset_curve`` with a mitre join is the parallel line at a
  given distance built by GEOS itself (positive distance = left side, documented
  shapely behaviour); ``distance`` from a point to a line and ``project`` (distance
  along a line of the nearest point) check the offsets, the spacing and the chainage;
* plane geometry: a point at equal distance from two intersecting lines lies on one of
  their angle bisectors;
* the edges evaluated by the route orchestrator sit at the same positions as these
  samples and give the same B as points of a path set placed there (same engine,
  other code path for the positions).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import LineString, Point

from models.errors import EngineInputError
from models.geometry import Bundle
from models.route.evaluate import evaluate_route
from models.route.sets import EvaluationSets, PathSet
from models.route.right_of_way import RightOfWaySet, edge_vertices_m, right_of_way_edges
from models.route.types import Route, RouteCircuit, RouteConductor, Support


def _route(deviations_deg=(30.0, -50.0), span_m=200.0) -> Route:
    """Invented line: spans of ``span_m`` turning by the given deviations (left positive)."""
    xy = [(100.0, 50.0)]
    heading = math.radians(20.0)
    xy.append((xy[-1][0] + span_m * math.cos(heading), xy[-1][1] + span_m * math.sin(heading)))
    for dev in deviations_deg:
        heading += math.radians(dev)
        xy.append((xy[-1][0] + span_m * math.cos(heading), xy[-1][1] + span_m * math.sin(heading)))
    return Route(tuple(Support(f"T{i}", x, y) for i, (x, y) in enumerate(xy)), ())


def _spans(route: Route) -> list[LineString]:
    xy = [(s.x, s.y) for s in route.supports]
    return [LineString(xy[i:i + 2]) for i in range(len(xy) - 1)]


def _extended(span: LineString, factor: float = 50.0) -> LineString:
    (x0, y0), (x1, y1) = span.coords
    dx, dy = x1 - x0, y1 - y0
    return LineString([(x0 - factor * dx, y0 - factor * dy), (x1 + factor * dx, y1 + factor * dy)])


@pytest.mark.parametrize("offset", [-30.0, -7.5, 12.0, 40.0])
def test_edge_vertices_are_the_mitred_parallel_of_geos(offset):
    route = _route()
    centre = LineString([(s.x, s.y) for s in route.supports])
    v = edge_vertices_m(route, offset)
    # shapely: positive distance offsets to the left; our offsets are + right
    ref = centre.offset_curve(-offset, join_style="mitre", mitre_limit=10.0)
    np.testing.assert_allclose(v, np.asarray(ref.coords), atol=1e-9)


@pytest.mark.parametrize("offset", [-30.0, 25.0])
def test_edge_vertex_at_an_angle_support_lies_on_the_bisector(offset):
    route = _route()
    spans = _spans(route)
    v = edge_vertices_m(route, offset)
    for i in (1, 2):  # the angle supports
        # equidistant (|offset|) from both adjoining span lines -> on a bisector of the two lines
        d_in = _extended(spans[i - 1]).distance(Point(v[i]))
        d_out = _extended(spans[i]).distance(Point(v[i]))
        assert d_in == pytest.approx(abs(offset), abs=1e-9) and d_out == pytest.approx(abs(offset), abs=1e-9)
        # and on the side of the offset: the sign of the cross product with both spans
        for span in (spans[i - 1], spans[i]):
            (x0, y0), (x1, y1) = span.coords
            cross = (x1 - x0) * (v[i][1] - y0) - (y1 - y0) * (v[i][0] - x0)
            assert np.sign(cross) == -np.sign(offset)  # right of the direction of travel = negative cross


@pytest.mark.parametrize("which", [0, 1], ids=["left", "right"])
def test_samples_lie_at_the_offset_on_the_right_side_every_step(which):
    route = _route()
    spans = _spans(route)
    centre = LineString([(s.x, s.y) for s in route.supports])
    step = 7.0
    edge = right_of_way_edges(route, RightOfWaySet(-30.0, 25.0, step, 1.5))[which]
    offset = (-30.0, 25.0)[which]
    assert edge.offset_m == offset and edge.edge == ("left", "right")[which]
    line = LineString(edge.vertices_m)
    xy = edge.points_m[:, :2]
    # both ends included: the first and last samples are the edge ends next to the first and last support
    np.testing.assert_allclose(xy[0], edge.vertices_m[0], atol=1e-9)
    np.testing.assert_allclose(xy[-1], edge.vertices_m[-1], atol=1e-9)
    # spacing step_m along the edge (shapely project), the last interval shorter
    along = np.array([line.project(Point(p)) for p in xy])
    np.testing.assert_allclose(along, edge.distance_m, atol=1e-9)
    np.testing.assert_allclose(np.diff(along)[:-1], step, atol=1e-9)
    assert 0.0 < np.diff(along)[-1] <= step + 1e-9
    assert edge.distance_m[-1] == pytest.approx(line.length, abs=1e-9)
    np.testing.assert_array_equal(edge.points_m[:, 2], 1.5)
    tan = np.tan(np.radians(np.abs([30.0, 50.0])) / 2.0)
    for p in xy:
        # distance |offset| from the straight span it runs along (extended), on the offset's side
        d = [_extended(s).distance(Point(p)) for s in spans]
        k = int(np.argmin([abs(di - abs(offset)) for di in d]))
        assert d[k] == pytest.approx(abs(offset), abs=1e-9)
        (x0, y0), (x1, y1) = spans[k].coords
        assert np.sign((x1 - x0) * (p[1] - y0) - (y1 - y0) * (p[0] - x0)) == -np.sign(offset)
        # from the centre-line polyline: exactly |offset|, except beside an angle support on the outer side,
        # where the nearest centre-line point is the support: at most |offset| / cos(delta / 2) there
        dc = centre.distance(Point(p))
        assert abs(offset) - 1e-9 <= dc <= abs(offset) * math.sqrt(1.0 + tan.max() ** 2) + 1e-9
        if not any(Point(p).distance(Point(s.x, s.y)) < abs(offset) * np.hypot(1.0, t) + 1e-9
                   for s, t in zip(route.supports[1:3], tan)):
            assert dc == pytest.approx(abs(offset), abs=1e-9)
    # chainage = distance along the centre line of its nearest point (shapely project)
    np.testing.assert_allclose(edge.chainage_m, [centre.project(Point(p)) for p in xy], atol=1e-9)


def test_straight_route_edges_are_parallel_lines_with_the_centre_line_chainage():
    r = Route((Support("a", 10.0, 20.0), Support("b", 10.0, 120.0), Support("c", 10.0, 230.0)), ())
    left, right = right_of_way_edges(r, RightOfWaySet(-12.0, 18.0, 25.0, 1.0))
    # heading north: right = east
    np.testing.assert_allclose(right.points_m[:, 0], 28.0)
    np.testing.assert_allclose(left.points_m[:, 0], -2.0)
    np.testing.assert_allclose(right.chainage_m, right.points_m[:, 1] - 20.0, atol=1e-12)
    assert right.distance_m.tolist() == [0.0, 25.0, 50.0, 75.0, 100.0, 125.0, 150.0, 175.0, 200.0, 210.0]


def test_edge_samples_give_the_fields_of_a_path_at_the_same_points():
    c = RouteCircuit("c1", "overhead", 132.0, 400.0,
                     (RouteConductor("L1", -4, 15, 4.0), RouteConductor("L2", 0, 15, 4.0),
                      RouteConductor("L3", 4, 15, 4.0)), Bundle(0.025))
    base = _route((25.0,), span_m=150.0)
    route = Route(base.supports, (c,))
    spec = RightOfWaySet(-20.0, 15.0, 30.0, 1.0)
    _, right = right_of_way_edges(route, spec)
    res = evaluate_route(route, 50.0, EvaluationSets(right_of_way=spec,
                                                     path=PathSet(LineString(right.vertices_m), 30.0, 1.0)))
    s = res.sets["right_of_way"]
    assert s.edges.count("left") + s.edges.count("right") == len(s.edges) and s.edges[-1] == "right"
    mine = np.array([e == "right" for e in s.edges])
    np.testing.assert_allclose(s.field.points_m[mine], res.sets["path"].field.points_m, atol=1e-9)
    np.testing.assert_allclose(s.field.b_rms_t[mine], res.sets["path"].field.b_rms_t, rtol=1e-12)
    np.testing.assert_allclose(s.offset_m[mine], 15.0)
    assert res.locate(res.slices["right_of_way"].start) == ("right_of_way", 0)


@pytest.mark.parametrize("spec, field", [
    pytest.param(RightOfWaySet(10.0, -10.0), "right_of_way.right_m", id="unordered"),
    pytest.param(RightOfWaySet(5.0, 5.0), "right_of_way.right_m", id="equal"),
    pytest.param(RightOfWaySet(float("nan"), 5.0), "right_of_way.left_m", id="nan-left"),
    pytest.param(RightOfWaySet(-5.0, float("inf")), "right_of_way.right_m", id="inf-right"),
    pytest.param(RightOfWaySet(-5.0, 5.0, 0.0), "right_of_way.step_m", id="zero-step"),
    pytest.param(RightOfWaySet(-5.0, 5.0, -1.0), "right_of_way.step_m", id="negative-step"),
    pytest.param(RightOfWaySet(-5.0, 5.0, 5.0, -0.5), "right_of_way.height_m", id="negative-height"),
    pytest.param(RightOfWaySet(-5.0, 5.0, 0.01), "right_of_way.step_m", id="too-many-points"),
])
def test_bad_right_of_way_names_the_field(spec, field):
    with pytest.raises(EngineInputError) as info:
        right_of_way_edges(_route(), spec, max_points=10_000)
    assert info.value.field == field


def test_edge_folding_back_at_an_angle_is_refused():
    # 90 deg left turn after a 30 m span: an edge 40 m to the left (inner side) would run backwards
    r = Route((Support("a", 0.0, 0.0), Support("b", 30.0, 0.0), Support("c", 30.0, 100.0)), ())
    with pytest.raises(EngineInputError) as info:
        right_of_way_edges(r, RightOfWaySet(-40.0, 10.0))
    assert info.value.field == "right_of_way.left_m"
    right_of_way_edges(r, RightOfWaySet(-20.0, 40.0))  # 20 m inside and any distance outside are fine
