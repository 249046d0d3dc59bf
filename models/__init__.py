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
from .cross_section import evaluate_cross_section, warm_up_section
from .electric import electric_field_phasors, line_charges, potential_coefficients
from .magnetic import complex_depth_m, earth_return_phasors, flux_density_phasors
from .sources import (
    PHASE_SCHEMES,
    build_sources,
    bundle_radius_m,
    circuit_phase_angles_deg,
    equivalent_bundle_radius_m,
    subconductor_offsets_m,
    validate_circuit,
    validate_cross_section,
)
from .catalogue import (
    CATALOGUE_VERSION,
    LevelDefinition,
    Threshold,
    custom_threshold,
    levels_at,
    list_levels,
    thresholds_for,
)
from .compliance import ThresholdCompliance, evaluate_compliance, multi_frequency_exposure_index

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
    # cross-section engine
    "PHASE_SCHEMES",
    "build_sources",
    "bundle_radius_m",
    "circuit_phase_angles_deg",
    "complex_depth_m",
    "earth_return_phasors",
    "electric_field_phasors",
    "equivalent_bundle_radius_m",
    "evaluate_cross_section",
    "flux_density_phasors",
    "line_charges",
    "potential_coefficients",
    "subconductor_offsets_m",
    "validate_circuit",
    "validate_cross_section",
    "warm_up_section",
    # reference levels and compliance
    "CATALOGUE_VERSION",
    "LevelDefinition",
    "Threshold",
    "ThresholdCompliance",
    "custom_threshold",
    "evaluate_compliance",
    "levels_at",
    "list_levels",
    "multi_frequency_exposure_index",
    "thresholds_for",
]
