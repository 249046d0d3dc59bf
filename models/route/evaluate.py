"""Route assessment orchestrator: request geometry -> 3-D E and B on every evaluation set, and zones.

Steps (pvlib ``ModelChain`` shape: a pure function returning a frozen result):

1. choose the metre plane (:func:`models.route.crs.working_frame`) from the request CRS
   and move supports and evaluation geometry into it;
2. discretise the route (:func:`models.route.discretise.discretise_route`) twice: per
   bundle subconductor for B, per bundle (equivalent radius) for E;
3. B by Biot–Savart over the straight segments
   (:func:`models.route.magnetic3d.flux_density_segments`), plus their complex
   earth-return images when a soil resistivity is given
   (:func:`models.route.earth_return3d.image_flux_density_segments`); E by charge simulation
   (:func:`models.route.electric3d.line_charges` once, then
   :func:`~models.route.electric3d.electric_field_segments`) -- all evaluation sets in
   one call each;
4. split the fields back per set, with positions in the request CRS, and contour the
   grid into exposure zones (:func:`models.route.zones.zone_features`).
"""

from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
import shapely
from shapely.geometry import LineString

from ..catalogue import UNIT_TO_SI, Threshold, custom_threshold, thresholds_for
from ..errors import CatalogueError, EngineInputError, must_be
from ..magnetic import complex_depth_m
from ..evaluation import Evaluation, EvaluationSet, sub_result
from ..results import FieldResult
from ..sources import validate_frequency, validate_soil_resistivity
from .crs import WorkingFrame, check_lon_lat, working_frame
from .discretise import DEFAULT_TOLERANCE_M, discretise_route
from .earth_return3d import image_flux_density_segments
from .electric3d import electric_field_segments, line_charges
from .sets import (
    CustomZoneLimit,
    EvaluationSets,
    GridAxes,
    grid_axes,
    lateral_profile_points,
    path_points,
    receptor_points,
)
from .magnetic3d import flux_density_segments
from .right_of_way import right_of_way_edges
from .types import Route
from .zones import zone_features

__all__ = ["E_MAX_SEGMENT_M", "evaluate_route", "resolve_zone_thresholds"]

E_MAX_SEGMENT_M = 10.0
"""Longest segment of the electric charge simulation [m].

One uniform line charge per segment: 10 m resolves the charge variation along a
sagging span and the end effects at the first and last supports (common practice
in charge simulation is segments short compared with the distance to the points
of interest; checked in ``tests/models/route/test_evaluate.py`` against the 2-D
engine at mid-span).
"""

SET_ORDER = ("path", "lateral_profile", "receptors", "grid", "right_of_way")

PATH_DENSIFY_DEG = 1e-4
"""Largest vertex spacing of a lon/lat path before it is transformed (about 11 m) [deg]."""


def resolve_zone_thresholds(entries, frequency_hz: float, *, field: str = "zones.thresholds") -> tuple[Threshold, ...]:
    """Zone threshold entries -> catalogue-form thresholds at one frequency.

    Parameters
    ----------
    entries : sequence of str or CustomZoneLimit
        Catalogue reference-level ids (all quantities the level defines) or custom
        limits (``value`` in ``unit``; the unit decides E or B).
    frequency_hz : float
        [Hz].

    Returns
    -------
    tuple of Threshold

    Raises
    ------
    CatalogueError
        Unknown id, id given twice, malformed custom limit (field ``zones.thresholds[i]``).

    Examples
    --------
    >>> [round(t.limit_si * 1e6, 3) for t in resolve_zone_thresholds([CustomZoneLimit("policy", 0.4, "µT")], 50.0)]
    [0.4]
    """
    out: list[Threshold] = []
    seen: set[str] = set()
    for i, entry in enumerate(entries):
        item = f"{field}[{i}]"
        key = entry if isinstance(entry, str) else entry.id
        if key in seen:
            raise CatalogueError(item, f"Zone threshold {key!r} is listed twice.")
        seen.add(key)
        if isinstance(entry, str):
            try:
                out.extend(thresholds_for([entry], frequency_hz, field=item))
            except CatalogueError as exc:
                raise CatalogueError(item, exc.message) from None
        else:
            quantity = UNIT_TO_SI.get(entry.unit, ("B", 1.0))[0]
            out.append(custom_threshold(entry.id, quantity, entry.value, entry.unit, frequency_hz, field=item))
    return tuple(out)


def _route_in_plane(route: Route, frame: WorkingFrame) -> Route:
    xs = [s.x for s in route.supports]
    ys = [s.y for s in route.supports]
    xw, yw = frame.to_working(xs, ys, "route.supports")
    supports = tuple(dataclasses.replace(s, x=float(x), y=float(y)) for s, x, y in zip(route.supports, xw, yw))
    return dataclasses.replace(route, supports=supports)


def _check_request_positions(frame: WorkingFrame, x, y, field_name: str) -> None:
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        raise must_be(field_name, "finite coordinates", "non-finite values")
    if frame.geographic:
        check_lon_lat(x, y, field_name)


def _grid_bounds_m(frame: WorkingFrame, bbox, field_name: str) -> tuple[float, float, float, float]:
    minx, miny, maxx, maxy = (float(v) for v in bbox)
    if not all(math.isfinite(v) for v in (minx, miny, maxx, maxy)) or not (maxx > minx and maxy > miny):
        raise must_be(field_name, "[minx, miny, maxx, maxy] with maxx > minx and maxy > miny", list(bbox))
    _check_request_positions(frame, [minx, maxx], [miny, maxy], field_name)
    if not frame.transforms:
        return (minx, miny, maxx, maxy)
    ring = shapely.segmentize(shapely.box(minx, miny, maxx, maxy), max(maxx - minx, maxy - miny) / 64.0)
    xy = shapely.get_coordinates(ring)
    xw, yw = frame.to_working(xy[:, 0], xy[:, 1], field_name)
    return (float(xw.min()), float(yw.min()), float(xw.max()), float(yw.max()))


_POINT_FIELD = re.compile(r"^points(?:_m)?\[(\d+)\]$")


def _remap_point_error(exc: EngineInputError, slices: dict, labels: dict) -> EngineInputError:
    """Kernel errors name ``points[i]`` of the combined array: name the evaluation set instead."""
    m = _POINT_FIELD.match(exc.field or "")
    if not m:
        return exc
    i = int(m.group(1))
    for kind, sl in slices.items():
        if sl.start <= i < sl.stop:
            return type(exc)(labels[kind](i - sl.start), exc.message)
    return exc


def evaluate_route(
    route: Route,
    frequency_hz: float,
    evaluation: EvaluationSets,
    *,
    crs: str | None = None,
    soil_resistivity_ohm_m: float | None = None,
    max_points: int | None = None,
    max_segments: int | None = None,
    max_pairs: int | None = None,
    tolerance_m: float = DEFAULT_TOLERANCE_M,
) -> Evaluation:
    """Electric and magnetic fields of a route on its evaluation sets, and exposure zones.

    Parameters
    ----------
    route : Route
        Supports (positions in the request CRS), circuits and earth wires.
    frequency_hz : float
        Power frequency [Hz].
    evaluation : EvaluationSets
        Path, lateral profile, receptors, grid, right-of-way edges (any combination, at least one) and
        zones (which need the grid).
    crs : str, optional
        Request CRS (``None`` = local metres; see :mod:`models.route.crs`).
    soil_resistivity_ohm_m : float, optional
        Homogeneous soil resistivity [ohm m].  When given, earth-return currents of the
        overhead wires are represented by their complex-depth images (Deri et al., as in
        the 2-D engine) and added to B on every set; E is unaffected.  None: no image.
    max_points : int, optional
        Cap on the total number of observation points (and each set's own count).
    max_segments : int, optional
        Cap on the straight segments of each discretisation (B and E).  The charge solve
        of E holds a dense ``n x n`` matrix (``8 n^2`` bytes) and costs about ``n^3 / 3``
        operations, so this bounds memory and time; checked before any field is computed.
    max_pairs : int, optional
        Cap on (observation points) x (segments of B + segments of E), the number of
        point-segment kernel evaluations; checked before any field is computed.
    tolerance_m : float
        Chord-to-catenary tolerance of the B discretisation [m].

    Returns
    -------
    Evaluation
        ``geometry == "route"``; one set per requested kind, named and with the role
        ``path``, ``lateral_profile``, ``receptors``, ``grid``, ``right_of_way`` (in that
        order), each with its positions in the request CRS (``x``, ``y``); ``frame``,
        ``route_m``, ``zone_thresholds``, ``zones`` and ``segment_counts`` filled in.

    Raises
    ------
    EngineInputError
        Bad CRS, geometry, loading, evaluation set or thresholds; ``field`` names the
        request path (``route.crs``, ``path.step_m``, ``receptors.features[2]``, ...).

    Notes
    -----
    Ground is the flat plane z = 0 (:mod:`models.route.types`); observation heights
    are above it.  B: Biot–Savart for finite straight segments in free space, plus
    with ``soil_resistivity_ohm_m`` the images of the overhead segments mirrored about
    the plane at the complex depth p below z = 0 (:mod:`models.route.earth_return3d`).
    E: charge simulation with images in a perfectly
    conducting plane (:mod:`models.route.electric3d`).  The conductors end at the
    first and last supports.

    Examples
    --------
    >>> from models.geometry import Bundle
    >>> from models.route.types import RouteCircuit, RouteConductor, Support
    >>> from models.route.sets import LateralProfileSet
    >>> c = RouteCircuit("c1", "overhead", 132.0, 400.0,
    ...     (RouteConductor("L1", -4, 15, 4.0), RouteConductor("L2", 0, 15, 4.0),
    ...      RouteConductor("L3", 4, 15, 4.0)), Bundle(0.025))
    >>> r = Route((Support("T1", 0, 0), Support("T2", 300, 0)), (c,))
    >>> res = evaluate_route(r, 50.0, EvaluationSets(lateral_profile=LateralProfileSet(150, -30, 30, 30, 1)))
    >>> res.sets["lateral_profile"].field.b_rms_t.shape, bool(res.combined.b_rms_t[1] > res.combined.b_rms_t[0])
    ((3,), True)
    """
    f = validate_frequency(frequency_hz)
    rho = validate_soil_resistivity(soil_resistivity_ohm_m)
    if evaluation.is_empty:
        raise EngineInputError("path", "A route assessment needs at least one evaluation set: "
                                       "path, lateral_profile, receptors, grid or right_of_way.")
    if evaluation.zones is not None and evaluation.grid is None:
        raise EngineInputError("zones", "Exposure zones are contoured from the grid evaluation set; add a 'grid'.")
    if len(route.supports) < 2:
        raise must_be("route.supports", "at least 2 supports", len(route.supports))
    frame = working_frame(crs, [s.x for s in route.supports], [s.y for s in route.supports])
    route_m = _route_in_plane(route, frame)
    zone_thresholds = (resolve_zone_thresholds(evaluation.zones.thresholds, f)
                       if evaluation.zones is not None else ())

    # ---- evaluation sets -> points in the working plane
    pieces: dict[str, dict] = {}
    if evaluation.path is not None:
        coords = np.asarray(evaluation.path.geometry.coords, dtype=float)
        _check_request_positions(frame, coords[:, 0], coords[:, 1], "path.geometry")
        if frame.transforms:
            # RFC 7946 lines are straight in the request coordinates: densify before transforming
            coords = shapely.get_coordinates(shapely.segmentize(LineString(coords), PATH_DENSIFY_DEG
                                                                if frame.geographic else 10.0))
        xw, yw = frame.to_working(coords[:, 0], coords[:, 1], "path.geometry")
        pts, dist = path_points(LineString(np.column_stack([xw, yw])), evaluation.path.step_m,
                                evaluation.path.height_m, max_points=max_points)
        pieces["path"] = {"points": pts, "distance_m": dist}
    if evaluation.lateral_profile is not None:
        pts, off = lateral_profile_points(route_m, evaluation.lateral_profile, max_points=max_points)
        pieces["lateral_profile"] = {"points": pts, "offset_m": off}
    if evaluation.receptors:
        rec = evaluation.receptors
        rx = np.array([r.x for r in rec], dtype=float)
        ry = np.array([r.y for r in rec], dtype=float)
        _check_request_positions(frame, rx, ry, "receptors.features")
        xw, yw = frame.to_working(rx, ry, "receptors.features")
        pts = receptor_points(xw, yw, [r.height_m for r in rec])
        pieces["receptors"] = {"points": pts, "ids": tuple(r.id for r in rec), "names": tuple(r.name for r in rec),
                               "x": rx, "y": ry}
    grid = None
    if evaluation.grid is not None:
        bounds = _grid_bounds_m(frame, evaluation.grid.bbox, "grid.bbox")
        grid = grid_axes(bounds, evaluation.grid.resolution_m, evaluation.grid.height_m, max_points=max_points)
        pieces["grid"] = {"points": grid.points_m(), "grid": grid}
    n_left = 0
    if evaluation.right_of_way is not None:
        edges = right_of_way_edges(route_m, evaluation.right_of_way, max_points=max_points)
        n_left = len(edges[0].points_m)
        pieces["right_of_way"] = {
            "points": np.concatenate([e.points_m for e in edges]),
            "distance_m": np.concatenate([e.distance_m for e in edges]),
            "chainage_m": np.concatenate([e.chainage_m for e in edges]),
            "offset_m": np.concatenate([np.full(len(e.distance_m), e.offset_m) for e in edges]),
            "edges": tuple(e.edge for e in edges for _ in range(len(e.distance_m))),
            "edge_samples": edges,
            "note": (f"Edges sampled every {evaluation.right_of_way.step_m:g} m along their whole length at "
                     f"{evaluation.right_of_way.height_m:g} m above ground; the values are the largest along each edge."),
        }

    slices: dict[str, slice] = {}
    start = 0
    for kind in SET_ORDER:
        if kind in pieces:
            n = len(pieces[kind]["points"])
            slices[kind] = slice(start, start + n)
            start += n
    if max_points is not None and start > max_points:
        raise EngineInputError(next(iter(slices)), f"The evaluation sets together must give at most {max_points} "
                                                   f"points; instead they give {start}.")
    points = np.concatenate([pieces[k]["points"] for k in slices])

    # ---- fields
    seg_b = discretise_route(route_m, tolerance_m=tolerance_m)
    seg_e = discretise_route(route_m, tolerance_m=tolerance_m, max_segment_m=E_MAX_SEGMENT_M, for_electric=True)
    _check_work(len(points), len(seg_b.start_m), len(seg_e.start_m), max_segments, max_pairs)
    labels = {
        "path": lambda i: "path.height_m",
        "lateral_profile": lambda i: "lateral_profile.height_m",
        "receptors": lambda i: f"receptors.features[{i}]",
        "grid": lambda i: "grid.height_m",
        "right_of_way": lambda i: "right_of_way.left_m" if i < n_left else "right_of_way.right_m",
    }
    try:
        b = flux_density_segments(points, seg_b)
        if rho is not None:
            # earth-return images of the overhead segments, mirrored about the complex plane below z = 0
            b += image_flux_density_segments(points, seg_b, complex_depth_m(rho, f))
        charges = line_charges(seg_e)
        e = electric_field_segments(points, seg_e, charges)
    except EngineInputError as exc:
        raise _remap_point_error(exc, slices, labels) from None

    assumptions = _assumptions(frame, f, rho, route_m, evaluation, grid, tolerance_m)
    combined = FieldResult(points, f, e, b, assumptions)
    sets: dict[str, EvaluationSet] = {}
    for kind, sl in slices.items():
        piece = pieces[kind]
        fr = sub_result(combined, sl)
        if kind == "receptors":
            x, y = piece["x"].copy(), piece["y"].copy()
        elif kind == "grid" and not frame.transforms:
            x, y = points[sl, 0].copy(), points[sl, 1].copy()
        else:
            x, y = frame.to_request(points[sl, 0], points[sl, 1])
        sets[kind] = EvaluationSet(kind, kind, sl, fr, x=x, y=y, distance_m=piece.get("distance_m"),
                                   offset_m=piece.get("offset_m"), ids=piece.get("ids"), names=piece.get("names"),
                                   grid=piece.get("grid"), chainage_m=piece.get("chainage_m"),
                                   edges=piece.get("edges"), edge_samples=piece.get("edge_samples"),
                                   note=piece.get("note", ""))

    zones = None
    if evaluation.zones is not None:
        g = sets["grid"].field
        zones = zone_features(zone_thresholds, grid, g.e_rms_v_per_m.reshape(grid.shape),
                              g.b_rms_t.reshape(grid.shape), route_m=route_m, frame=frame)
    return Evaluation(
        geometry="route", frequency_hz=f, combined=combined, sets=sets, assumptions=assumptions,
        frame=frame, route_m=route_m, zone_thresholds=zone_thresholds, zones=zones,
        segment_counts={"b": int(len(seg_b.start_m)), "e": int(len(seg_e.start_m))},
    )


def _check_work(n_points: int, n_b: int, n_e: int, max_segments: int | None, max_pairs: int | None) -> None:
    """Refuse a route whose field computation would exceed the work bounds (before computing it)."""
    if max_segments is not None and max(n_b, n_e) > max_segments:
        raise EngineInputError("route", f"The route is cut into {n_b} straight segments for B and {n_e} for E "
                                        f"(spans x wires x subdivisions); at most {max_segments} are allowed per "
                                        "discretisation (limit MAX_SEGMENTS): assess fewer spans or wires per request.")
    pairs = n_points * (n_b + n_e)
    if max_pairs is not None and pairs > max_pairs:
        raise EngineInputError("route", f"{n_points} observation points x {n_b + n_e} segments = {pairs} field "
                                        f"evaluations; at most {max_pairs} are allowed per request (limit "
                                        "MAX_SEGMENT_POINT_PAIRS): use coarser steps or fewer spans.")


def _assumptions(frame: WorkingFrame, f: float, rho: float | None, route_m: Route, evaluation: EvaluationSets,
                 grid: GridAxes | None, tolerance_m: float) -> tuple[str, ...]:
    items = [
        f"Fields are rms phasors at {f:g} Hz of a three-dimensional model: every conductor hangs as a "
        "catenary between consecutive supports, cut into straight segments.",
        frame.note,
        "Ground is the flat plane z = 0: support ground elevations raise the attachment points only; "
        "terrain between supports is not modelled and observation heights are above that plane.",
        f"Magnetic field: Biot-Savart over straight segments in free space (chords within {tolerance_m:g} m of "
        "each catenary), every bundle subconductor explicit; soil and air non-magnetic (mu0).",
        "Electric field: charge simulation with uniform line charges on segments of at most "
        f"{E_MAX_SEGMENT_M:g} m and their images in flat, perfectly conducting ground; bundles as one wire "
        "of equivalent radius; earth wires at 0 V; screened underground cables produce no electric field.",
        "The conductors start at the first support and end at the last: fields within about two spans of the "
        "route ends omit the line beyond them.",
        "Unperturbed fields: no person, vehicle, trees, fences or buildings.",
    ]
    if rho is None:
        items.append("Earth-return currents are neglected (no ground image for B).")
    else:
        items.append(f"Magnetic field: earth-return currents of the overhead conductors and earth wires represented "
                     f"by complex-depth images (Deri et al. 1981) in homogeneous soil of {rho:g} ohm m: each segment "
                     "mirrored about the plane at the complex depth p below the flat ground plane z = 0 (the same "
                     "plane everywhere, support ground elevations notwithstanding), carrying the opposite current; "
                     "underground cables get no image. The electric field is unaffected (at power frequency the "
                     "earth is a perfect conductor for E).")
    if route_m.earth_wires:
        items.append("Earth wires carry no current unless an earth-wire current is given (induced currents not computed).")
    if evaluation.lateral_profile is not None:
        items.append("The lateral profile is perpendicular to the span at its chainage (the span leaving an angle "
                     "support when the chainage falls exactly on it).")
    if evaluation.right_of_way is not None:
        row = evaluation.right_of_way
        items.append(f"Right-of-way edges: lines parallel to the route centre line at {row.left_m:g} m and "
                     f"{row.right_m:g} m (+ right), mitred along the bisector at angle supports, sampled every "
                     f"{row.step_m:g} m along each edge at {row.height_m:g} m above ground.")
    if evaluation.zones is not None and grid is not None:
        res = float(max(np.max(np.diff(grid.x_m)), np.max(np.diff(grid.y_m))))
        items.append(f"Exposure zones are contoured (linear interpolation) from the {grid.shape[0]} x {grid.shape[1]} "
                     f"grid at {res:.3g} m spacing and {grid.height_m:g} m height; widths are perpendicular distances "
                     "from the route centre line through the supports.")
    return tuple(items)
