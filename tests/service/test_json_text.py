"""The report encoder writes the standard library's bytes (the stored form records have always had).

Reference: Python's own ``json.dumps(obj, separators=(",", ":"), ensure_ascii=False)``,
whose number text is ``float.__repr__`` (shortest round trip).  Every check compares the
fast encoder's output with it byte for byte.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from service.json_text import BLOCK_ROWS, PointTable, dumps, plain


def stdlib(obj) -> bytes:
    return json.dumps(obj, separators=(",", ":"), ensure_ascii=False, allow_nan=False).encode("utf-8")


def magnitudes(seed: int = 7) -> np.ndarray:
    """Doubles over every decade from subnormal to near overflow, rounded and raw, both signs."""
    rng = np.random.default_rng(seed)
    parts = []
    with np.errstate(over="ignore", invalid="ignore"):
        for e in range(-323, 308):
            x = rng.standard_normal(40) * 10.0 ** e
            parts += [x, np.round(x, 3) if e < 300 else x, [10.0 ** e, -(10.0 ** e), 2.5 * 10.0 ** e]]
    x = np.concatenate(parts)
    return x[np.isfinite(x)]


def test_numbers_of_every_magnitude_are_written_as_python_writes_them() -> None:
    x = magnitudes()
    values = x.tolist() + [0.0, -0.0, 1e-5, 9.999999999999999e-05, 1e-4, 1e15, 1e16, 5e-324, 1, -7, 10**15]
    assert dumps(values) == stdlib(values)


def test_strings_and_structure_as_python_writes_them() -> None:
    doc = {"title": 'line "A" µT\n\t\x01 \u2028 2.5e-7 0.00001', "nested": [{"a": None, "b": True, "c": False}],
           "empty": {}, "list": [], "unicode": "Ω ≤ 5 kV/m", "n": 12}
    assert dumps(doc) == stdlib(doc)


@pytest.mark.parametrize("n", [0, 1, 7, BLOCK_ROWS, BLOCK_ROWS + 3])
def test_point_tables_equal_the_rows_they_stand_for(n: int) -> None:
    rng = np.random.default_rng(n)
    x = magnitudes()[:n] if n <= len(magnitudes()) else rng.standard_normal(n)
    x = np.resize(x, n) if n else np.zeros(0)
    names = tuple(f"house {i}, plot {i % 3}" for i in range(n))
    table = PointTable({"id": names, "offset_m": x, "b_ut": x * 1e-6},
                       {"components": {"b_x_ut": -x, "b_x_phase_deg": np.full(n, 120.0)}})
    rows = [{"id": names[i], "offset_m": float(x[i]), "b_ut": float(x[i] * 1e-6),
             "components": {"b_x_ut": float(-x[i]), "b_x_phase_deg": 120.0}} for i in range(n)]
    doc = {"before": 1.5e-5, "points": table, "again": {"t": table}, "after": "end"}
    assert dumps(doc) == stdlib({"before": 1.5e-5, "points": rows, "again": {"t": rows}, "after": "end"})
    assert list(table) == rows and len(table) == n
    assert plain(doc)["points"] == rows


def test_a_table_without_nested_members() -> None:
    table = PointTable({"id": ("a", "b"), "e_kv_m": np.array([1e-7, 3.0])})
    assert dumps([table]) == stdlib([[{"id": "a", "e_kv_m": 1e-7}, {"id": "b", "e_kv_m": 3.0}]])


def test_non_finite_point_values_are_refused() -> None:
    with pytest.raises(ValueError, match="finite"):
        dumps(PointTable({"b_ut": np.array([1.0, np.nan])}))


def test_unequal_columns_are_refused() -> None:
    with pytest.raises(ValueError, match="unequal"):
        PointTable({"a": np.zeros(2), "b": np.zeros(3)})
