"""Engineering studies on a cross-section: what the line would need, not only what it gives.

* :mod:`models.studies.clearance`: the lowest conductor clearance at which a field
  stays below a threshold (beyond an offset, or everywhere), by a bracketed 1-D solve.
* :mod:`models.studies.phase_arrangement`: every phase arrangement of a multi-circuit
  line ranked by a field quantity, from per-position unit fields combined linearly.

Both take the request's evaluation (:class:`models.evaluation.Evaluation`) for the
points they look at, and read its sets by role.  Route variants are not built.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ClearanceStudy", "PhaseArrangementStudy", "RANK_BY", "STUDY_KINDS"]

STUDY_KINDS = ("clearance", "phase_arrangement")

RANK_BY = ("b_max", "b_edge", "b_receptors", "e_max")
"""What a phase-arrangement study ranks by (see :mod:`models.studies.phase_arrangement`)."""


@dataclass(frozen=True)
class ClearanceStudy:
    """Clearance needed: the lowest conductor height keeping ``quantity`` below ``threshold``.

    ``threshold`` is a reference-level id or custom-limit id of the request;
    ``beyond_offset_m`` None means everywhere, else every point with
    ``|offset| >= beyond_offset_m``; ``height_m`` None means the profile's height.
    """

    kind: str
    threshold: str
    min_clearance_m: float
    max_clearance_m: float
    quantity: str | None = None
    beyond_offset_m: float | None = None
    height_m: float | None = None
    tolerance_m: float = 0.01


@dataclass(frozen=True)
class PhaseArrangementStudy:
    """Phase arrangement: every arrangement ranked by ``rank_by`` (one of :data:`RANK_BY`)."""

    kind: str
    rank_by: str = "b_max"
