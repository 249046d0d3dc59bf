"""Request CRS -> working metre plane and back (models.route.crs).

Independent references:
* pyproj.Geod (geodesic forward/inverse problem on the WGS 84 ellipsoid, Karney's
  algorithm in PROJ's geodesic library) for true ground distances;
* the UTM zone rule (6-degree zones numbered from 180 W, 326zz north / 327zz south,
  Snyder, USGS PP 1395, 1987, ch. 8; common practice);
* UTM point scale 0.9996 .. ~1.0004 within a zone (same source).
"""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Geod

from models.errors import EngineInputError
from models.route.crs import MAX_SCALE_DEVIATION, utm_epsg, working_frame

GEOD = Geod(ellps="WGS84")


@pytest.mark.parametrize(
    ("lon", "lat", "epsg"),
    [
        pytest.param(9.2, 45.5, 32632, id="zone32-north"),        # 6..12 E
        pytest.param(-0.1, 51.5, 32630, id="zone30-just-west-of-greenwich"),
        pytest.param(0.0, 0.0, 32631, id="equator-greenwich"),
        pytest.param(151.2, -33.9, 32756, id="zone56-south"),
        pytest.param(-179.9, -10.0, 32701, id="zone1"),
        pytest.param(179.9, 10.0, 32660, id="zone60"),
    ],
)
def test_utm_zone_rule(lon, lat, epsg):
    # zone = floor((lon + 180) / 6) + 1 (Snyder 1987, ch. 8; common practice)
    assert utm_epsg(lon, lat) == epsg


def test_absent_crs_is_local_metres_identity():
    frame = working_frame(None, [0.0, 100.0], [0.0, 50.0])
    assert not frame.transforms and frame.working_crs is None
    x, y = frame.to_working([12.5], [-3.0])
    assert x.tolist() == [12.5] and y.tolist() == [-3.0]


def test_projected_metre_crs_used_as_is():
    frame = working_frame("EPSG:32632", [512000.0, 512400.0], [5040000.0, 5040300.0])
    assert not frame.transforms and frame.working_crs == "EPSG:32632"
    x, y = frame.to_request([512001.25], [5040002.5])
    assert x.tolist() == [512001.25] and y.tolist() == [5040002.5]


@pytest.mark.parametrize("crs", ["EPSG:4326", "OGC:CRS84"])
def test_lon_lat_to_local_utm_one_km_north(crs):
    lon0, lat0 = 9.137, 45.462
    frame = working_frame(crs, [lon0], [lat0])
    assert frame.geographic and frame.working_crs == "EPSG:32632"
    # A point 1000 m due north on the ellipsoid (pyproj.Geod forward geodesic)
    lon1, lat1, _ = GEOD.fwd(lon0, lat0, 0.0, 1000.0)
    x, y = frame.to_working([lon0, lon1], [lat0, lat1])
    d = float(np.hypot(x[1] - x[0], y[1] - y[0]))
    # UTM point scale is 0.9996..1.0004 inside a zone (Snyder 1987): |d - 1000| <= 0.4 m (+ margin)
    assert abs(d - 1000.0) < 0.5
    # ... and close to due north in grid terms (grid convergence is about 1 deg here)
    assert abs(x[1] - x[0]) < 30.0


def test_lon_lat_round_trip_and_geodesic_distance():
    lons = np.array([7.61, 7.615, 7.62, 7.603])
    lats = np.array([-12.30, -12.305, -12.301, -12.299])     # southern hemisphere
    frame = working_frame("EPSG:4326", lons, lats)
    assert frame.working_crs == "EPSG:32732"
    x, y = frame.to_working(lons, lats)
    lon_back, lat_back = frame.to_request(x, y)
    np.testing.assert_allclose(lon_back, lons, atol=1e-10)
    np.testing.assert_allclose(lat_back, lats, atol=1e-10)
    # Plane distance vs geodesic distance between every pair (pyproj.Geod.inv): within 0.05 %
    for i in range(len(lons)):
        for j in range(i + 1, len(lons)):
            _, _, g = GEOD.inv(lons[i], lats[i], lons[j], lats[j])
            d = float(np.hypot(x[i] - x[j], y[i] - y[j]))
            assert d == pytest.approx(g, rel=5e-4)


def test_web_mercator_is_reprojected_to_true_metres():
    # EPSG:3857 "metres" are 1/cos(lat) ground metres: at 50 deg N a factor 1.56.
    from pyproj import Transformer

    to_merc = Transformer.from_crs("EPSG:4326", "EPSG:3857", always_xy=True)
    lon0, lat0 = 8.0, 50.0
    lon1, lat1, _ = GEOD.fwd(lon0, lat0, 90.0, 500.0)     # 500 m due east (geodesic)
    mx, my = to_merc.transform([lon0, lon1], [lat0, lat1])
    assert np.hypot(mx[1] - mx[0], my[1] - my[0]) > 700.0   # the trap: ~778 Mercator "metres"
    frame = working_frame("EPSG:3857", mx, my)
    assert frame.transforms and frame.working_crs == "EPSG:32632"
    x, y = frame.to_working(mx, my)
    assert float(np.hypot(x[1] - x[0], y[1] - y[0])) == pytest.approx(500.0, rel=5e-4)
    assert MAX_SCALE_DEVIATION < 0.01


@pytest.mark.parametrize(
    ("crs", "x", "y", "field"),
    [
        pytest.param("EPSG:99999", [0.0], [0.0], "route.crs", id="unknown-code"),
        pytest.param("not a crs", [0.0], [0.0], "route.crs", id="garbage"),
        pytest.param("", [0.0], [0.0], "route.crs", id="empty"),
        pytest.param("EPSG:2229", [6.5e6], [1.8e6], "route.crs", id="us-survey-feet"),
        pytest.param("EPSG:4978", [4e6], [6e5], "route.crs", id="geocentric"),
        pytest.param("EPSG:5773", [0.0], [0.0], "route.crs", id="vertical"),
        pytest.param("EPSG:4326", [190.0], [45.0], "route.supports", id="lon-out-of-range"),
        pytest.param("EPSG:4326", [9.0], [91.0], "route.supports", id="lat-out-of-range"),
        pytest.param("EPSG:4326", [float("nan")], [45.0], "route.supports", id="nan"),
    ],
)
def test_bad_crs_or_positions_name_the_field(crs, x, y, field):
    with pytest.raises(EngineInputError) as err:
        working_frame(crs, x, y)
    assert err.value.field == field
