"""Engine results in presentation units: threshold rows and point tables.

SI values from the engine become E in kV/m (``*_kv_m``) and B in µT (``*_ut``).
``e_kv_m``/``b_ut`` are resultants (root-sum-square of the component rms values, the
usual measurement and compliance quantity); ``e_max_kv_m``/``b_max_ut`` are the
semi-major axes of the polarisation ellipses.  Point tables are
:class:`service.json_text.PointTable` objects: the engine's arrays as columns.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from models import catalogue
from models.results import FieldResult
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .json_text import PointTable

SECTION_AXES = ("horizontal", "vertical")
"""Component names of a cross-section's fields (2-D)."""

ROUTE_AXES = ("x", "y", "z")
"""Component names of a route's fields: east, north and up of the working metre plane (3-D)."""


def presentation(quantity: str) -> tuple[str, Callable[[Any], Any], str]:
    """(unit, converter from SI, name suffix) for a quantity ("E" or "B")."""
    if quantity == "E":
        return "kV/m", v_per_m_to_kv_per_m, "kv_m"
    return "µT", t_to_ut, "ut"


def threshold_row(t: catalogue.Threshold) -> dict[str, Any]:
    """A threshold in presentation units (``limit_kv_m`` for E, ``limit_ut`` for B)."""
    unit, conv, suffix = presentation(t.quantity)
    return {
        "level_id": t.level_id,
        "title": t.title,
        "citation": t.citation,
        "population": t.population,
        "status": t.status,
        "note": t.note,
        "applies_at": t.applies_at,
        "quantity": t.quantity,
        "frequency_hz": t.frequency_hz,
        "unit": unit,
        f"limit_{suffix}": float(conv(t.limit_si)),
    }


def phase_deg(phasor: np.ndarray) -> np.ndarray:
    """Phase angles [deg] of phasors; 0 where the phasor is 0."""
    return np.where(np.abs(phasor) > 0, np.angle(phasor, deg=True), 0.0)


def field_columns(field: FieldResult, axes: Sequence[str]) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """(resultants, maxima and axial ratios; per-axis magnitudes and phases) of a field result [kV/m, µT, deg]."""
    e, b = field.e_phasor_v_per_m, field.b_phasor_t
    main = {
        "e_kv_m": v_per_m_to_kv_per_m(field.e_rms_v_per_m),
        "b_ut": t_to_ut(field.b_rms_t),
        "e_max_kv_m": v_per_m_to_kv_per_m(field.e_max_v_per_m),
        "b_max_ut": t_to_ut(field.b_max_t),
        "e_axial_ratio": field.e_axial_ratio,
        "b_axial_ratio": field.b_axial_ratio,
    }
    comps: dict[str, np.ndarray] = {}
    for k, axis in enumerate(axes):
        comps[f"e_{axis}_kv_m"] = v_per_m_to_kv_per_m(np.abs(e[:, k]))
        comps[f"e_{axis}_phase_deg"] = phase_deg(e[:, k])
    for k, axis in enumerate(axes):
        comps[f"b_{axis}_ut"] = t_to_ut(np.abs(b[:, k]))
        comps[f"b_{axis}_phase_deg"] = phase_deg(b[:, k])
    return main, comps


def point_rows(lead: dict[str, Any], field: FieldResult, axes: Sequence[str]) -> PointTable:
    """One row per point: the ``lead`` columns (position, set-specific), then fields and ``components``."""
    main, comps = field_columns(field, axes)
    return PointTable({**lead, **main}, {"components": comps})


def resultant_rows(lead: dict[str, Any], field: FieldResult) -> PointTable:
    """One row per point: the ``lead`` columns, then the resultant ``e_kv_m`` and ``b_ut``."""
    return PointTable({**lead, "e_kv_m": v_per_m_to_kv_per_m(field.e_rms_v_per_m), "b_ut": t_to_ut(field.b_rms_t)})
