"""3-D route engine: supports, sagging spans, straight-segment discretisation, B and E in 3-D.

Coordinates: a projected plane in metres (x east, y north, z up); see
:mod:`models.route.types` for the ground model.
"""

from __future__ import annotations

from .catenary import (
    CatenarySpan,
    catenary_constant_from_sag,
    catenary_height_m,
    conductor_length_m,
    level_span_sag_m,
    low_point_x_m,
    midspan_sag_m,
    parabolic_sag_m,
)
from .discretise import DEFAULT_TOLERANCE_M, discretise_route, segments_for_span
from .alignment import (
    LowestPoint,
    StrungWire,
    attachment_points_m,
    deviation_angles_deg,
    frame_at_chainage,
    lowest_point,
    offset_vectors,
    route_centre_line,
    span_directions,
    strung_wires,
    support_chainage_m,
    validate_route,
)
from . import earth_return3d, electric3d, magnetic3d
from .earth_return3d import image_flux_density_segments
from .electric3d import electric_field_segments, line_charges
from .evaluate import evaluate_route
from .magnetic3d import flux_density_segments
from .types import Attachment, Route, RouteCircuit, RouteConductor, RouteEarthWire, SegmentSet, Support

__all__ = [
    "Attachment",
    "evaluate_route",
    "CatenarySpan",
    "DEFAULT_TOLERANCE_M",
    "Route",
    "RouteCircuit",
    "RouteConductor",
    "RouteEarthWire",
    "SegmentSet",
    "StrungWire",
    "Support",
    "attachment_points_m",
    "catenary_constant_from_sag",
    "catenary_height_m",
    "conductor_length_m",
    "deviation_angles_deg",
    "discretise_route",
    "electric_field_segments",
    "flux_density_segments",
    "image_flux_density_segments",
    "frame_at_chainage",
    "level_span_sag_m",
    "line_charges",
    "low_point_x_m",
    "midspan_sag_m",
    "offset_vectors",
    "parabolic_sag_m",
    "route_centre_line",
    "segments_for_span",
    "span_directions",
    "strung_wires",
    "lowest_point",
    "LowestPoint",
    "support_chainage_m",
    "validate_route",
    "warm_up_electric",
    "warm_up_magnetic",
]


def warm_up_magnetic() -> float:
    """Compile (or load from numba's disk cache) the 3-D magnetic kernels: free-space segments and earth-return images.

    Returns the seconds spent; see :func:`models.route.magnetic3d.warm_up`.
    """
    return magnetic3d.warm_up() + earth_return3d.warm_up()


def warm_up_electric() -> float:
    """Compile (or load from numba's disk cache) the 3-D electric kernels; returns the seconds spent.

    See :func:`models.route.electric3d.warm_up`.
    """
    import time

    t0 = time.perf_counter()
    electric3d.warm_up()
    return time.perf_counter() - t0
