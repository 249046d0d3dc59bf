"""Adaptive discretisation of a route's catenaries into straight segments.

Every span of every wire is cut into ``n`` segments of equal horizontal length
``h = L / n``.  The chord of a segment deviates from the catenary by at most
(linear interpolation error of a function with bounded second derivative)::

    max |z(x) - chord(x)| <= h^2 max|z''| / 8,      z''(x) = cosh((x - a)/C) / C

so choosing ``n = ceil(L sqrt(max|z''| / (8 tol)))`` keeps the vertical (and
hence the perpendicular) chord-to-catenary deviation below ``tolerance_m``.
A straight conductor (no sag) is one segment per span, which is exact.

**What the tolerance means for the field.**  Moving a current filament by a
distance delta changes B at distance d from it by at most about delta / d
relative (first order).  The chords lie between 0 and ``tolerance_m`` from the
catenary (on average 2/3 of it), so the relative B error at a point whose nearest
conductor is ``d`` away is below ``tolerance_m / d``; for a relative field
tolerance ``eps`` at clearance ``d`` use ``tolerance_m = eps * d``.  The error
falls as O(h^2) = O(1/n^2) (``tests/models/route/test_discretise.py`` shows
both).  The default 0.01 m gives < 1e-3 relative at 10 m from the conductors.

Two flavours of :class:`~models.route.types.SegmentSet`:

* **for B** (default): each bundle subconductor is its own wire carrying its
  share I / n of the phase current (common practice), placed at the bundle
  positions of :func:`models.sources.subconductor_offsets_m` in the plane
  perpendicular to the span (horizontal across the line, and vertical) around
  every vertex of the bundle centre's polyline: spacers keep the bundle's shape,
  so all subconductors follow the centre's catenary;
* **for E** (``for_electric=True``): each bundle is one wire along the bundle
  centre with the equivalent radius :func:`models.sources.equivalent_bundle_radius_m`.

Currents and voltages follow :func:`models.sources.build_sources` (phase labels,
sequence, angle offset, per-conductor overrides; earth wires at 0 V carrying
their ``current`` if given); currents flow from the first support towards the last.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import GeometryError, must_be
from ..geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
from ..sources import build_sources, equivalent_bundle_radius_m
from .catenary import CatenarySpan
from .alignment import OffsetConvention, StrungWire, offset_vectors, strung_wires
from .types import Route, SegmentSet

__all__ = ["DEFAULT_TOLERANCE_M", "discretise_route", "segments_for_span"]

#: Default largest chord-to-catenary deviation [m].
DEFAULT_TOLERANCE_M = 0.01


def segments_for_span(span: CatenarySpan, tolerance_m: float, max_segment_m: float | None = None) -> int:
    """Number of equal-horizontal-length segments keeping the chord deviation <= tolerance.

    Parameters
    ----------
    span : CatenarySpan
    tolerance_m : float
        Largest vertical distance between a chord and the catenary [m], > 0.
    max_segment_m : float, optional
        Also keep every segment's horizontal length <= this [m].

    Returns
    -------
    int
        n >= 1, ``ceil(L sqrt(max|z''| / (8 tol)))`` (see the module notes).

    Examples
    --------
    >>> segments_for_span(CatenarySpan(300.0, 0.0, 1000.0), 0.01)
    34
    """
    n = 1
    kappa = span.curvature_bound_per_m()
    if kappa > 0.0:
        n = max(n, math.ceil(span.span_m * math.sqrt(kappa / (8.0 * tolerance_m)) * (1.0 - 1e-12)))
    if max_segment_m is not None:
        n = max(n, math.ceil(span.span_m / max_segment_m * (1.0 - 1e-12)))
    return n


def _as_cross_section(route: Route, electric: bool) -> CrossSection:
    """The route's circuits as a cross-section at offset 0, height 0 (for sources' loading rules).

    With ``electric`` each bundle becomes one conductor of the equivalent radius.
    """
    circuits = []
    for c in route.circuits:
        bundle = c.bundle
        if electric:
            bundle = Bundle(2.0 * equivalent_bundle_radius_m(c.bundle), 1, None)
        conductors = tuple(Conductor(k.phase, 0.0, 0.0, k.current, k.voltage_to_ground) for k in c.conductors)
        circuits.append(Circuit(c.id, c.kind, c.voltage_kv, c.current_a, conductors, bundle,
                                c.reverse_sequence, c.angle_offset_deg))
    earth = tuple(EarthWire(0.0, 0.0, e.diameter_m, e.current) for e in route.earth_wires)
    return CrossSection(tuple(circuits), earth)


def _wire_vertices(parent: StrungWire, dx: float, dz: float, vectors: np.ndarray,
                   tolerance_m: float, max_segment_m: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Polyline vertices of one (sub)wire along the route and the span index of each segment.

    The bundle centre (``parent``) is cut into segments; a subconductor at (dx, dz) from the
    centre follows it vertex by vertex at ``dx * v(t) + dz * z_hat``, ``v(t)`` the support
    offset vectors interpolated along the span, so the bundle keeps its shape (spacers) and
    each subconductor lies on the line parallel to the centre at offset ``offset_m + dx``.
    """
    att = parent.attachment_m
    pieces = [att[:1] + [dx * vectors[0, 0], dx * vectors[0, 1], dz]]
    span_of = []
    for i, span in enumerate(parent.spans):
        a, b = att[i], att[i + 1]
        n = segments_for_span(span, tolerance_m, max_segment_m)
        t = np.arange(1, n + 1) / n
        v = np.empty((n, 3))
        v[:, :2] = a[:2] + t[:, None] * (b[:2] - a[:2])
        v[:, 2] = a[2] + span.height_m(t * span.span_m)
        v[-1] = b  # exact join with the next span
        if dx != 0.0 or dz != 0.0:
            vec = vectors[i] + t[:, None] * (vectors[i + 1] - vectors[i])
            v[:, :2] += dx * vec
            v[:, 2] += dz
        pieces.append(v)
        span_of.append(np.full(n, i))
    return np.concatenate(pieces), np.concatenate(span_of)


def discretise_route(
    route: Route,
    *,
    tolerance_m: float = DEFAULT_TOLERANCE_M,
    max_segment_m: float | None = None,
    for_electric: bool = False,
    convention: OffsetConvention = "perpendicular",
) -> SegmentSet:
    """Validate a route and cut every wire into straight segments.

    Parameters
    ----------
    route : Route
    tolerance_m : float
        Largest chord-to-catenary deviation [m] (> 0, default 0.01 m); the relative
        B error near a conductor at distance d stays below about tolerance_m / d
        (module notes).
    max_segment_m : float, optional
        Largest horizontal segment length of a bundle centre or earth wire [m] (also
        splits straight spans), e.g. for the charge simulation of the electric field.
        Subconductor segments next to an angle support can be longer by a fraction of
        the bundle radius, as they follow the centre's vertices.
    for_electric : bool
        False (default): one wire per bundle subconductor (for B).  True: one wire
        per bundle with the equivalent radius (for E).
    convention : {"perpendicular", "along_bisector"}
        Offset convention at angle supports, see :mod:`models.route.alignment`.

    Returns
    -------
    SegmentSet
        Wires in input order (circuits' conductors, bundle subconductors in the
        order of :func:`models.sources.subconductor_offsets_m`, then earth wires);
        each wire's segments consecutive, continuous, from the first support to the last.

    Raises
    ------
    GeometryError, LoadingError
        Invalid route (see :func:`models.route.alignment.strung_wires`) or tolerance.

    Examples
    --------
    >>> from models.geometry import Bundle
    >>> from models.route.types import Route, RouteCircuit, RouteConductor, Support
    >>> c = RouteCircuit("c1", "overhead", 132.0, 400.0,
    ...     (RouteConductor("L1", -4, 15, 5.0), RouteConductor("L2", 0, 15, 5.0),
    ...      RouteConductor("L3", 4, 15, 5.0)), Bundle(0.025, 2, 0.4))
    >>> s = discretise_route(Route((Support("a", 0, 0), Support("b", 300, 0)), (c,)))
    >>> len(s.wire_radius_m), s.start_m.shape
    (6, (138, 3))
    """
    tol = float(tolerance_m)
    if not (math.isfinite(tol) and tol > 0.0):
        raise must_be("tolerance_m", "a finite number > 0 m", tolerance_m, GeometryError)
    if max_segment_m is not None and not (math.isfinite(max_segment_m) and max_segment_m > 0.0):
        raise must_be("max_segment_m", "a finite number > 0 m", max_segment_m, GeometryError)
    wires = strung_wires(route, convention=convention)
    by_path = {w.path: w for w in wires}
    vectors = offset_vectors(route, convention)
    sources = build_sources(_as_cross_section(route, for_electric), field="route")

    starts, ends, currents, wire_idx, span_idx = [], [], [], [], []
    for w in range(len(sources.fields)):
        parent = by_path[sources.fields[w]]
        verts, spans = _wire_vertices(parent, float(sources.x_m[w]), float(sources.y_m[w]), vectors,
                                      tol, max_segment_m)
        starts.append(verts[:-1])
        ends.append(verts[1:])
        currents.append(np.full(len(spans), sources.current_a[w]))
        wire_idx.append(np.full(len(spans), w))
        span_idx.append(spans)
    return SegmentSet(
        start_m=np.concatenate(starts),
        end_m=np.concatenate(ends),
        current_a=np.concatenate(currents).astype(complex),
        wire_index=np.concatenate(wire_idx).astype(np.intp),
        wire_voltage_v=sources.voltage_v.copy(),
        wire_radius_m=sources.radius_m.copy(),
        wire_screened=~sources.overhead,
        wire_path=sources.fields,
        span_index=np.concatenate(span_idx).astype(np.intp),
    )
