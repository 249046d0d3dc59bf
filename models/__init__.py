"""emf-assess field engine: phasor E and B near power installations.

Pure numpy/shapely library: no web framework, no database.  Public API is
re-exported here; see README.md ("Engine API") for a tour.
"""

from __future__ import annotations

from .errors import CatalogueError, EngineInputError, GeometryError, LoadingError
from .geometry import (
    Bundle,
    Circuit,
    Conductor,
    CrossSection,
    CurrentPhasor,
    EarthWire,
    VoltagePhasor,
)
from .results import FieldResult, axial_ratio, ellipse_axes, resultant_rms

ENGINE_VERSION = "0.1.0"

__all__ = [
    "ENGINE_VERSION",
    "Bundle",
    "CatalogueError",
    "Circuit",
    "Conductor",
    "CrossSection",
    "CurrentPhasor",
    "EarthWire",
    "EngineInputError",
    "FieldResult",
    "GeometryError",
    "LoadingError",
    "VoltagePhasor",
    "axial_ratio",
    "ellipse_axes",
    "resultant_rms",
]
