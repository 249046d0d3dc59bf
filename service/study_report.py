"""The ``study`` member of a report: clearance needed or phase arrangement, for the base case and every load case.

Built on the request's evaluation (:mod:`models.studies`); values in presentation
units (kV/m, µT, :mod:`service.tables`).  Only the cross-section variants exist: a
route request with a study gets a 422 naming ``/study/kind``.
"""

from __future__ import annotations

from typing import Any

from models import catalogue
from models.errors import EngineInputError
from models.evaluation import Evaluation
from models.load_cases import evaluate_load_cases
from models.section_sets import edge_height
from models.studies import ClearanceStudy
from models.studies.clearance import clearance_needed, study_offsets
from models.studies.phase_arrangement import rank_arrangements, unit_fields

from .tables import presentation, threshold_row

RANKING_ROWS = 10
"""Arrangements listed per case (best first); every one is evaluated."""

BASE = ("base", "As requested")


def study_threshold(study: ClearanceStudy, limits: list[catalogue.Threshold]) -> catalogue.Threshold:
    """The threshold a clearance study names (its quantity chosen by ``study.quantity`` when the level has both)."""
    matches = [t for t in limits if t.level_id == study.threshold
               and (study.quantity is None or t.quantity == study.quantity)]
    if not matches:
        raise EngineInputError("study.quantity", f"Level {study.threshold!r} has no {study.quantity} value at "
                                                 "this frequency.")
    if len(matches) > 1:
        raise EngineInputError("study.quantity", f"Level {study.threshold!r} has E and B values; give quantity "
                                                 "'E' or 'B'.")
    return matches[0]


def _cases(request: Any, compute) -> list[tuple[str, str, Any]]:
    """(case id, label, result) of the base case and of every load case, in order."""
    out = [(*BASE, compute(request.line))]
    for case, _, result in evaluate_load_cases(request.line, request.load_cases or (), compute):
        out.append((case.id, case.label or case.id, result))
    return out


def clearance_block(request: Any, study: ClearanceStudy, limits: list[catalogue.Threshold],
                    ev: Evaluation) -> dict[str, Any]:
    threshold = study_threshold(study, limits)
    _, conv, suffix = presentation(threshold.quantity)
    height_m = study.height_m if study.height_m is not None else edge_height(request.sets)[0]
    offsets = study_offsets(ev, study.beyond_offset_m)

    def compute(line):
        return clearance_needed(line, request.frequency_hz, threshold.quantity, threshold.limit_si, offsets,
                                height_m, study.min_clearance_m, study.max_clearance_m,
                                tolerance_m=study.tolerance_m, soil_resistivity_ohm_m=request.soil_resistivity_ohm_m)

    def value(x):
        return None if x is None else float(conv(x))

    cases = []
    for case_id, label, r in _cases(request, compute):
        cases.append({"id": case_id, "label": label, "achieved": r.achieved, "clearance_m": r.clearance_m,
                      "raise_m": r.raise_m, "given_clearance_m": r.given_clearance_m,
                      f"given_max_{suffix}": value(r.given_value_si), "given_max_offset_m": r.given_offset_m,
                      f"value_{suffix}": value(r.value_si), "binding_offset_m": r.binding_offset_m,
                      "below_clearance_m": r.below_clearance_m, f"below_value_{suffix}": value(r.below_value_si),
                      "best_clearance_m": r.best_clearance_m, f"best_value_{suffix}": value(r.best_value_si),
                      "evaluations": r.evaluations, "note": r.note})
    failing = [c for c in cases if not c["achieved"]]
    governing = failing[0] if failing else max(cases, key=lambda c: c["clearance_m"])
    return {"kind": "clearance", "threshold": threshold_row(threshold), "height_m": float(height_m),
            "beyond_offset_m": study.beyond_offset_m, "offsets_evaluated": int(offsets.size),
            "min_clearance_m": study.min_clearance_m, "max_clearance_m": study.max_clearance_m,
            "tolerance_m": study.tolerance_m, "achieved": not failing, "governing_case": governing["id"],
            "clearance_m": governing["clearance_m"], "cases": cases,
            "method": "Every overhead conductor and earth wire raised by the same height; clearance = height of "
                      "the lowest overhead phase position. Scan of the range, then bisection of the first "
                      "crossing to the tolerance: the limit is met at clearance_m and exceeded at "
                      "below_clearance_m."}


def phase_block(request: Any, study: Any, ev: Evaluation) -> dict[str, Any]:
    units = unit_fields(request.line, ev.combined.points_m, ev.frequency_hz,
                        soil_resistivity_ohm_m=request.soil_resistivity_ohm_m)
    quantity = "E" if study.rank_by == "e_max" else "B"
    _, conv, suffix = presentation(quantity)

    def compute(line):
        return rank_arrangements(line, ev, study.rank_by, soil_resistivity_ohm_m=request.soil_resistivity_ohm_m,
                                 units=units)

    cases = []
    for case_id, label, r in _cases(request, compute):
        best, given = r.best_index, r.given_index
        cases.append({
            "id": case_id, "label": label, "arrangements_evaluated": len(r.arrangements),
            "given": {"arrangement": r.arrangements[given].labels, f"value_{suffix}": float(conv(r.values_si[given]))},
            "best": {"arrangement": r.arrangements[best].labels, f"value_{suffix}": float(conv(r.values_si[best]))},
            "reduction_percent": 100.0 * r.reduction,
            "ranking": [{"rank": n + 1, "arrangement": r.arrangements[a].labels,
                         f"value_{suffix}": float(conv(r.values_si[a]))} for n, a in enumerate(r.order[:RANKING_ROWS])],
        })
    governing = max(cases, key=lambda c: c["best"][f"value_{suffix}"])
    return {"kind": "phase_arrangement", "rank_by": study.rank_by, "quantity": quantity,
            "governing_case": governing["id"], "cases": cases,
            "method": "Every permutation of each circuit's phase labels over its positions (both sequences), "
                      "combined over circuits; fields from per-position unit currents (B) or voltages (E) "
                      "combined linearly. Relabelling every circuit by the same cyclic shift gives equal rms "
                      "fields, so equal values come in groups."}


def check_study(geometry: str, request: Any) -> None:
    """Refuse, before any computation, a study the geometry has no variant of (field ``study.kind``)."""
    study = request.study
    if study is not None and geometry != "cross_section":
        raise EngineInputError("study.kind", f"The {study.kind} study is available for cross-sections only "
                                             "(not for routes).")


def study_block(geometry: str, request: Any, limits: list[catalogue.Threshold], ev: Evaluation) -> dict[str, Any]:
    """The ``study`` member for ``request.study``.

    :raise EngineInputError: a study the geometry has no variant of (``study.kind``) or the line cannot take.
    """
    study = request.study
    check_study(geometry, request)
    if isinstance(study, ClearanceStudy):
        return clearance_block(request, study, limits, ev)
    return phase_block(request, study, ev)
