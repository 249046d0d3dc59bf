"""Input and intermediate types of the 3-D route engine.

Coordinates: a projected plane in metres, ``x`` east, ``y`` north, ``z`` up.
Ground is the horizontal plane z = 0 (flat ground, the default and only model);
``Support.ground_elevation_m`` raises that support's attachment points
(z = ground_elevation_m + attachment height) but terrain between supports is
not modelled, and field images are taken in the plane z = 0 (E) or about the plane at the
complex earth-return depth below it (B, with a soil resistivity).  Observation
heights are heights above that plane.

Offsets across the line are positive to the right looking from the first support
towards the last; at an angle support they lie along the bisector of the line angle.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..geometry import Bundle, CurrentPhasor, Harmonic, VoltagePhasor


@dataclass(frozen=True)
class Support:
    """A support (tower/pole) in plan: position and ground elevation [m].

    ``x``, ``y`` are in the request CRS (metres of a projected CRS, or longitude and
    latitude in degrees); the route engine's working copy
    (:attr:`models.evaluation.Evaluation.route_m`) holds them in working-plane metres.
    """

    id: str
    x: float
    y: float
    ground_elevation_m: float = 0.0


@dataclass(frozen=True)
class Attachment:
    """Attachment of one conductor at one support: offset across the line [m], height above the support's ground [m]."""

    offset_m: float
    height_m: float


@dataclass(frozen=True)
class RouteConductor:
    """One phase position strung along the whole route.

    ``offset_m``/``height_m`` apply at every support unless ``attachments`` gives one
    value per support.  The conductor hangs in each span as a catenary with mid-span
    sag ``sag_m`` (vertical distance at mid-span below the chord), or, when
    ``horizontal_tension_n`` and ``weight_n_per_m`` are given, with catenary constant
    C = H / w.
    """

    phase: str
    offset_m: float
    height_m: float
    sag_m: float = 0.0
    attachments: tuple[Attachment, ...] | None = None
    horizontal_tension_n: float | None = None
    weight_n_per_m: float | None = None
    current: CurrentPhasor | None = None
    voltage_to_ground: VoltagePhasor | None = None


@dataclass(frozen=True)
class RouteCircuit:
    """A circuit strung along the route (same loading conventions as :class:`models.geometry.Circuit`)."""

    id: str
    kind: str  # "overhead" | "underground"
    voltage_kv: float
    current_a: float
    conductors: tuple[RouteConductor, ...]
    bundle: Bundle
    reverse_sequence: bool = False
    angle_offset_deg: float = 0.0
    harmonics: tuple[Harmonic, ...] | None = None


@dataclass(frozen=True)
class RouteEarthWire:
    """Grounded earth wire strung along the route."""

    offset_m: float
    height_m: float
    diameter_m: float
    sag_m: float = 0.0
    attachments: tuple[Attachment, ...] | None = None
    current: CurrentPhasor | None = None


@dataclass(frozen=True)
class Route:
    """Ordered supports and the circuits and earth wires strung between them."""

    supports: tuple[Support, ...]
    circuits: tuple[RouteCircuit, ...]
    earth_wires: tuple[RouteEarthWire, ...] = field(default_factory=tuple)


@dataclass(frozen=True)
class SegmentSet:
    """A route discretised into straight segments (one row per segment).

    Attributes
    ----------
    start_m, end_m : ndarray, shape (m, 3)
        Segment end points [m] (x east, y north, z up).
    current_a : complex ndarray, shape (m,)
        rms current phasor flowing from start to end [A].
    wire_index : int ndarray, shape (m,)
        Index of the wire (row of ``wire_voltage_v``/``wire_radius_m``) the segment belongs to.
        For B, each bundle subconductor is its own wire; for E the bundle is one wire
        of equivalent radius (see ``for_electric``).
    wire_voltage_v : complex ndarray, shape (w,)
        rms voltage-to-ground phasor of each wire [V] (0 for earth wires).
    wire_radius_m : ndarray, shape (w,)
        Radius of each wire [m] (equivalent bundle radius for E wires).
    wire_screened : bool ndarray, shape (w,)
        True for underground screened cables (no E outside).
    wire_path : tuple of str, length w
        Input path of each wire's conductor, e.g. ``"route.circuits[0].conductors[1]"``
        (all subconductors of a bundle share it) or ``"route.earth_wires[0]"``.
    span_index : int ndarray, shape (m,)
        Span (0 = between the first two supports) each segment lies in.

    Notes
    -----
    Built by :func:`models.route.discretise.discretise_route`.  The segments of
    one wire are consecutive rows and form a continuous polyline from the first
    support to the last (``end_m[i] == start_m[i + 1]`` exactly within a wire);
    currents flow that way.  Wires come in input order: each circuit's conductors
    (for B every bundle subconductor separately, carrying I / n; with
    ``for_electric=True`` one wire per bundle along its centre, radius = equivalent
    bundle radius, current = the phase current), then the earth wires.
    ``max_segment_m`` caps the horizontal segment length of bundle centres.
    """

    start_m: np.ndarray
    end_m: np.ndarray
    current_a: np.ndarray
    wire_index: np.ndarray
    wire_voltage_v: np.ndarray
    wire_radius_m: np.ndarray
    wire_screened: np.ndarray
    wire_path: tuple[str, ...] = ()
    span_index: np.ndarray | None = None
