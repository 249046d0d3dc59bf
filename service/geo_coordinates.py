"""Coordinate helpers shared by the map exports: the route's CRS and lon/lat transformation (pyproj).

RFC 7946 (GeoJSON, 2016), section 4: coordinates are WGS 84 longitude, latitude in
decimal degrees.  The exports here take the stored report's request CRS
(``report["crs"]["request"]`` or ``input.route.crs``) and transform with pyproj,
``always_xy=True`` (x = easting/longitude first, as in the request).
"""

from __future__ import annotations

from collections.abc import Mapping
from functools import lru_cache
from typing import Any

from pyproj import CRS, Transformer

WGS84_LONLAT = "OGC:CRS84"


def request_crs(report: Mapping[str, Any]) -> str | None:
    """The CRS the request's coordinates are in (``None`` for local metres without a CRS)."""
    crs = report.get("crs")
    if isinstance(crs, Mapping) and crs.get("request"):
        return str(crs["request"])
    route = (report.get("input") or {}).get("route") or {}
    return route.get("crs")


def grid_crs(report: Mapping[str, Any]) -> str | None:
    """The CRS of the grid's ``x_m``/``y_m`` axes (the working plane, metres)."""
    grid = (report.get("results") or {}).get("grid")
    if isinstance(grid, Mapping) and grid.get("working_crs"):
        return str(grid["working_crs"])
    crs = report.get("crs")
    if isinstance(crs, Mapping) and crs.get("working"):
        return str(crs["working"])
    return request_crs(report)


@lru_cache(maxsize=16)
def to_lonlat(crs: str) -> Transformer:
    """Transformer from ``crs`` to WGS 84 lon/lat (axis order x, y)."""
    return Transformer.from_crs(CRS.from_user_input(crs), CRS.from_user_input(WGS84_LONLAT), always_xy=True)


def is_lonlat(crs: str | None) -> bool:
    """True when ``crs`` is WGS 84 geographic (EPSG:4326 / OGC:CRS84): nothing to transform."""
    if not crs:
        return False
    try:
        parsed = CRS.from_user_input(crs)
    except Exception:  # noqa: BLE001 - an unparsable CRS string is simply not lon/lat
        return False
    return parsed.is_geographic and parsed.equals(CRS.from_user_input(WGS84_LONLAT), ignore_axis_order=True)


def transform_coordinates(coords: Any, transformer: Transformer) -> Any:
    """GeoJSON ``coordinates`` (any nesting) with every position transformed; extra members kept."""
    if coords and isinstance(coords[0], (int, float)):
        x, y = transformer.transform(float(coords[0]), float(coords[1]))
        return [x, y, *coords[2:]]
    return [transform_coordinates(c, transformer) for c in coords]
