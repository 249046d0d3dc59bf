"""Route plan geometry: bisector offsets, chainage, attachment points, validation.

References: plane geometry checked with shapely (distances of the conductor
lines from the centre line), and the convention stated in models/route/alignment.py
(offset along the bisector, scaled so the perpendicular spacing is kept: common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import LineString, Point

from models.errors import GeometryError, LoadingError
from models.geometry import Bundle, CurrentPhasor
from models.route.alignment import (
    attachment_points_m,
    deviation_angles_deg,
    frame_at_chainage,
    offset_vectors,
    route_centre_line,
    span_directions,
    strung_wires,
    support_chainage_m,
)
from models.route.types import Attachment, Route, RouteCircuit, RouteConductor, RouteEarthWire, Support


def _angle_route(deviation_deg=60.0):
    """Two 300 m spans with a left turn of ``deviation_deg`` at the middle support."""
    t = math.radians(deviation_deg)
    return Route(
        (Support("s1", 0.0, 0.0), Support("s2", 300.0, 0.0), Support("s3", 300.0 + 300.0 * math.cos(t),
                                                                      300.0 * math.sin(t))),
        (),
    )


def _circuit(sag=6.0, **kw):
    conductors = (
        RouteConductor("L1", -6.0, 20.0, sag, **kw),
        RouteConductor("L2", 0.0, 24.0, sag, **kw),
        RouteConductor("L3", 6.0, 20.0, sag, **kw),
    )
    return RouteCircuit("c1", "overhead", 132.0, 500.0, conductors, Bundle(0.03, 2, 0.4))


@pytest.mark.parametrize("deviation", [0.0, 20.0, 60.0, -45.0, 90.0])
def test_perpendicular_convention_keeps_the_offset_in_both_spans(deviation):
    # With the default convention every span's conductor is parallel to the centre line at
    # exactly offset_m (shapely distance from points of the conductor to the span's centre line).
    route = _angle_route(deviation)
    centre = np.array([[s.x, s.y] for s in route.supports])
    for offset in (-7.5, 4.0):
        att = attachment_points_m(route, offset, 20.0)
        for i in range(2):
            span_line = LineString(centre[i:i + 2])
            extended = LineString([centre[i] - 2.0 * (centre[i + 1] - centre[i]),
                                   centre[i + 1] + 2.0 * (centre[i + 1] - centre[i])])
            for t in (0.0, 0.5, 1.0):
                p = att[i, :2] + t * (att[i + 1, :2] - att[i, :2])
                assert extended.distance(Point(p)) == pytest.approx(abs(offset), rel=1e-12)
            # right of the direction of travel <=> positive offset (cross product sign)
            d = centre[i + 1] - centre[i]
            mid = (att[i, :2] + att[i + 1, :2]) / 2 - (centre[i] + centre[i + 1]) / 2
            assert np.sign(d[0] * mid[1] - d[1] * mid[0]) == -np.sign(offset)
            assert span_line.length == pytest.approx(300.0)


def test_along_bisector_convention_narrows_the_spacing_by_cos_half_angle():
    route = _angle_route(60.0)
    att = attachment_points_m(route, 5.0, 20.0, convention="along_bisector")
    # cross-arm distance from the angle support = offset
    assert np.hypot(*(att[1, :2] - [300.0, 0.0])) == pytest.approx(5.0, rel=1e-12)
    # perpendicular distance from the first span's centre line at the angle support = 5 cos(30 deg)
    assert abs(att[1, 1]) == pytest.approx(5.0 * math.cos(math.radians(30.0)), rel=1e-12)
    att_p = attachment_points_m(route, 5.0, 20.0)
    assert np.hypot(*(att_p[1, :2] - [300.0, 0.0])) == pytest.approx(5.0 / math.cos(math.radians(30.0)), rel=1e-12)
    with pytest.raises(GeometryError, match="convention"):
        offset_vectors(route, "sideways")


def test_offsets_lie_on_the_bisector():
    route = _angle_route(70.0)
    v = offset_vectors(route)[1]
    u = span_directions(route)
    # the bisector makes equal angles with both span directions
    a_in = math.acos(np.dot(v, u[0]) / np.linalg.norm(v))
    a_out = math.acos(np.dot(v, -u[1]) / np.linalg.norm(v))
    assert a_in == pytest.approx(a_out, rel=1e-12)
    assert deviation_angles_deg(route)[1] == pytest.approx(70.0, rel=1e-12)


def test_chainage_centre_line_and_frame():
    route = Route((Support("a", 0, 0), Support("b", 300, 400), Support("c", 300, 1000)), ())
    np.testing.assert_allclose(support_chainage_m(route), [0.0, 500.0, 1100.0])
    line = route_centre_line(route)
    assert isinstance(line, LineString) and line.length == pytest.approx(1100.0)
    p, t, n = frame_at_chainage(route, 250.0)
    np.testing.assert_allclose(p, [150.0, 200.0])
    np.testing.assert_allclose(t, [0.6, 0.8])
    np.testing.assert_allclose(n, [0.8, -0.6])  # right of travel
    p, t, _ = frame_at_chainage(route, 1100.0)
    np.testing.assert_allclose(p, [300.0, 1000.0])
    np.testing.assert_allclose(line.interpolate(800.0).coords[0], frame_at_chainage(route, 800.0)[0])
    with pytest.raises(GeometryError, match="chainage_m"):
        frame_at_chainage(route, 1100.5)


def test_attachment_z_is_ground_elevation_plus_height():
    route = Route((Support("a", 0, 0, 12.0), Support("b", 300, 0, 3.0)), ())
    att = attachment_points_m(route, [1.0, 2.0], [20.0, 25.0])
    np.testing.assert_allclose(att, [[0.0, -1.0, 32.0], [300.0, -2.0, 28.0]])


def test_strung_wires_per_support_attachments_and_spans():
    att = (Attachment(-6.0, 20.0), Attachment(-6.5, 22.0), Attachment(-6.0, 18.0))
    conductors = (RouteConductor("L1", 0.0, 0.0, 5.0, attachments=att), RouteConductor("L2", 0.0, 24.0, 5.0),
                  RouteConductor("L3", 6.0, 20.0, horizontal_tension_n=20_000.0, weight_n_per_m=15.0))
    route = Route(
        (Support("a", 0, 0, 1.0), Support("b", 300, 0, 2.0), Support("c", 600, 100, 0.0)),
        (RouteCircuit("c1", "overhead", 132.0, 500.0, conductors, Bundle(0.03)),),
        (RouteEarthWire(0.0, 30.0, 0.012, 4.0),),
    )
    wires = strung_wires(route)
    assert [w.path for w in wires] == ["route.circuits[0].conductors[0]", "route.circuits[0].conductors[1]",
                                       "route.circuits[0].conductors[2]", "route.earth_wires[0]"]
    w0 = wires[0]
    np.testing.assert_allclose(w0.attachment_m[:, 2], [21.0, 24.0, 18.0])
    for i, span in enumerate(w0.spans):
        d = w0.attachment_m[i + 1] - w0.attachment_m[i]
        assert span.span_m == pytest.approx(math.hypot(d[0], d[1]))
        assert span.height_difference_m == pytest.approx(d[2])
        assert span.midspan_sag_m == pytest.approx(5.0, rel=1e-10)
    assert all(s.catenary_constant_m == pytest.approx(20_000.0 / 15.0) for s in wires[2].spans)


def _route_with(conductor=None, circuit=None, supports=None, earth=()):
    supports = supports or (Support("a", 0, 0), Support("b", 300, 0), Support("c", 600, 0))
    if circuit is None:
        conductor = conductor or RouteConductor("L1", 0.0, 20.0, 5.0)
        circuit = RouteCircuit("c1", "overhead", 132.0, 500.0,
                               (conductor, RouteConductor("L2", 8.0, 20.0, 5.0)), Bundle(0.03))
    return Route(supports, (circuit,), earth)


@pytest.mark.parametrize(
    "route, field, cls",
    [
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, -1.0)), "route.circuits[0].conductors[0].sag_m",
                     GeometryError, id="negative-sag"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, 25.0)), "route.circuits[0].conductors[0].sag_m",
                     GeometryError, id="sag-reaches-ground"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, attachments=(Attachment(0, 20),))),
                     "route.circuits[0].conductors[0].attachments", GeometryError, id="attachment-count"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, attachments=(
            Attachment(0, 20), Attachment(0, -1), Attachment(0, 20)))),
            "route.circuits[0].conductors[0].attachments[1].height_m", GeometryError, id="attachment-below-ground"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, horizontal_tension_n=1e4)),
                     "route.circuits[0].conductors[0].weight_n_per_m", GeometryError, id="tension-without-weight"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, 3.0, horizontal_tension_n=1e4,
                                                weight_n_per_m=10.0)),
                     "route.circuits[0].conductors[0].sag_m", GeometryError, id="sag-and-tension"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, horizontal_tension_n=2e3, weight_n_per_m=15.0)),
                     "route.circuits[0].conductors[0].horizontal_tension_n", GeometryError, id="tension-too-low"),
        pytest.param(_route_with(RouteConductor("X", 0.0, 20.0, 5.0)), "route.circuits[0].conductors[0].phase",
                     LoadingError, id="unknown-phase"),
        pytest.param(_route_with(RouteConductor("L1", 8.0, 20.0, 5.0)), "route.circuits[0].conductors[1]",
                     GeometryError, id="coincident-conductors"),
        pytest.param(_route_with(RouteConductor("L1", 0.0, 20.0, 5.0, current=CurrentPhasor(-1.0, 0.0))),
                     "route.circuits[0].conductors[0].current.magnitude_a", LoadingError, id="negative-current"),
        pytest.param(_route_with(supports=(Support("a", 0, 0), Support("b", 0, 0))), "route.supports[1]",
                     GeometryError, id="coincident-supports"),
        pytest.param(_route_with(supports=(Support("a", 0, 0), Support("b", 300, 0), Support("c", 0, 10))),
                     "route.supports[1]", GeometryError, id="deviation-too-large"),
        pytest.param(_route_with(supports=(Support("a", 0, 0),)), "route.supports", GeometryError, id="one-support"),
        pytest.param(_route_with(supports=(Support("a", 0, 0), Support("a", 300, 0))), "route.supports[1].id",
                     GeometryError, id="duplicate-id"),
        pytest.param(_route_with(supports=(Support("a", 0, 0), Support("b", math.nan, 0))), "route.supports[1].x",
                     GeometryError, id="nan-position"),
        pytest.param(_route_with(earth=(RouteEarthWire(0.0, 30.0, 0.0, 4.0),)), "route.earth_wires[0].diameter_m",
                     GeometryError, id="earth-wire-diameter"),
        pytest.param(_route_with(circuit=RouteCircuit("u", "underground", 132.0, 500.0,
                                                      (RouteConductor("L1", 0.0, -1.2, 0.5),), Bundle(0.05))),
                     "route.circuits[0].conductors[0].sag_m", GeometryError, id="underground-sag"),
        pytest.param(_route_with(circuit=RouteCircuit("u", "underground", 132.0, 500.0,
                                                      (RouteConductor("L1", 0.0, 1.2),), Bundle(0.05))),
                     "route.circuits[0].conductors[0].height_m", GeometryError, id="underground-above-ground"),
        pytest.param(Route((Support("a", 0, 0), Support("b", 300, 0)), ()), "route.circuits", GeometryError,
                     id="no-circuit"),
    ],
)
def test_validation_errors_name_the_field(route, field, cls):
    with pytest.raises(cls) as info:
        strung_wires(route)
    assert info.value.field == field
    assert field in str(info.value)


def test_underground_cable_route_is_straight_below_ground():
    c = RouteCircuit("u", "underground", 132.0, 500.0,
                     (RouteConductor("L1", -0.3, -1.2), RouteConductor("L2", 0.0, -1.2), RouteConductor("L3", 0.3, -1.2)),
                     Bundle(0.08))
    wires = strung_wires(_route_with(circuit=c))
    assert all(math.isinf(s.catenary_constant_m) for w in wires for s in w.spans)
    assert np.all(wires[0].attachment_m[:, 2] == -1.2)
