"""Evaluation sets -> observation points (models.route.sets).

Independent references: shapely's own linear referencing (``LineString.project``,
GEOS) for distances along a path and distances to the route; plane geometry for the
right-hand normal (a route heading east has its right side to the south).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import LineString, Point

from models.errors import EngineInputError
from models.route.sets import (
    LateralProfileSet,
    grid_axes,
    lateral_profile_points,
    path_points,
    receptor_points,
    stations,
)
from models.route.types import Route, Support


def test_stations_include_both_ends_and_keep_the_step():
    d = stations(25.0, 10.0)
    assert d.tolist() == [0.0, 10.0, 20.0, 25.0]
    # exact multiple: no duplicate end, no float drift past the end
    d = stations(1.0, 0.1)
    assert len(d) == 11 and d[0] == 0.0 and d[-1] == 1.0
    np.testing.assert_allclose(np.diff(d), 0.1, rtol=1e-9)
    # shorter than one step: just the two ends
    assert stations(3.0, 10.0).tolist() == [0.0, 3.0]


def test_path_sampling_polyline():
    # An L-shaped footpath (30 m east, then 17 m north), sampled every 4 m at 1 m height.
    line = LineString([(100.0, 200.0), (130.0, 200.0), (130.0, 217.0)])
    pts, dist = path_points(line, 4.0, 1.0)
    assert pts.shape == (len(dist), 3) and np.all(pts[:, 2] == 1.0)
    # both ends included
    np.testing.assert_allclose(pts[0, :2], [100.0, 200.0])
    np.testing.assert_allclose(pts[-1, :2], [130.0, 217.0])
    assert dist[0] == 0.0 and dist[-1] == pytest.approx(47.0)
    # step spacing along the path, last interval shorter (47 = 11 * 4 + 3)
    np.testing.assert_allclose(np.diff(dist)[:-1], 4.0)
    assert np.diff(dist)[-1] == pytest.approx(3.0)
    # independent check with GEOS linear referencing: each point is on the path at its distance
    for (x, y, _), di in zip(pts, dist):
        assert line.distance(Point(x, y)) < 1e-9
        assert line.project(Point(x, y)) == pytest.approx(di, abs=1e-9)


def test_path_rejects_zero_length_and_too_many_points():
    with pytest.raises(EngineInputError) as err:
        path_points(LineString([(1.0, 1.0), (1.0, 1.0)]), 1.0, 1.0)
    assert err.value.field == "path.geometry"
    with pytest.raises(EngineInputError) as err:
        path_points(LineString([(0.0, 0.0), (1000.0, 0.0)]), 0.01, 1.0, max_points=10_000)
    assert err.value.field == "path.step_m"
    with pytest.raises(EngineInputError) as err:
        path_points(LineString([(0.0, 0.0), (10.0, 0.0)]), 1.0, -1.0)
    assert err.value.field == "path.height_m"


def _route(*xy):
    return Route(tuple(Support(f"T{i}", x, y) for i, (x, y) in enumerate(xy)), ())


def test_lateral_profile_right_is_right_of_travel():
    # Heading east from the first support: "right" is south (-y).
    route = _route((0.0, 0.0), (300.0, 0.0))
    pts, off = lateral_profile_points(route, LateralProfileSet(120.0, -20.0, 30.0, 5.0, 1.5))
    assert off[0] == -20.0 and off[-1] == 30.0 and len(off) == 11
    np.testing.assert_allclose(pts[:, 0], 120.0)
    np.testing.assert_allclose(pts[:, 1], -off)
    np.testing.assert_allclose(pts[:, 2], 1.5)


def test_lateral_profile_on_second_span_is_perpendicular_to_it():
    # Second span heads north-east; chainage 100 m past the angle support.
    route = _route((0.0, 0.0), (200.0, 0.0), (200.0 + 300.0 / math.sqrt(2), 300.0 / math.sqrt(2)))
    pts, off = lateral_profile_points(route, LateralProfileSet(300.0, -10.0, 10.0, 10.0, 1.0))
    centre = pts[1, :2]
    s1, s2 = route.supports[1], route.supports[2]
    second_span = LineString([(s1.x, s1.y), (s2.x, s2.y)])
    assert second_span.distance(Point(*centre)) < 1e-9
    # distance of each profile point to the (extended) span line equals |offset| (GEOS distance)
    long_span = LineString([(200.0 - 1000 / math.sqrt(2), -1000 / math.sqrt(2)), (200.0 + 1000 / math.sqrt(2), 1000 / math.sqrt(2))])
    for (x, y, _), o in zip(pts, off):
        assert long_span.distance(Point(x, y)) == pytest.approx(abs(o), abs=1e-9)
    # right of a north-east heading is south-east: x grows, y falls
    assert pts[2, 0] > centre[0] and pts[2, 1] < centre[1]


def test_lateral_profile_chainage_outside_route_names_the_field():
    route = _route((0.0, 0.0), (300.0, 0.0))
    with pytest.raises(EngineInputError) as err:
        lateral_profile_points(route, LateralProfileSet(301.0, -10.0, 10.0, 1.0, 1.0))
    assert err.value.field == "lateral_profile.chainage_m"
    with pytest.raises(EngineInputError) as err:
        lateral_profile_points(route, LateralProfileSet(10.0, 10.0, -10.0, 1.0, 1.0))
    assert err.value.field == "lateral_profile.to_m"


def test_grid_covers_bbox_with_spacing_at_most_resolution():
    g = grid_axes((10.0, -5.0, 47.0, 12.0), 4.0, 1.0)
    assert g.x_m[0] == 10.0 and g.x_m[-1] == 47.0 and g.y_m[0] == -5.0 and g.y_m[-1] == 12.0
    assert np.max(np.diff(g.x_m)) <= 4.0 and np.max(np.diff(g.y_m)) <= 4.0
    pts = g.points_m()
    assert pts.shape == (g.shape[0] * g.shape[1], 3)
    # row-major (y outer, x inner): reshaping gives values[j, i] at (x[i], y[j])
    np.testing.assert_allclose(pts[:, 0].reshape(g.shape)[2, 3], g.x_m[3])
    np.testing.assert_allclose(pts[:, 1].reshape(g.shape)[2, 3], g.y_m[2])
    with pytest.raises(EngineInputError) as err:
        grid_axes((0.0, 0.0, 1000.0, 1000.0), 0.5, 1.0, max_points=100_000)
    assert err.value.field == "grid.resolution_m"
    with pytest.raises(EngineInputError) as err:
        grid_axes((0.0, 0.0, -1.0, 1.0), 0.5, 1.0)
    assert err.value.field == "grid.bbox"


def test_receptor_heights_checked():
    pts = receptor_points([1.0, 2.0], [3.0, 4.0], [1.5, 4.0])
    assert pts.tolist() == [[1.0, 3.0, 1.5], [2.0, 4.0, 4.0]]
    with pytest.raises(EngineInputError) as err:
        receptor_points([1.0, 2.0], [3.0, 4.0], [1.5, float("nan")])
    assert err.value.field == "receptors.features[1].properties.height_m"
