"""Right-of-way edges of a route: two lines parallel to the centre line, sampled for evaluation.

A right-of-way is given, like the conductor offsets, as two offsets across the line,
positive to the right looking from the first support towards the last
(``left_m < right_m``).  Each edge is the polyline through::

    V_i = S_i + offset_m * v_i

at every support i, with ``v_i`` the offset vector of
:func:`models.route.alignment.offset_vectors` (``"perpendicular"`` convention): the
right normal at the first and last support and, at an angle support, the bisector
scaled by 1 / cos(delta / 2).  Every straight piece of the edge is then parallel to
its span at exactly ``offset_m`` (the mitred parallel, as the conductor attachments),
so a mid-span cross-section of the route shows the edges where a 2-D cross-section
with the same ``right_of_way`` puts them.

The samples of an edge lie every ``step_m`` along the edge itself (both ends
included, :func:`models.route.alignment.stations`) at ``height_m`` above the flat
ground plane z = 0 (the route engine's ground model).  Their ``chainage_m`` is the
chainage of the nearest point of the centre line: the foot of the perpendicular on
the span, or the support itself for the samples beyond the end of a span on the
outer side of an angle (there the edge is farther than ``|offset_m|`` from the
centre line, by at most a factor 1 / cos(delta / 2), only over
``|offset_m| tan(delta / 2)`` next to the support).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import LineString

from ..errors import EngineInputError, must_be
from ..evaluation import DEFAULT_EDGE_HEIGHT_M, EDGES
from .alignment import offset_vectors, span_directions, stations, support_chainage_m
from .types import Route

__all__ = ["DEFAULT_EDGE_HEIGHT_M", "DEFAULT_EDGE_STEP_M", "EDGES", "EdgeSamples", "RightOfWaySet",
           "edge_vertices_m", "right_of_way_edges"]

DEFAULT_EDGE_STEP_M = 5.0
"""Default spacing of the samples along a right-of-way edge [m]."""


@dataclass(frozen=True)
class RightOfWaySet:
    """Right-of-way edges of a route to evaluate.

    Attributes
    ----------
    left_m, right_m : float
        Offsets of the edges across the line, + right [m], ``left_m < right_m``.
    step_m : float
        Spacing of the samples along each edge [m], > 0.
    height_m : float
        Height of the samples above ground [m], >= 0.
    """

    left_m: float
    right_m: float
    step_m: float = DEFAULT_EDGE_STEP_M
    height_m: float = DEFAULT_EDGE_HEIGHT_M


@dataclass(frozen=True)
class EdgeSamples:
    """One sampled right-of-way edge (working metre plane).

    Attributes
    ----------
    edge : {"left", "right"}
    offset_m : float
        Offset of the edge from the centre line, + right [m].
    vertices_m : ndarray, shape (n_supports, 2)
        Edge polyline vertices, one per support [m].
    points_m : ndarray, shape (n, 3)
        Samples (x, y, z = height above ground) [m].
    distance_m : ndarray, shape (n,)
        Distance of each sample along the edge from its start [m].
    chainage_m : ndarray, shape (n,)
        Chainage of the nearest centre-line point [m].
    """

    edge: str
    offset_m: float
    vertices_m: np.ndarray
    points_m: np.ndarray
    distance_m: np.ndarray
    chainage_m: np.ndarray

    @property
    def length_m(self) -> float:
        """Length of the edge polyline [m]."""
        return float(self.distance_m[-1])


def edge_vertices_m(route_m: Route, offset_m: float, *, field: str = "right_of_way.right_m") -> np.ndarray:
    """Vertices of the edge parallel to the centre line at ``offset_m``, one per support.

    Parameters
    ----------
    route_m : Route
        Supports in the working metre plane [m].
    offset_m : float
        Offset across the line, + right [m].
    field : str
        Input path named by the error.

    Returns
    -------
    ndarray, shape (n_supports, 2)
        ``S_i + offset_m * v_i`` [m] (bisector mitre at angle supports).

    Raises
    ------
    EngineInputError
        When the edge folds back or crosses itself (an offset on the inner side of an
        angle larger than the adjoining spans allow).

    Examples
    --------
    >>> from models.route.types import Support
    >>> r = Route((Support("a", 0, 0), Support("b", 100, 0), Support("c", 100, 100)), ())
    >>> edge_vertices_m(r, 10.0).round(9) + 0.0     # 90 deg left turn, right edge on the outside
    array([[  0., -10.],
           [110., -10.],
           [110., 100.]])
    """
    off = float(offset_m)
    if not math.isfinite(off):
        raise must_be(field, "a finite offset in metres", offset_m)
    xy = np.array([[s.x, s.y] for s in route_m.supports], dtype=float)
    vertices = xy + off * offset_vectors(route_m, "perpendicular")
    along = np.sum(np.diff(vertices, axis=0) * span_directions(route_m), axis=1)
    bad = np.flatnonzero(~(along > 1e-9))
    if len(bad) or (len(vertices) > 3 and not LineString(vertices).is_simple):
        where = f" in span {int(bad[0])} (supports {int(bad[0])}-{int(bad[0]) + 1})" if len(bad) else ""
        raise EngineInputError(field, f"Input {field} must give a right-of-way edge that does not fold back or "
                                      f"cross itself{where}; instead received {off!r} m, too far on the inner side "
                                      "of a line angle for the adjoining spans.")
    return vertices


def _nearest_chainage(route_m: Route, points_xy: np.ndarray, span_index: np.ndarray) -> np.ndarray:
    """Chainage of the nearest centre-line point of edge samples on the edge piece of ``span_index``."""
    ch = support_chainage_m(route_m)
    u = span_directions(route_m)
    xy = np.array([[s.x, s.y] for s in route_m.supports], dtype=float)
    foot = np.sum((points_xy - xy[span_index]) * u[span_index], axis=1)
    return ch[span_index] + np.clip(foot, 0.0, ch[span_index + 1] - ch[span_index])


def right_of_way_edges(route_m: Route, spec: RightOfWaySet, *, max_points: int | None = None,
                       field_prefix: str = "right_of_way") -> tuple[EdgeSamples, EdgeSamples]:
    """Sample both right-of-way edges of a route every ``step_m``.

    Parameters
    ----------
    route_m : Route
        Supports in the working metre plane [m].
    spec : RightOfWaySet
        Offsets, spacing and height.
    max_points : int, optional
        Reject the set when both edges together would give more samples
        (``EngineInputError`` naming ``right_of_way.step_m``).

    Returns
    -------
    (EdgeSamples, EdgeSamples)
        Left edge, then right edge.

    Raises
    ------
    EngineInputError
        Non-finite or unordered offsets, ``step_m`` <= 0, ``height_m`` < 0, too many
        samples, an edge folding back at an angle support (``field`` names the member).

    Examples
    --------
    >>> from models.route.types import Support
    >>> r = Route((Support("a", 0, 0), Support("b", 0, 20)), ())      # heading north: right = east
    >>> left, right = right_of_way_edges(r, RightOfWaySet(-15.0, 15.0, 8.0, 1.0))
    >>> right.points_m.tolist()
    [[15.0, 0.0, 1.0], [15.0, 8.0, 1.0], [15.0, 16.0, 1.0], [15.0, 20.0, 1.0]]
    >>> left.chainage_m.tolist(), left.distance_m.tolist()
    ([0.0, 8.0, 16.0, 20.0], [0.0, 8.0, 16.0, 20.0])
    """

    left, right = float(spec.left_m), float(spec.right_m)
    for name, value in (("left_m", left), ("right_m", right)):
        if not math.isfinite(value):
            raise must_be(f"{field_prefix}.{name}", "a finite offset in metres", value)
    if not right > left:
        raise must_be(f"{field_prefix}.right_m", f"greater than left_m ({left!r})", right)
    step = float(spec.step_m)
    if not (math.isfinite(step) and step > 0.0):
        raise must_be(f"{field_prefix}.step_m", "a finite number > 0", spec.step_m)
    height = float(spec.height_m)
    if not (math.isfinite(height) and height >= 0.0):
        raise must_be(f"{field_prefix}.height_m", "a finite height >= 0 above ground", spec.height_m)
    vertices = {edge: edge_vertices_m(route_m, off, field=f"{field_prefix}.{edge}_m")
                for edge, off in zip(EDGES, (left, right))}
    lengths = {edge: float(LineString(v).length) for edge, v in vertices.items()}
    n = sum(int(length / step) + 2 for length in lengths.values())
    if max_points is not None and n > max_points:
        raise EngineInputError(f"{field_prefix}.step_m", f"Input {field_prefix}.step_m must give at most "
                                                         f"{max_points} points; instead the edges give about {n}.")
    out = []
    for edge, off in zip(EDGES, (left, right)):
        v = vertices[edge]
        line = LineString(v)
        d = stations(lengths[edge], step)
        xy = shapely.get_coordinates(shapely.line_interpolate_point(line, d))
        cum = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(v, axis=0).T))])
        span = np.clip(np.searchsorted(cum, d, side="right") - 1, 0, len(v) - 2)
        out.append(EdgeSamples(edge, off, v, np.column_stack([xy, np.full(len(d), height)]), d,
                               _nearest_chainage(route_m, xy, span)))
    return out[0], out[1]
