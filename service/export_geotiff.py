"""GeoTIFF of a route assessment's field grid (written by GDAL through rasterio).

Pure renderer of the stored report dict.  The report's grid (``results.grid``) holds
cell-centre axes ``x_m`` (west to east) and ``y_m`` (south to north) in the grid's
working CRS (``working_crs``, metres; the request CRS for a projected route, the
local UTM zone for a lon/lat route) and ``e_kv_m``/``b_ut`` as ``ny x nx`` rows, south
first.  The raster has one pixel per grid node (pixel centre = node), north-up rows,
band 1 = E resultant (kV/m, when the report has E), next band = B resultant (µT),
float64, nodata NaN: the route engine refuses evaluation points inside a conductor
(422), so a stored grid has no such node; any null or non-finite value a report
carries is written as nodata.  Band metadata: ``quantity``, ``unit``, ``height_m``,
and ``threshold_<level id>`` = the limit (same unit) for every compliance entry of
that quantity.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import rasterio
from rasterio.io import MemoryFile
from affine import Affine

from . import geo_coordinates, reports

GEOTIFF_MIME = "image/tiff; application=geotiff"


class NoGrid(ValueError):
    """The report has no field grid (a cross-section, or a route without ``grid``)."""


def _band(values: Any) -> np.ndarray:
    rows = [[math.nan if v is None else float(v) for v in row] for row in values]
    arr = np.asarray(rows, dtype=np.float64)
    arr[~np.isfinite(arr)] = math.nan
    return arr[::-1]  # GeoTIFF rows run north to south


def grid_transform(grid: Mapping[str, Any]):
    """Affine transform putting pixel centres on the grid nodes."""
    x, y = grid["x_m"], grid["y_m"]
    dx = (x[-1] - x[0]) / (len(x) - 1) if len(x) > 1 else 1.0
    dy = (y[-1] - y[0]) / (len(y) - 1) if len(y) > 1 else 1.0
    return Affine(dx, 0.0, x[0] - dx / 2, 0.0, -dy, y[-1] + dy / 2)


def render_geotiff(report: Mapping[str, Any]) -> bytes:
    """The field grid as GeoTIFF bytes.

    Raises
    ------
    NoGrid
        When the report has no field grid.
    """
    grid = (report.get("results") or {}).get("grid") if reports.is_route_report(report) else None
    if not (isinstance(grid, Mapping) and isinstance(grid.get("b_ut"), list) and grid.get("x_m")):
        raise NoGrid("This assessment has no field grid (give \"grid\" in a route request).")
    bands = []
    for quantity, key, unit in (("E", "e_kv_m", "kV/m"), ("B", "b_ut", "µT")):
        if isinstance(grid.get(key), list):
            suffix = "kv_m" if quantity == "E" else "ut"
            tags = {"quantity": f"{quantity} resultant (rms)", "unit": unit, "height_m": str(grid.get("height_m"))}
            for c in report.get("compliance") or ():
                if c.get("quantity") == quantity:
                    tags[f"threshold_{c['level_id']}"] = f"{c[f'limit_{suffix}']} {unit}"
            bands.append((_band(grid[key]), f"{quantity} resultant ({unit})", tags))
    crs = geo_coordinates.grid_crs(report)
    ny, nx = bands[0][0].shape
    profile = {"driver": "GTiff", "width": nx, "height": ny, "count": len(bands), "dtype": "float64",
               "nodata": math.nan, "transform": grid_transform(grid),
               "crs": rasterio.crs.CRS.from_user_input(crs) if crs else None}
    with MemoryFile() as memfile:
        with memfile.open(**profile) as dst:
            dst.update_tags(assessment_id=str(report.get("id")), title=str(report.get("title")),
                            outcome=str(report.get("outcome")))
            for i, (data, description, tags) in enumerate(bands, start=1):
                dst.write(data, i)
                dst.set_band_description(i, description)
                dst.update_tags(i, **tags)
        return memfile.read()
