"""GeoPackage export of a route assessment (OGC GeoPackage 1.3, written by GDAL through pyogrio).

Pure renderer of the stored report dict: the same features as the GeoJSON export
(:func:`service.reports.route_features`, same ids and properties), in the route's own
CRS (the GeoPackage records it in ``gpkg_spatial_ref_sys``), one layer per kind:

``route`` (centre line), ``supports``, ``right_of_way_edges``, ``evaluated_points``
(path, lateral profile, grid and right-of-way samples, column ``kind`` says which),
``receptors`` (values and ``verdict``) and ``exposure_zones`` (MultiPolygon).
Layers without features are left out.
"""

from __future__ import annotations

import math
import os
import sqlite3
import tempfile
from collections.abc import Mapping, Sequence
from contextlib import closing
from typing import Any

import numpy as np
import pyogrio.raw
import shapely
from shapely.geometry import shape

from . import geo_coordinates, reports

GEOPACKAGE_MIME = "application/geopackage+sqlite3"

LAYERS: tuple[tuple[str, tuple[str, ...], str], ...] = (
    ("route", ("route",), "LineString"),
    ("supports", ("support",), "Point"),
    ("right_of_way_edges", ("right_of_way_edge",), "LineString"),
    ("evaluated_points", ("path", "lateral_profile", "grid", "right_of_way"), "Point"),
    ("receptors", ("receptor",), "Point"),
    ("exposure_zones", ("zone",), "MultiPolygon"),
)
"""(layer name, feature kinds it holds, geometry type)."""


def _column(values: Sequence[Any]) -> np.ndarray:
    """One attribute column: float64 (NaN for missing) when every value is a number, else text."""
    present = [v for v in values if v is not None]
    if present and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in present):
        return np.array([math.nan if v is None else float(v) for v in values], dtype=np.float64)
    return np.array([None if v is None else str(v).lower() if isinstance(v, bool) else str(v)
                     for v in values], dtype=object)


def _layer_table(features: Sequence[Mapping[str, Any]], geometry_type: str):
    names: list[str] = ["feature_id"]
    for f in features:
        for key, value in f["properties"].items():
            if key not in names and not isinstance(value, (list, dict)):
                names.append(key)
    rows = [{"feature_id": f["id"], **f["properties"]} for f in features]
    columns = [_column([row.get(n) for row in rows]) for n in names]
    geoms = [shape(f["geometry"]) for f in features]
    if geometry_type == "MultiPolygon":
        geoms = [g if g.geom_type == "MultiPolygon" else shapely.MultiPolygon([g]) for g in geoms]
    return names, columns, shapely.to_wkb(np.array(geoms, dtype=object))


def _stamp(path: str, report: Mapping[str, Any]) -> str:
    """Set ``gpkg_contents.last_change`` (GDAL writes the clock) to the report's ``created_at`` and
    rewrite the file with ``VACUUM INTO``, so that one stored record always gives the same bytes
    (ETag = record digest): the file header's change counter otherwise counts GDAL's commits,
    whose number varies from run to run.  Returns the path of the rewritten file."""
    created = str(report.get("created_at") or "1970-01-01T00:00:00.000Z")
    stamp = created[:23].rstrip("Z") + "Z" if "." in created else created
    final = path + ".final"
    with closing(sqlite3.connect(path)) as db:
        with db:
            db.execute("UPDATE gpkg_contents SET last_change = ?", (stamp,))
        db.execute("VACUUM INTO ?", (final,))
    return final


def render_geopackage(report: Mapping[str, Any]) -> bytes:
    """The route assessment as GeoPackage bytes (route CRS).

    Raises
    ------
    reports.NotARouteReport
        For a cross-section assessment.
    """
    if not reports.is_route_report(report):
        raise reports.NotARouteReport("A cross-section assessment has no map geometry; "
                                      "the GeoPackage exists for route assessments only.")
    features = reports.route_features(report)
    crs = geo_coordinates.request_crs(report)
    with tempfile.TemporaryDirectory(prefix="emf-gpkg-") as folder:
        path = os.path.join(folder, "assessment.gpkg")
        written = 0
        for layer, kinds, geometry_type in LAYERS:
            members = [f for f in features if f["properties"]["kind"] in kinds]
            if not members:
                continue
            names, columns, wkb = _layer_table(members, geometry_type)
            pyogrio.raw.write(path, wkb, columns, names, layer=layer, driver="GPKG",
                              geometry_type=geometry_type, crs=crs, append=written > 0,
                              layer_options={"FID": "fid"})
            written += 1
        with open(_stamp(path, report), "rb") as fh:
            return fh.read()
