"""Exposure zones: where a field exceeds a threshold, as GeoJSON polygons, and their widths.

A zone is the set of grid-plane points at the evaluation height where the resultant
rms field (the compliance quantity, :attr:`models.results.FieldResult.b_rms_t` /
``e_rms_v_per_m``) exceeds a threshold.  It is computed from the grid evaluation set:

1. filled contours of the gridded field between the threshold and +inf with
   contourpy (linear interpolation inside each grid cell, holes kept as interior
   rings), one polygon per outer boundary with its holes;
2. cleaned with shapely: ``make_valid``, union of the pieces, then every polygon
   oriented by the RFC 7946 right-hand rule (exterior counter-clockwise, holes
   clockwise, sec. 3.1.6 of [1]_);
3. transformed to the request CRS (:class:`models.route.crs.WorkingFrame`), re-made
   valid and re-oriented there, and written as a GeoJSON Feature.

Zone widths (how far the zone reaches from the route centre line) are defined here
as perpendicular distances from the plan centre line through the supports:

* ``width_left_m`` / ``width_right_m`` -- the largest distance from the centre line of
  any point of the zone that lies *alongside* the route (its nearest centre-line
  point is not the first or last support), to the left / right looking from the first
  support towards the last;
* ``spans[k].width_left_m`` / ``width_right_m`` -- the same measured only on the
  line perpendicular to span ``k`` at its mid-span point (where a level span hangs
  lowest): the extent of the zone's intersection with that line.  This is the
  quantity a 2-D cross-section compliance distance describes.

A side the zone does not reach has width ``None``.  When the zone touches the edge of
the grid (``touches_grid_edge``), it is cut off there and the widths are lower bounds.

References
----------
.. [1] H. Butler et al., "The GeoJSON Format", IETF RFC 7946, 2016.
"""

from __future__ import annotations

import math

import contourpy
import numpy as np
import shapely
from shapely.geometry import LineString, MultiPolygon, Polygon
from shapely.geometry.polygon import orient

from .crs import WorkingFrame
from ..catalogue import SI_UNIT, Threshold
from .sets import GridAxes
from .alignment import frame_at_chainage, route_centre_line, support_chainage_m
from .types import Route



def _polygons_of(geom) -> list[Polygon]:
    if geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return list(geom.geoms)
    if hasattr(geom, "geoms"):  # GeometryCollection from make_valid: keep the areal parts
        out: list[Polygon] = []
        for g in geom.geoms:
            out.extend(_polygons_of(g))
        return out
    return []


def clean_multipolygon(geom) -> MultiPolygon:
    """Valid MultiPolygon, RFC 7946 orientation (exterior CCW, holes CW), zero-area parts dropped.

    Parameters
    ----------
    geom : shapely geometry
        Any (possibly invalid) areal geometry.

    Returns
    -------
    shapely.MultiPolygon
        Each polygon passed through ``shapely.geometry.polygon.orient(p, 1.0)``.

    Examples
    --------
    >>> bow_tie = Polygon([(0, 0), (2, 2), (2, 0), (0, 2)])      # self-intersecting
    >>> m = clean_multipolygon(bow_tie)
    >>> m.is_valid, len(m.geoms), round(m.area, 6)
    (True, 2, 2.0)
    """
    parts = _polygons_of(shapely.make_valid(geom)) if not geom.is_empty else []
    if not parts:
        return MultiPolygon()
    merged = shapely.union_all(parts)
    polys = [orient(p, 1.0) for p in _polygons_of(merged) if p.area > 0.0]
    return MultiPolygon(polys)


def exceedance_polygons(axes: GridAxes, values: np.ndarray, threshold: float) -> MultiPolygon:
    """Region of the grid plane where ``values`` exceed ``threshold``.

    Parameters
    ----------
    axes : GridAxes
        Grid axes in the working metre plane [m].
    values : ndarray, shape (ny, nx)
        Field on the grid (any unit, the same as ``threshold``).
    threshold : float
        Level; the zone is ``values > threshold`` (to contour accuracy).

    Returns
    -------
    shapely.MultiPolygon
        In working metres; empty if the field never exceeds the threshold on the grid.

    Notes
    -----
    contourpy's filled contours between ``threshold`` and ``+inf`` with
    ``FillType.OuterOffset`` give, per polygon, its outer boundary followed by its
    holes; values are interpolated linearly along cell edges, so a boundary lies
    within a fraction of a cell of the true level set where the field is smooth.

    Examples
    --------
    >>> from models.route.sets import grid_axes
    >>> g = grid_axes((-10.0, -10.0, 10.0, 10.0), 0.5, 1.0)
    >>> xx, yy = np.meshgrid(g.x_m, g.y_m)
    >>> disc = exceedance_polygons(g, 25.0 - (xx**2 + yy**2), 0.0)    # r < 5
    >>> bool(abs(disc.area - math.pi * 25.0) < 0.5)
    True
    """
    z = np.asarray(values, dtype=float)
    if z.shape != axes.shape:
        raise ValueError(f"values shape {z.shape} does not match the grid {axes.shape}")
    if not np.any(z > threshold):
        return MultiPolygon()
    gen = contourpy.contour_generator(axes.x_m, axes.y_m, np.ma.masked_invalid(z),
                                      fill_type=contourpy.FillType.OuterOffset)
    points_list, offsets_list = gen.filled(float(threshold), np.inf)
    polys = []
    for pts, offs in zip(points_list, offsets_list):
        rings = [pts[offs[k]:offs[k + 1]] for k in range(len(offs) - 1)]
        rings = [r for r in rings if len(r) >= 4]
        if not rings:
            continue
        polys.append(Polygon(rings[0], rings[1:]))
    return clean_multipolygon(MultiPolygon(polys) if polys else MultiPolygon())


def _signed_offsets(centreline_m: LineString, xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Chainage of the nearest centre-line point and signed perpendicular offset (+ right) [m]."""
    line_xy = np.asarray(centreline_m.coords, dtype=float)
    seg = np.diff(line_xy, axis=0)
    seg_len = np.hypot(seg[:, 0], seg[:, 1])
    ends = np.cumsum(seg_len)
    normals = np.column_stack([seg[:, 1], -seg[:, 0]]) / seg_len[:, None]
    pts = shapely.points(xy)
    s = shapely.line_locate_point(centreline_m, pts)
    foot = shapely.get_coordinates(shapely.line_interpolate_point(centreline_m, s))
    i = np.clip(np.searchsorted(ends, s, side="left"), 0, len(seg) - 1)
    n = normals[i]
    # nearest point at an interior vertex (outer side of an angle): use the bisector there
    tol = 1e-9 * max(1.0, float(ends[-1]))
    for k in range(len(seg) - 1):
        at = np.abs(s - ends[k]) <= tol
        if np.any(at):
            b = normals[k] + normals[k + 1]
            nb = np.hypot(*b)
            if nb > 1e-12:
                n = np.where(at[:, None], (b / nb)[None, :], n)
    d = xy - foot
    dist = np.hypot(d[:, 0], d[:, 1])
    sign = np.sign(np.sum(d * n, axis=1))
    return s, sign * dist


def _side_widths(offsets: np.ndarray) -> tuple[float | None, float | None]:
    right = offsets[offsets > 0.0]
    left = -offsets[offsets < 0.0]
    return (float(left.max()) if left.size else None, float(right.max()) if right.size else None)


def zone_widths(zone_m: MultiPolygon, route_m: Route, *, step_m: float, reach_m: float) -> dict:
    """Widths of a zone on each side of the route (definitions in the module docstring).

    Parameters
    ----------
    zone_m : shapely.MultiPolygon
        Zone in working metres.
    route_m : Route
        The route, support positions in working metres [m] (its plan centre line
        through the supports is the reference; support ids label the spans).
    step_m : float
        Densification step of the zone boundary before measuring [m] (the grid
        resolution or finer).
    reach_m : float
        Half-length of the mid-span cross lines [m] (beyond the grid is enough).

    Returns
    -------
    dict
        ``{"width_left_m", "width_right_m", "spans": [{"from_support", "to_support",
        "chainage_m", "width_left_m", "width_right_m"}, ...]}`` [m]; ``None`` for a side
        the zone does not reach.
    """
    centreline_m = route_centre_line(route_m)
    support_ids = [s.id for s in route_m.supports]
    chainage = support_chainage_m(route_m)
    length = float(chainage[-1])
    span_len = np.diff(chainage)
    span_start = chainage[:-1]
    spans = []
    left = right = None
    if not zone_m.is_empty:
        boundary = shapely.segmentize(zone_m.boundary, max(step_m, 1e-6))
        xy = shapely.get_coordinates(boundary)
        s, off = _signed_offsets(centreline_m, xy)
        tol = 1e-6 * max(1.0, length)
        alongside = (s > tol) & (s < length - tol)
        left, right = _side_widths(off[alongside])
    for k in range(len(span_len)):
        c = float(span_start[k] + 0.5 * span_len[k])
        entry = {"from_support": str(support_ids[k]), "to_support": str(support_ids[k + 1]), "chainage_m": c,
                 "width_left_m": None, "width_right_m": None}
        if not zone_m.is_empty:
            origin, _, normal = frame_at_chainage(route_m, c)
            cross = LineString([origin - reach_m * normal, origin + reach_m * normal])
            inter = zone_m.intersection(cross)
            if not inter.is_empty:
                pts = shapely.get_coordinates(inter)
                off = (pts - origin[None, :]) @ normal
                entry["width_left_m"], entry["width_right_m"] = _side_widths(off)
        spans.append(entry)
    return {"width_left_m": left, "width_right_m": right, "spans": spans}


def _coords_lists(geom_mapping):
    """GeoJSON mapping with nested lists (not tuples) of floats."""
    def conv(c):
        if isinstance(c, (tuple, list)) and c and isinstance(c[0], (int, float)):
            return [float(v) for v in c]
        return [conv(v) for v in c]
    return {"type": geom_mapping["type"], "coordinates": conv(geom_mapping["coordinates"])}


def to_request_geometry(zone_m: MultiPolygon, frame: WorkingFrame) -> MultiPolygon:
    """Transform a working-plane MultiPolygon to the request CRS, valid and RFC 7946 oriented.

    Parameters
    ----------
    zone_m : shapely.MultiPolygon
        Zone in working metres [m].
    frame : WorkingFrame
        Request CRS <-> working plane.

    Returns
    -------
    shapely.MultiPolygon
        Vertices transformed one by one (zone edges are already dense, about half a
        grid cell), then :func:`clean_multipolygon` again, since a transformation may
        move rings enough to touch; unchanged when ``frame`` does not transform.
    """
    if zone_m.is_empty or not frame.transforms:
        return zone_m

    def fwd(xy: np.ndarray) -> np.ndarray:
        x, y = frame.to_request(xy[:, 0], xy[:, 1])
        return np.column_stack([x, y])

    return clean_multipolygon(shapely.transform(zone_m, fwd))


def geojson_geometry(geom: MultiPolygon) -> dict:
    """RFC 7946 geometry object of a MultiPolygon, with plain lists of floats.

    An empty zone is ``{"type": "MultiPolygon", "coordinates": []}`` (an empty geometry,
    RFC 7946 sec. 3.1).

    Examples
    --------
    >>> geojson_geometry(MultiPolygon())
    {'type': 'MultiPolygon', 'coordinates': []}
    >>> geojson_geometry(MultiPolygon([Polygon([(0, 0), (1, 0), (0, 1)])]))["coordinates"]
    [[[[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [0.0, 0.0]]]]
    """
    if geom.is_empty:
        return {"type": "MultiPolygon", "coordinates": []}
    return _coords_lists(shapely.geometry.mapping(geom))


def zone_features(thresholds: "list[Threshold] | tuple[Threshold, ...]", axes: GridAxes, e_rms_v_per_m: np.ndarray, b_rms_t: np.ndarray, *,
                  route_m: Route, frame: WorkingFrame) -> dict:
    """Exposure zones of every threshold as a GeoJSON FeatureCollection (request CRS).

    Parameters
    ----------
    thresholds : sequence of models.catalogue.Threshold
        Levels to contour (``quantity`` "B" with ``limit_si`` [T] or "E" [V/m]).
    axes : GridAxes
        Grid in the working metre plane.
    e_rms_v_per_m, b_rms_t : ndarray, shape (ny, nx)
        Resultant rms fields on the grid [V/m], [T].
    route_m : Route
        The route in working metres (centre line and span labels for the widths).
    frame : WorkingFrame
        Request CRS <-> working metres.

    Returns
    -------
    dict
        ``{"type": "FeatureCollection", "features": [...]}``, one Feature per threshold,
        ``id`` = ``"<level id>/<quantity>"``, geometry a MultiPolygon in the request CRS
        (empty coordinates when the threshold is not exceeded on the grid),
        properties: ``threshold_id``, ``quantity`` ("E"/"B"), ``limit_si``,
        ``unit_si``, ``title``, ``height_m``, ``area_m2`` (working plane),
        ``touches_grid_edge``, ``width_left_m``, ``width_right_m``, ``spans``.
    """
    res = float(max(np.max(np.diff(axes.x_m)), np.max(np.diff(axes.y_m))))
    bbox = shapely.box(axes.x_m[0], axes.y_m[0], axes.x_m[-1], axes.y_m[-1])
    reach = float(math.hypot(axes.x_m[-1] - axes.x_m[0], axes.y_m[-1] - axes.y_m[0])
                  + float(route_centre_line(route_m).length))
    features = []
    for th in thresholds:
        field = b_rms_t if th.quantity == "B" else e_rms_v_per_m
        zone_m = exceedance_polygons(axes, np.asarray(field).reshape(axes.shape), th.limit_si)
        widths = zone_widths(zone_m, route_m, step_m=res / 2.0, reach_m=reach)
        touches = bool(not zone_m.is_empty and zone_m.boundary.intersects(bbox.exterior.buffer(1e-6 * res)))
        geom = to_request_geometry(zone_m, frame)
        features.append({
            "type": "Feature",
            "id": f"{th.level_id}/{th.quantity}",
            "geometry": geojson_geometry(geom),
            "properties": {
                "threshold_id": th.level_id,
                "quantity": th.quantity,
                "limit_si": float(th.limit_si),
                "unit_si": SI_UNIT[th.quantity],
                "title": th.title,
                "height_m": float(axes.height_m),
                "area_m2": float(zone_m.area),
                "touches_grid_edge": touches,
                **widths,
            },
        })
    return {"type": "FeatureCollection", "features": features}
