"""Coordinate reference systems of route requests: from the request's CRS to local metres and back.

The 3-D engine computes in a plane in metres (``x`` east, ``y`` north).  A request
states its coordinates in one of three ways:

* **no CRS** -- the coordinates already are local metres (a site plan); used as is;
* **a projected CRS in metres** (e.g. ``"EPSG:32632"``, a national grid) -- used as is,
  provided its point scale at the site is within :data:`MAX_SCALE_DEVIATION` of 1;
  a projected CRS with larger distortion (e.g. Web Mercator ``"EPSG:3857"``, whose
  "metres" are ``1/cos(latitude)`` ground metres) is treated like a geographic CRS;
* **a geographic CRS** (``"EPSG:4326"`` / ``"OGC:CRS84"``, longitude/latitude in
  degrees) -- transformed to the local UTM zone (WGS 84, zone from the mean
  longitude, north or south from the mean latitude), computed in metres there, and
  all output geometry transformed back.

Coordinates are always read as ``(x, y)`` = (easting, northing) or (longitude,
latitude): the GeoJSON (RFC 7946) position order, whatever axis order the CRS
definition declares (pyproj ``always_xy=True``).

References
----------
.. [1] H. Butler et al., "The GeoJSON Format", IETF RFC 7946, 2016, sec. 3.1.1 and 4.
.. [2] J. P. Snyder, "Map Projections -- A Working Manual", USGS Professional Paper 1395,
       1987, ch. 8 (Universal Transverse Mercator: 6-degree zones, scale 0.9996 on the
       central meridian).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import EngineInputError

MAX_SCALE_DEVIATION = 0.002
"""Largest accepted departure of a projected CRS's point scale from 1 at the site (0.2 %).

UTM stays within 0.04 % inside its zone and national grids within about 0.1 % over
their area (common practice); beyond this the plane is not a faithful metre plane
and the request is reprojected to local UTM instead.
"""

_CRS_FIELD = "route.crs"


@dataclass(frozen=True)
class WorkingFrame:
    """How request coordinates map to the engine's metre plane.

    Attributes
    ----------
    request_crs : str or None
        CRS as given in the request (``None`` = local metres).
    working_crs : str or None
        CRS of the metre plane the engine computes in (``None`` = the request's own
        coordinates, no transformation).
    geographic : bool
        True when request coordinates are longitude/latitude in degrees.
    note : str
        One sentence for the report's assumptions.
    """

    request_crs: str | None
    working_crs: str | None
    geographic: bool
    note: str
    _forward: object | None = None
    _inverse: object | None = None

    @property
    def transforms(self) -> bool:
        """True when coordinates are transformed between request and working CRS."""
        return self._forward is not None

    def to_working(self, x, y, field: str = _CRS_FIELD) -> tuple[np.ndarray, np.ndarray]:
        """Request coordinates -> working metres (arrays of equal shape) [m].

        Raises :class:`EngineInputError` naming ``field`` when a position cannot be
        transformed (outside the CRS's domain).
        """
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        if self._forward is None:
            return x.copy(), y.copy()
        from pyproj.exceptions import ProjError

        try:
            xw, yw = self._forward.transform(x, y, errcheck=True)
        except ProjError:
            raise EngineInputError(field, f"Input {field} must lie where {self.request_crs} can be transformed to {self.working_crs}.") from None
        xw = np.asarray(xw, dtype=float)
        yw = np.asarray(yw, dtype=float)
        if not (np.all(np.isfinite(xw)) and np.all(np.isfinite(yw))):
            raise EngineInputError(field, f"Input {field} must lie where {self.request_crs} can be transformed to {self.working_crs}.")
        return xw, yw

    def to_request(self, x_m, y_m) -> tuple[np.ndarray, np.ndarray]:
        """Working metres -> request coordinates (arrays of equal shape)."""
        x_m = np.asarray(x_m, dtype=float)
        y_m = np.asarray(y_m, dtype=float)
        if self._inverse is None:
            return x_m.copy(), y_m.copy()
        x, y = self._inverse.transform(x_m, y_m, errcheck=True)
        return np.asarray(x, dtype=float), np.asarray(y, dtype=float)


def utm_epsg(lon_deg: float, lat_deg: float) -> int:
    """EPSG code of the WGS 84 UTM zone containing a point.

    Parameters
    ----------
    lon_deg, lat_deg : float
        Longitude and latitude [deg].

    Returns
    -------
    int
        326zz (northern hemisphere, ``lat_deg >= 0``) or 327zz (southern), with zone
        ``zz = floor((lon_deg + 180) / 6) + 1`` (1..60) [2]_.  The Norway/Svalbard
        zone exceptions are not applied: any nearby zone is an equally good local
        metre plane for a line a few km long.

    Examples
    --------
    >>> utm_epsg(9.2, 45.5), utm_epsg(-58.4, -34.6), utm_epsg(180.0, 10.0)
    (32632, 32721, 32660)
    """
    zone = int(math.floor((lon_deg + 180.0) / 6.0)) + 1
    zone = min(max(zone, 1), 60)
    return (32600 if lat_deg >= 0.0 else 32700) + zone


def _parse_crs(crs: str):
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    if not isinstance(crs, str) or not crs.strip():
        raise EngineInputError(_CRS_FIELD, f"Input {_CRS_FIELD} must be a CRS identifier such as 'EPSG:32632' or 'EPSG:4326'; instead received {crs!r}.")
    try:
        return CRS.from_user_input(crs.strip())
    except CRSError:
        raise EngineInputError(
            _CRS_FIELD,
            f"Input {_CRS_FIELD} must be a known CRS (e.g. 'EPSG:32632', 'EPSG:4326'); instead received {crs!r}.",
        ) from None


def is_geographic(crs: str | None) -> bool:
    """True for a geographic (longitude/latitude) CRS; ``None`` (local metres) is not.

    :raise models.errors.EngineInputError: an unknown CRS (field ``route.crs``).

    >>> is_geographic("EPSG:4326"), is_geographic("EPSG:32632"), is_geographic(None)
    (True, False, False)
    """
    return crs is not None and bool(_parse_crs(crs).is_geographic)


def _directions_ok(parsed) -> bool:
    dirs = [a.direction.lower() for a in parsed.axis_info[:2]]
    return sorted(dirs) == ["east", "north"]


def check_lon_lat(lon_deg, lat_deg, field: str) -> None:
    """Check geographic positions against the RFC 7946 ranges.

    Parameters
    ----------
    lon_deg, lat_deg : array_like
        Longitudes and latitudes [deg].
    field : str
        Request field named in the error.

    Raises
    ------
    EngineInputError
        Unless every longitude is finite and in [-180, 180] and every latitude in
        [-90, 90] (RFC 7946 sec. 4).

    Examples
    --------
    >>> check_lon_lat([9.0, -179.5], [45.0, -12.0], "route.supports")
    >>> check_lon_lat([190.0], [45.0], "path.geometry")
    Traceback (most recent call last):
    ...
    models.errors.EngineInputError: Input path.geometry longitude must be within [-180, 180] deg; instead received 190.0.
    """
    lon = np.asarray(lon_deg, dtype=float)
    lat = np.asarray(lat_deg, dtype=float)
    bad_lon = ~np.isfinite(lon) | (np.abs(lon) > 180.0)
    bad_lat = ~np.isfinite(lat) | (np.abs(lat) > 90.0)
    if np.any(bad_lon):
        raise EngineInputError(field, f"Input {field} longitude must be within [-180, 180] deg; instead received {float(lon[bad_lon][0])!r}.")
    if np.any(bad_lat):
        raise EngineInputError(field, f"Input {field} latitude must be within [-90, 90] deg; instead received {float(lat[bad_lat][0])!r}.")


def working_frame(crs: str | None, x, y) -> WorkingFrame:
    """Choose the engine's metre plane for a request.

    Parameters
    ----------
    crs : str or None
        Request CRS (any identifier pyproj understands, e.g. ``"EPSG:32632"``,
        ``"EPSG:4326"``, ``"OGC:CRS84"``); ``None`` = local metres.
    x, y : array_like
        Representative request coordinates (the support positions) in the request
        CRS; their mean picks the UTM zone and the point where a projected CRS's
        scale is checked.

    Returns
    -------
    WorkingFrame

    Raises
    ------
    EngineInputError
        ``field="route.crs"`` for an unknown CRS, a CRS that is neither geographic
        nor projected (geocentric, vertical, engineering), a projected CRS whose
        axes are not in metres or not east/north; ``field="route.supports"`` for
        longitudes/latitudes out of range.

    Notes
    -----
    The transformation is pyproj's best available operation between the two CRSs
    with ``always_xy=True`` (RFC 7946 position order [1]_).  UTM point scale is
    0.9996 on the central meridian and about 1.0004 at the zone edges [2]_, so
    distances in the working plane differ from ground distances by at most about
    0.04 %; the engine's geometry and fields are unaffected at that level.

    Examples
    --------
    >>> f = working_frame("EPSG:4326", [9.10, 9.11], [45.50, 45.51])
    >>> f.working_crs, f.geographic
    ('EPSG:32632', True)
    >>> working_frame(None, [0.0], [0.0]).transforms
    False
    """
    if crs is None:
        return WorkingFrame(None, None, False, "Coordinates are local metres (no CRS given): x east, y north.")
    parsed = _parse_crs(crs)
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    if xs.size == 0 or not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise EngineInputError("route.supports", "Input route.supports must give finite coordinates; instead received a non-finite or empty set.")

    from pyproj import CRS, Proj, Transformer

    if parsed.is_geographic:
        check_lon_lat(xs, ys, "route.supports")
        lon0, lat0 = float(np.mean(xs)), float(np.mean(ys))
        geographic = True
    elif parsed.is_projected:
        units = {a.unit_name.lower() for a in parsed.axis_info[:2]}
        if units not in ({"metre"}, {"meter"}):
            raise EngineInputError(
                _CRS_FIELD,
                f"Input {_CRS_FIELD} must be a projected CRS in metres or a geographic (lon/lat) CRS; "
                f"instead received {crs!r} with axis units {sorted(units)}.",
            )
        if not _directions_ok(parsed):
            raise EngineInputError(
                _CRS_FIELD,
                f"Input {_CRS_FIELD} must have east/north axes; instead received {crs!r} with axes "
                f"{[a.direction for a in parsed.axis_info[:2]]}.",
            )
        to_geo = Transformer.from_crs(parsed, parsed.geodetic_crs, always_xy=True)
        lon0, lat0 = to_geo.transform(float(np.mean(xs)), float(np.mean(ys)))
        scale = float("nan")
        if math.isfinite(lon0) and math.isfinite(lat0):
            factors = Proj(parsed).get_factors(lon0, lat0)
            scale = max(abs(factors.meridional_scale - 1.0), abs(factors.parallel_scale - 1.0))
        if math.isfinite(scale) and scale <= MAX_SCALE_DEVIATION:
            return WorkingFrame(
                crs, crs, False,
                f"Coordinates are metres in the request CRS {crs} (point scale at the site within {scale:.3%} of 1), used as is.",
            )
        if not (math.isfinite(lon0) and math.isfinite(lat0)):
            raise EngineInputError("route.supports", f"Input route.supports must lie inside the area of {crs}; the mean position could not be transformed.")
        geographic = False
    else:
        raise EngineInputError(
            _CRS_FIELD,
            f"Input {_CRS_FIELD} must be a projected CRS in metres or a geographic (lon/lat) CRS; "
            f"instead received {crs!r} ({parsed.type_name}).",
        )

    target = f"EPSG:{utm_epsg(lon0, lat0)}"
    forward = Transformer.from_crs(parsed, CRS.from_user_input(target), always_xy=True)
    inverse = Transformer.from_crs(CRS.from_user_input(target), parsed, always_xy=True)
    if geographic:
        note = (f"Longitude/latitude in {crs} were transformed to the local UTM zone {target} "
                "for computation (point scale within 0.04 % of 1) and results transformed back.")
    else:
        note = (f"The request CRS {crs} distorts distances by more than {MAX_SCALE_DEVIATION:.1%} at the site; "
                f"coordinates were transformed to the local UTM zone {target} for computation and results transformed back.")
    return WorkingFrame(crs, target, geographic, note, forward, inverse)
