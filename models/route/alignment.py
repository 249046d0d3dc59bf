"""Plan geometry of a route: spans, chainage, attachment points and validation.

Plan coordinates are a projected plane in metres (x east, y north), z is up
(see :mod:`models.route.types`).  A conductor's attachment at a support is::

    P_xy = S_xy + offset_m * v_i,        P_z = ground_elevation_m + height_m

where ``v_i`` is the *offset vector* of support i:

* at the first and last support, the unit normal to the right of the adjoining
  span (right looking from the first support towards the last);
* at an angle support, a vector along the **bisector of the line angle**.

**Decision on the length of the bisector offset** (``convention``):

``"perpendicular"`` (default)
    ``v_i = (n_in + n_out) / (1 + n_in . n_out)``, i.e. the bisector unit vector
    scaled by 1 / cos(delta / 2), delta = line deviation angle.  ``offset_m`` is then
    the perpendicular distance of the conductor from the route centre line in
    *both* adjoining spans: every span's conductor runs parallel to the centre
    line at its stated offset, so a mid-span cross-section has exactly the phase
    spacing of the 2-D cross-section the user describes, and the cross-arm
    distance along the bisector is offset / cos(delta/2).  Angle towers carry
    their cross-arms along the bisector (common practice) and are made wider for
    larger deviations to keep the phase spacing (from memory); above all, this is
    the only choice under which ``offset_m`` means the same thing as in
    :class:`models.geometry.Conductor`, so it is ours.
``"along_bisector"``
    ``v_i`` is the bisector unit vector: ``offset_m`` is the distance along the
    cross-arm; the perpendicular spacing in the adjoining spans is reduced to
    offset * cos(delta/2) near the support.  Offered for describing a given
    tower drawing.

Deviation angles of 135 deg or more are rejected (the cross-arm would be longer
than 2.6 times the offset; such a support is a terminal, model two routes).

Ground: the horizontal plane z = 0 (see :mod:`models.route.types`);
conductors must stay above it everywhere in every span.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from shapely.geometry import LineString

from ..errors import GeometryError, must_be
from ..sources import check_overlaps, check_phasor, check_finite, validate_circuit
from .catenary import CatenarySpan
from .types import Attachment, Route

__all__ = [
    "MAX_DEVIATION_DEG",
    "OffsetConvention",
    "StrungWire",
    "attachment_points_m",
    "deviation_angles_deg",
    "frame_at_chainage",
    "LowestPoint",
    "lowest_point",
    "offset_vectors",
    "route_centre_line",
    "span_directions",
    "strung_wires",
    "support_chainage_m",
    "validate_route",
]

OffsetConvention = Literal["perpendicular", "along_bisector"]

#: Largest accepted line deviation at a support [deg] (exclusive).
MAX_DEVIATION_DEG = 135.0


def _support_xy(route: Route) -> np.ndarray:
    return np.array([[s.x, s.y] for s in route.supports], dtype=float).reshape(-1, 2)


def span_directions(route: Route) -> np.ndarray:
    """Unit plan direction of every span, from support i to i+1.

    Parameters
    ----------
    route : Route

    Returns
    -------
    ndarray, shape (n_supports - 1, 2)
        (dx, dy) unit vectors [-].

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> r = Route((Support("a", 0, 0), Support("b", 0, 300)), ())
    >>> span_directions(r)
    array([[0., 1.]])
    """
    d = np.diff(_support_xy(route), axis=0)
    return d / np.hypot(d[:, 0], d[:, 1])[:, None]


def deviation_angles_deg(route: Route) -> np.ndarray:
    """Line deviation angle at every support [deg] (0 at both ends and on straight runs).

    Positive when the route turns left (anticlockwise), negative when it turns right.

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> r = Route((Support("a", 0, 0), Support("b", 100, 0), Support("c", 200, 100)), ())
    >>> deviation_angles_deg(r).round(6) + 0.0
    array([ 0., 45.,  0.])
    """
    u = span_directions(route)
    out = np.zeros(len(route.supports))
    if len(u) >= 2:
        cross = u[:-1, 0] * u[1:, 1] - u[:-1, 1] * u[1:, 0]
        dot = np.sum(u[:-1] * u[1:], axis=1)
        out[1:-1] = np.degrees(np.arctan2(cross, dot))
    return out


def offset_vectors(route: Route, convention: OffsetConvention = "perpendicular") -> np.ndarray:
    """Plan vector per support that multiplies ``offset_m`` (see the module notes).

    Parameters
    ----------
    route : Route
    convention : {"perpendicular", "along_bisector"}
        Length of the bisector vector at angle supports: 1 / cos(delta/2)
        (perpendicular spacing kept, default) or 1 (offset along the cross-arm).

    Returns
    -------
    ndarray, shape (n_supports, 2)
        Attachment plan position = support position + offset_m * vector [-].

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> r = Route((Support("a", 0, 0), Support("b", 100, 0), Support("c", 100, 100)), ())
    >>> offset_vectors(r).round(12) + 0.0    # 90 deg left turn: bisector scaled by sqrt(2)
    array([[ 0., -1.],
           [ 1., -1.],
           [ 1.,  0.]])
    """
    u = span_directions(route)
    right = np.column_stack([u[:, 1], -u[:, 0]])
    v = np.empty((len(route.supports), 2))
    v[0] = right[0]
    v[-1] = right[-1]
    if len(right) >= 2:
        n_in, n_out = right[:-1], right[1:]
        s = n_in + n_out
        cos_full = np.sum(n_in * n_out, axis=1)
        if convention == "perpendicular":
            v[1:-1] = s / (1.0 + cos_full)[:, None]
        elif convention == "along_bisector":
            v[1:-1] = s / np.hypot(s[:, 0], s[:, 1])[:, None]
        else:
            raise must_be("convention", "'perpendicular' or 'along_bisector'", convention, GeometryError)
    return v


def support_chainage_m(route: Route) -> np.ndarray:
    """Chainage of every support: plan distance along the centre line from the first [m].

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> r = Route((Support("a", 0, 0), Support("b", 300, 400), Support("c", 300, 500)), ())
    >>> support_chainage_m(r)
    array([  0., 500., 600.])
    """
    d = np.diff(_support_xy(route), axis=0)
    return np.concatenate([[0.0], np.cumsum(np.hypot(d[:, 0], d[:, 1]))])


def route_centre_line(route: Route) -> LineString:
    """Route centre line through the supports, in plan, as a shapely LineString [m].

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> route_centre_line(Route((Support("a", 0, 0), Support("b", 300, 400)), ())).length
    500.0
    """
    return LineString(_support_xy(route))


def frame_at_chainage(route: Route, chainage_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Point, forward direction and right normal of the centre line at a chainage.

    Parameters
    ----------
    route : Route
    chainage_m : float
        Distance along the centre line from the first support [m], within
        [0, route length].  Exactly at an angle support the direction of the span
        leaving it is used.

    Returns
    -------
    point_xy, tangent, right : ndarray, shape (2,)
        Plan point [m], unit direction of the span there and its unit right normal [-].

    Raises
    ------
    GeometryError
        If ``chainage_m`` lies outside the route (field ``chainage_m``).

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> p, t, n = frame_at_chainage(Route((Support("a", 0, 0), Support("b", 0, 300)), ()), 100.0)
    >>> p, t, n
    (array([  0., 100.]), array([0., 1.]), array([ 1., -0.]))
    """
    ch = support_chainage_m(route)
    c = float(chainage_m)
    if not (math.isfinite(c) and 0.0 <= c <= ch[-1]):
        raise must_be("chainage_m", f"between 0 and the route length {float(ch[-1])!r} m", chainage_m, GeometryError)
    i = int(min(np.searchsorted(ch, c, side="right") - 1, len(ch) - 2))
    u = span_directions(route)[i]
    xy = _support_xy(route)[i] + (c - ch[i]) * u
    return xy, u, np.array([u[1], -u[0]])


def attachment_points_m(
    route: Route,
    offsets_m,
    heights_m,
    convention: OffsetConvention = "perpendicular",
) -> np.ndarray:
    """3-D attachment points of one wire at every support.

    Parameters
    ----------
    route : Route
    offsets_m : float or ndarray, shape (n_supports,)
        Offset across the line at each support [m] (positive to the right).
    heights_m : float or ndarray, shape (n_supports,)
        Attachment height above each support's ground [m].
    convention : {"perpendicular", "along_bisector"}
        See :func:`offset_vectors`.

    Returns
    -------
    ndarray, shape (n_supports, 3)
        (x, y, z) [m] with z = ground_elevation_m + height_m.

    Examples
    --------
    >>> from models.route.types import Route, Support
    >>> r = Route((Support("a", 0, 0, 5.0), Support("b", 0, 300)), ())
    >>> attachment_points_m(r, 2.0, 20.0)
    array([[  2.,   0.,  25.],
           [  2., 300.,  20.]])
    """
    n = len(route.supports)
    off = np.broadcast_to(np.asarray(offsets_m, float), (n,))
    hgt = np.broadcast_to(np.asarray(heights_m, float), (n,))
    elev = np.array([s.ground_elevation_m for s in route.supports], dtype=float)
    xy = _support_xy(route) + off[:, None] * offset_vectors(route, convention)
    return np.column_stack([xy, elev + hgt])


@dataclass(frozen=True)
class StrungWire:
    """One phase conductor (bundle centre) or earth wire, hung along the whole route.

    Attributes
    ----------
    path : str
        Input path, e.g. ``"route.circuits[0].conductors[1]"`` or ``"route.earth_wires[0]"``.
    offsets_m, heights_m : ndarray, shape (n_supports,)
        Offset across the line and attachment height above the support's ground [m].
    attachment_m : ndarray, shape (n_supports, 3)
        Attachment points [m].
    spans : tuple of CatenarySpan
        One per span, in the vertical plane through consecutive attachment points.
    outer_radius_m : float
        Radius of the wire, or bundle radius plus subconductor radius [m].
    """

    path: str
    offsets_m: np.ndarray
    heights_m: np.ndarray
    attachment_m: np.ndarray
    spans: tuple[CatenarySpan, ...]
    outer_radius_m: float


def _attachment_arrays(path: str, wire, n_supports: int) -> tuple[np.ndarray, np.ndarray]:
    """Per-support offsets and heights of a conductor/earth wire, checked finite."""
    if wire.attachments is None:
        off = check_finite(f"{path}.offset_m", wire.offset_m, "in metres", GeometryError)
        hgt = check_finite(f"{path}.height_m", wire.height_m, "in metres", GeometryError)
        return np.full(n_supports, off), np.full(n_supports, hgt)
    att = tuple(wire.attachments)
    if len(att) != n_supports:
        raise must_be(f"{path}.attachments", f"one attachment per support ({n_supports})", f"{len(att)} attachments",
                      GeometryError)
    off = np.empty(n_supports)
    hgt = np.empty(n_supports)
    for i, a in enumerate(att):
        if not isinstance(a, Attachment):
            raise must_be(f"{path}.attachments[{i}]", "an Attachment", a, GeometryError)
        off[i] = check_finite(f"{path}.attachments[{i}].offset_m", a.offset_m, "in metres", GeometryError)
        hgt[i] = check_finite(f"{path}.attachments[{i}].height_m", a.height_m, "in metres", GeometryError)
    return off, hgt


def _spans_for(path: str, wire, attachment_m: np.ndarray, underground: bool) -> tuple[CatenarySpan, ...]:
    """Catenary of every span from the wire's sag or tension/weight, with input checks."""
    tension = getattr(wire, "horizontal_tension_n", None)
    weight = getattr(wire, "weight_n_per_m", None)
    sag = check_finite(f"{path}.sag_m", wire.sag_m, ">= 0 m", GeometryError)
    if sag < 0:
        raise must_be(f"{path}.sag_m", ">= 0 m", wire.sag_m, GeometryError)
    if (tension is None) != (weight is None):
        missing = "weight_n_per_m" if weight is None else "horizontal_tension_n"
        raise must_be(f"{path}.{missing}", "given together with "
                      + ("horizontal_tension_n" if weight is None else "weight_n_per_m"), None, GeometryError)
    use_tension = tension is not None
    if use_tension:
        for name, value in (("horizontal_tension_n", tension), ("weight_n_per_m", weight)):
            v = check_finite(f"{path}.{name}", value, "> 0", GeometryError)
            if v <= 0:
                raise must_be(f"{path}.{name}", "> 0", value, GeometryError)
        if sag != 0.0:
            raise must_be(f"{path}.sag_m", "0 (unset) when horizontal_tension_n and weight_n_per_m are given",
                          wire.sag_m, GeometryError)
    if underground and (sag != 0.0 or use_tension):
        raise must_be(f"{path}.sag_m", "0 for an underground cable (laid straight)", wire.sag_m, GeometryError)
    spans = []
    for i in range(len(attachment_m) - 1):
        d = attachment_m[i + 1] - attachment_m[i]
        length = math.hypot(d[0], d[1])
        if not length > 0.0:
            raise GeometryError(f"{path}", f"Input {path} must have distinct attachment points in plan at "
                                f"supports {i} and {i + 1}; instead received a zero-length span.")
        if use_tension:
            spans.append(CatenarySpan.from_tension(length, float(d[2]), float(tension), float(weight)))
        else:
            spans.append(CatenarySpan.from_sag(length, float(d[2]), sag, field=f"{path}.sag_m"))
    return tuple(spans)


def validate_route(route: Route, *, convention: OffsetConvention = "perpendicular") -> tuple[StrungWire, ...]:
    """Check a route and hang its wires; see :func:`strung_wires` (same result)."""
    return strung_wires(route, convention=convention)


def strung_wires(route: Route, *, convention: OffsetConvention = "perpendicular") -> tuple[StrungWire, ...]:
    """Validate a route and hang every conductor and earth wire as catenaries.

    Parameters
    ----------
    route : Route
    convention : {"perpendicular", "along_bisector"}
        Bisector offset convention at angle supports (see the module notes).

    Returns
    -------
    tuple of StrungWire
        Circuits' conductors in input order, then earth wires.

    Raises
    ------
    GeometryError
        With ``field`` the input path, e.g. ``"route.supports[2]"`` (coincident
        consecutive supports, deviation >= 135 deg), ``"route.circuits[0].conductors[1].sag_m"``
        (negative sag, or a span whose lowest point is not clear of the ground),
        ``"...attachments"`` (wrong count), bundle and overlap errors as in
        :func:`models.sources.validate_cross_section`, at every support.
    LoadingError
        Unknown or ambiguous phase labels, negative current or voltage.

    Examples
    --------
    >>> from models.geometry import Bundle
    >>> from models.route.types import Route, RouteCircuit, RouteConductor, Support
    >>> c = RouteCircuit("c1", "overhead", 132.0, 400.0,
    ...     (RouteConductor("L1", -4, 15, 5.0), RouteConductor("L2", 0, 15, 5.0),
    ...      RouteConductor("L3", 4, 15, 5.0)), Bundle(0.025))
    >>> r = Route((Support("a", 0, 0), Support("b", 300, 0)), (c,))
    >>> w = strung_wires(r)
    >>> len(w), round(w[0].spans[0].midspan_sag_m, 9)
    (3, 5.0)
    """
    supports = tuple(route.supports)
    if len(supports) < 2:
        raise must_be("route.supports", "a list of at least 2 supports", f"{len(supports)} supports", GeometryError)
    ids = set()
    for i, s in enumerate(supports):
        for name in ("x", "y", "ground_elevation_m"):
            check_finite(f"route.supports[{i}].{name}", getattr(s, name), "in metres", GeometryError)
        if s.id in ids:
            raise must_be(f"route.supports[{i}].id", "unique", s.id, GeometryError)
        ids.add(s.id)
    xy = _support_xy(route)
    step = np.hypot(*np.diff(xy, axis=0).T)
    for i in np.flatnonzero(~(step > 0.0)):
        raise GeometryError(f"route.supports[{i + 1}]", f"Input route.supports[{i + 1}] must differ in plan from "
                            f"route.supports[{i}]; instead received the same position {tuple(xy[i + 1])!r}.")
    dev = deviation_angles_deg(route)
    for i in np.flatnonzero(np.abs(dev) >= MAX_DEVIATION_DEG):
        raise must_be(f"route.supports[{i}]", f"a line deviation below {MAX_DEVIATION_DEG:g} deg",
                      f"{float(dev[i]):.6g} deg", GeometryError)
    if not route.circuits:
        raise must_be("route.circuits", "a non-empty list of circuits", [], GeometryError)

    n = len(supports)
    wires: list[StrungWire] = []
    envelopes: list[list[tuple[float, float, float, str]]] = [[] for _ in range(n)]
    for ci, circuit in enumerate(route.circuits):
        cpath = f"route.circuits[{ci}]"
        # circuit-level checks are the cross-section's (same fields on RouteCircuit)
        outer = validate_circuit(circuit, cpath)
        underground = circuit.kind == "underground"
        for k, conductor in enumerate(circuit.conductors):
            kpath = f"{cpath}.conductors[{k}]"
            check_phasor(f"{kpath}.current", conductor.current, "magnitude_a")
            check_phasor(f"{kpath}.voltage_to_ground", conductor.voltage_to_ground, "magnitude_kv")
            wires.append(_hang(route, kpath, conductor, outer, underground, convention, envelopes))
    for j, ew in enumerate(route.earth_wires):
        wpath = f"route.earth_wires[{j}]"
        d = check_finite(f"{wpath}.diameter_m", ew.diameter_m, "> 0 m", GeometryError)
        if d <= 0:
            raise must_be(f"{wpath}.diameter_m", "> 0 m", ew.diameter_m, GeometryError)
        check_phasor(f"{wpath}.current", ew.current, "magnitude_a")
        wires.append(_hang(route, wpath, ew, d / 2.0, False, convention, envelopes))
    for env in envelopes:
        check_overlaps(env)
    return tuple(wires)


def _hang(route, path, wire, outer, underground, convention, envelopes) -> StrungWire:
    """Attachment points, catenaries and clearance checks of one wire."""
    n = len(route.supports)
    off, hgt = _attachment_arrays(path, wire, n)
    where = (lambda i: f"{path}.height_m") if wire.attachments is None else (lambda i: f"{path}.attachments[{i}].height_m")
    for i in range(n):
        if not underground and hgt[i] - outer <= 0.0:
            raise must_be(where(i), f"> {outer!r} m (outer radius, clear of the ground) for an overhead wire",
                          float(hgt[i]), GeometryError)
        if underground and hgt[i] + outer >= 0.0:
            raise must_be(where(i), f"< {-outer!r} m (negative depth, fully below ground) for an underground cable",
                          float(hgt[i]), GeometryError)
    att = attachment_points_m(route, off, hgt, convention)
    for i in range(n):
        envelopes[i].append((float(off[i]), float(hgt[i]), outer, path))
    spans = _spans_for(path, wire, att, underground)
    if not underground:
        for i, span in enumerate(spans):
            z_low = att[i, 2] + span.lowest_height_m
            if z_low - outer <= 0.0:
                name = "horizontal_tension_n" if getattr(wire, "horizontal_tension_n", None) is not None else "sag_m"
                raise GeometryError(
                    f"{path}.{name}",
                    f"Input {path}.{name} must keep the wire clear of the ground in span {i} "
                    f"(supports {i}-{i + 1}); instead received {getattr(wire, name)!r}, "
                    f"lowest point z = {z_low:.6g} m.",
                )
    return StrungWire(path, off, hgt, att, spans, float(outer))


@dataclass(frozen=True)
class LowestPoint:
    """Lowest phase conductor of a route: bundle-centre height above the ground plane z = 0 [m], where."""

    height_m: float
    wire: str
    span: int


def lowest_point(route: Route, *, convention: OffsetConvention = "perpendicular") -> LowestPoint | None:
    """The lowest point of the overhead phase conductors over every span (the least ground clearance).

    Parameters
    ----------
    route : Route
        Supports in metres (a projected CRS or the working copy
        :attr:`models.evaluation.Evaluation.route_m`: the spans' lengths are horizontal metres).

    Returns
    -------
    LowestPoint or None
        Height of the bundle centre at the catenary's low point (or at the lower
        attachment when the low point lies outside the span) above z = 0, the wire's
        input path and the span (0 = first two supports); the first such wire when
        tied.  ``None`` when the route has no overhead circuit.  Earth wires are not
        counted (they hang above the phases).

    Examples
    --------
    >>> from models.geometry import Bundle
    >>> from models.route.types import Route, RouteCircuit, RouteConductor, Support
    >>> c = RouteCircuit("c1", "overhead", 132.0, 400.0, (RouteConductor("L1", 0, 15, 5.0),), Bundle(0.025))
    >>> p = lowest_point(Route((Support("a", 0, 0), Support("b", 300, 0)), (c,)))
    >>> round(p.height_m, 9), p.wire, p.span
    (10.0, 'route.circuits[0].conductors[0]', 0)
    """
    wires = strung_wires(route, convention=convention)
    overhead = {f"route.circuits[{i}]" for i, c in enumerate(route.circuits) if c.kind != "underground"}
    best: LowestPoint | None = None
    for w in wires:
        if w.path.split(".conductors")[0] not in overhead:  # earth wires and underground cables
            continue
        for i, span in enumerate(w.spans):
            z = float(w.attachment_m[i, 2] + span.lowest_height_m)
            if best is None or z < best.height_m:
                best = LowestPoint(z, w.path, i)
    return best


def stations(length_m: float, step_m: float) -> np.ndarray:
    """Stations 0, step, 2 step, ... along a length, the end always included.

    Parameters
    ----------
    length_m : float
        Length to sample [m], >= 0.
    step_m : float
        Spacing [m], > 0.  The last interval is shorter when ``length_m`` is not a
        multiple of ``step_m``; a station closer than 1e-9 step to the end is merged
        into it.

    Returns
    -------
    ndarray, shape (n,)
        Increasing distances [m] from 0 to ``length_m`` inclusive.

    Examples
    --------
    >>> stations(10.0, 4.0)
    array([ 0.,  4.,  8., 10.])
    >>> stations(0.3, 0.1)
    array([0. , 0.1, 0.2, 0.3])
    """
    n_full = int(math.floor(length_m / step_m + 1e-9))
    d = step_m * np.arange(n_full + 1, dtype=float)
    d = d[d < length_m - 1e-9 * step_m]
    return np.append(d, length_m)
