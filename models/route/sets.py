"""Evaluation sets of a route assessment: where the 3-D fields are computed.

Five kinds of set, in any combination (RFC 7946 geometry for the GIS-facing ones):

* :class:`PathSet` -- a polyline (a footpath, a property boundary) sampled every
  ``step_m`` along its length, both ends included;
* :class:`GridSet` -- a regular grid over a bounding box (also the input of exposure
  zones, :mod:`models.route.zones`);
* :class:`Receptor` -- named points ("house 12") each at its own height;
* :class:`LateralProfileSet` -- a line perpendicular to the route at a chainage
  measured along the route centre line from the first support;
* :class:`models.route.right_of_way.RightOfWaySet` -- the two right-of-way edges,
  parallel to the centre line, sampled along the whole route.

The dataclasses hold request coordinates (request CRS); the ``*_points`` functions
take geometry already in the engine's metre plane (see :mod:`models.route.crs`) and
return observation points ``(n, 3)`` [m] with ``z`` = height above the flat ground
plane z = 0 (the route engine's ground model, :mod:`models.route.types`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry import LineString

from ..errors import EngineInputError, must_be
from .alignment import frame_at_chainage, stations, support_chainage_m
from .right_of_way import RightOfWaySet
from .types import Route


@dataclass(frozen=True)
class PathSet:
    """A path sampled every ``step_m`` [m] at ``height_m`` [m] above ground.

    ``geometry`` is a shapely LineString in the request CRS (>= 2 positions).
    """

    geometry: LineString
    step_m: float
    height_m: float


@dataclass(frozen=True)
class LateralProfileSet:
    """A profile across the route at ``chainage_m`` [m] from the first support.

    Offsets run from ``from_m`` to ``to_m`` [m] every ``step_m`` (both ends included),
    positive to the right looking from the first support towards the last.
    """

    chainage_m: float
    from_m: float
    to_m: float
    step_m: float
    height_m: float


@dataclass(frozen=True)
class Receptor:
    """A named observation point: position in the request CRS, height above ground [m]."""

    id: str
    name: str
    x: float
    y: float
    height_m: float


@dataclass(frozen=True)
class GridSet:
    """A regular grid over ``bbox = (minx, miny, maxx, maxy)`` (request CRS).

    Spacing is at most ``resolution_m`` [m] in the working metre plane; the grid
    covers the bounding box exactly (both edges included).
    """

    bbox: tuple[float, float, float, float]
    resolution_m: float
    height_m: float


@dataclass(frozen=True)
class CustomZoneLimit:
    """A client's own zone threshold, e.g. 0.4 µT: ``value`` in ``unit``.

    ``unit`` is one of :data:`models.catalogue.UNIT_TO_SI` (µT/uT, mT, T, V/m,
    kV/m); the unit decides the quantity.
    """

    id: str
    value: float
    unit: str


@dataclass(frozen=True)
class ZoneSet:
    """Thresholds to contour on the grid evaluation set.

    Each entry is a catalogue reference-level id (every quantity the level defines
    is contoured) or a :class:`CustomZoneLimit`; they are resolved at the system
    frequency by :func:`models.catalogue.thresholds_for` / ``custom_threshold``.
    """

    thresholds: tuple[str | CustomZoneLimit, ...]


@dataclass(frozen=True)
class EvaluationSets:
    """Everything to evaluate for one route request (any combination)."""

    path: PathSet | None = None
    lateral_profile: LateralProfileSet | None = None
    receptors: tuple[Receptor, ...] = field(default_factory=tuple)
    grid: GridSet | None = None
    zones: ZoneSet | None = None
    right_of_way: RightOfWaySet | None = None

    @property
    def is_empty(self) -> bool:
        """True when no point set is requested."""
        return (self.path is None and self.lateral_profile is None and not self.receptors and self.grid is None
                and self.right_of_way is None)


def _check_count(n: int, max_points: int | None, field_name: str) -> None:
    if max_points is not None and n > max_points:
        raise EngineInputError(
            field_name,
            f"Input {field_name} must give at most {max_points} points; instead it gives {n}.",
        )


def _positive(value: float, field_name: str) -> None:
    if not (math.isfinite(value) and value > 0.0):
        raise must_be(field_name, "a finite number > 0", value)


def _height(value: float, field_name: str) -> None:
    if not (math.isfinite(value) and value >= 0.0):
        raise must_be(field_name, "a finite height >= 0 above ground", value)


def path_points(line_m: LineString, step_m: float, height_m: float, *, max_points: int | None = None,
                field_prefix: str = "path") -> tuple[np.ndarray, np.ndarray]:
    """Sample a path every ``step_m`` along its length (both ends included).

    Parameters
    ----------
    line_m : shapely.LineString
        The path in the working metre plane [m].
    step_m : float
        Spacing along the path [m].
    height_m : float
        Observation height above ground [m].
    max_points : int, optional
        Reject the set (``EngineInputError``) when it would give more points.

    Returns
    -------
    points_m : ndarray, shape (n, 3)
        Observation points (x, y, z = height_m) [m].
    distance_m : ndarray, shape (n,)
        Distance along the path from its first position [m].

    Notes
    -----
    Positions come from :meth:`shapely.LineString.interpolate` at the stations of
    :func:`stations`, so every path vertex between stations is passed over, not
    sampled (the spacing along the path is exactly ``step_m``).

    Examples
    --------
    >>> pts, d = path_points(LineString([(0, 0), (10, 0)]), 4.0, 1.0)
    >>> d.tolist(), pts[-1].tolist()
    ([0.0, 4.0, 8.0, 10.0], [10.0, 0.0, 1.0])
    """
    _positive(step_m, f"{field_prefix}.step_m")
    _height(height_m, f"{field_prefix}.height_m")
    length = float(line_m.length)
    if not (math.isfinite(length) and length > 0.0):
        raise must_be(f"{field_prefix}.geometry", "a LineString of length > 0", length)
    _check_count(int(length / step_m) + 2, max_points, f"{field_prefix}.step_m")
    d = stations(length, step_m)
    pts = shapely.line_interpolate_point(line_m, d)
    xy = shapely.get_coordinates(pts)
    points = np.column_stack([xy, np.full(len(d), float(height_m))])
    return points, d


def lateral_profile_points(route_m: Route, spec: LateralProfileSet, *, max_points: int | None = None,
                           field_prefix: str = "lateral_profile") -> tuple[np.ndarray, np.ndarray]:
    """Points of a lateral profile across the route.

    Parameters
    ----------
    route_m : Route
        The route with support positions in the working metre plane [m].
    spec : LateralProfileSet
        Chainage [m] from the first support (0 .. route length), offsets
        ``from_m .. to_m`` every ``step_m`` (both ends included), height [m].

    Returns
    -------
    points_m : ndarray, shape (n, 3)
        Observation points [m].
    offset_m : ndarray, shape (n,)
        Signed offset from the centre line, positive to the right [m].

    Notes
    -----
    The profile runs along the right normal of the span at the chainage
    (:func:`models.route.alignment.frame_at_chainage`; exactly at an angle support,
    the span leaving it).

    Examples
    --------
    >>> from models.route.types import Support
    >>> r = Route((Support("a", 0, 0), Support("b", 0, 100)), ())   # heading north: right = east
    >>> pts, off = lateral_profile_points(r, LateralProfileSet(50.0, -10.0, 10.0, 10.0, 1.0))
    >>> pts.tolist()
    [[-10.0, 50.0, 1.0], [0.0, 50.0, 1.0], [10.0, 50.0, 1.0]]
    """
    _positive(spec.step_m, f"{field_prefix}.step_m")
    _height(spec.height_m, f"{field_prefix}.height_m")
    length = float(support_chainage_m(route_m)[-1])
    c = spec.chainage_m
    if not (math.isfinite(c) and -1e-9 <= c <= length + 1e-9):
        raise must_be(f"{field_prefix}.chainage_m", f"within the route, 0 .. {length:.3f} m", c)
    if not (math.isfinite(spec.from_m) and math.isfinite(spec.to_m) and spec.to_m > spec.from_m):
        raise must_be(f"{field_prefix}.to_m", f"finite and > from_m ({spec.from_m!r})", spec.to_m)
    _check_count(int((spec.to_m - spec.from_m) / spec.step_m) + 2, max_points, f"{field_prefix}.step_m")
    origin, _, normal = frame_at_chainage(route_m, min(max(c, 0.0), length))
    offsets = spec.from_m + stations(spec.to_m - spec.from_m, spec.step_m)
    xy = origin[None, :] + offsets[:, None] * normal[None, :]
    points = np.column_stack([xy, np.full(len(offsets), float(spec.height_m))])
    return points, offsets


def receptor_points(x_m, y_m, height_m, *, field_prefix: str = "receptors.features") -> np.ndarray:
    """Receptor observation points from plan positions and heights.

    Parameters
    ----------
    x_m, y_m : array_like, shape (n,)
        Plan positions in the working metre plane [m].
    height_m : array_like, shape (n,)
        Heights above ground [m], finite and >= 0 (error field
        ``receptors.features[i].properties.height_m``).

    Returns
    -------
    ndarray, shape (n, 3)
        Observation points [m].
    """
    h = np.asarray(height_m, dtype=float)
    for i, hi in enumerate(h.ravel()):
        _height(float(hi), f"{field_prefix}[{i}].properties.height_m")
    return np.column_stack([np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float), h])


@dataclass(frozen=True)
class GridAxes:
    """A regular grid in the working metre plane.

    ``x_m`` (nx,) and ``y_m`` (ny,) are the axes [m]; points are ordered row by row
    (y outer, x inner), i.e. reshaping a per-point array to ``(ny, nx)`` gives
    ``values[j, i]`` at ``(x_m[i], y_m[j])``.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    height_m: float

    @property
    def shape(self) -> tuple[int, int]:
        return (len(self.y_m), len(self.x_m))

    def points_m(self) -> np.ndarray:
        """Observation points ``(ny * nx, 3)`` [m]."""
        xx, yy = np.meshgrid(self.x_m, self.y_m)
        return np.column_stack([xx.ravel(), yy.ravel(), np.full(xx.size, float(self.height_m))])


def grid_axes(bounds_m: tuple[float, float, float, float], resolution_m: float, height_m: float, *,
              max_points: int | None = None, field_prefix: str = "grid") -> GridAxes:
    """Regular grid covering a bounding box in the working plane.

    Parameters
    ----------
    bounds_m : (minx, miny, maxx, maxy)
        Box in working metres [m], ``maxx > minx`` and ``maxy > miny``.
    resolution_m : float
        Largest spacing [m]; each axis gets ``ceil(width / resolution_m) + 1``
        equally spaced values (at least 2), both edges included.
    height_m : float
        Observation height above ground [m].
    max_points : int, optional
        Reject grids with more points.

    Examples
    --------
    >>> g = grid_axes((0.0, 0.0, 10.0, 5.0), 2.5, 1.0)
    >>> g.x_m.tolist(), g.y_m.tolist(), g.shape
    ([0.0, 2.5, 5.0, 7.5, 10.0], [0.0, 2.5, 5.0], (3, 5))
    """
    _positive(resolution_m, f"{field_prefix}.resolution_m")
    _height(height_m, f"{field_prefix}.height_m")
    minx, miny, maxx, maxy = (float(v) for v in bounds_m)
    if not all(math.isfinite(v) for v in (minx, miny, maxx, maxy)) or not (maxx > minx and maxy > miny):
        raise must_be(f"{field_prefix}.bbox", "[minx, miny, maxx, maxy] with maxx > minx and maxy > miny", [minx, miny, maxx, maxy])
    nx = max(int(math.ceil((maxx - minx) / resolution_m - 1e-9)) + 1, 2)
    ny = max(int(math.ceil((maxy - miny) / resolution_m - 1e-9)) + 1, 2)
    _check_count(nx * ny, max_points, f"{field_prefix}.resolution_m")
    return GridAxes(np.linspace(minx, maxx, nx), np.linspace(miny, maxy, ny), float(height_m))
