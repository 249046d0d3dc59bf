"""Reports as JSON text: encoded once, fast, in exactly the standard library's byte form.

:func:`dumps` writes what ``json.dumps(obj, separators=(",", ":"), ensure_ascii=False)``
writes, byte for byte (``tests/service/test_json_text.py`` checks it), at a fraction of
the time:

* the document is encoded by orjson (a well-kept Rust extension); its strings,
  separators and number digits are the standard library's (both write the shortest
  text that reads back to the same double), only the exponent style of some numbers
  differs, and a compiled pass (:func:`_restyle`) rewrites exactly those: ``2.5e-7`` ->
  ``2.5e-07`` and ``0.0000123`` -> ``1.23e-05`` (Python's ``repr`` switches to the
  exponent form below 1e-4, orjson below 1e-5);
* point tables (:class:`PointTable`) hold the engine's arrays as columns and are
  written in blocks of rows by orjson and a compiled row writer, without one Python
  dict per point.

So stored report texts keep the form records had before (the digest chain and
``POST /verify`` see no change).
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from typing import Any

import numpy as np
import orjson

BLOCK_ROWS = 32768
"""Rows of a point table rendered at a time (bounds the temporaries to a few MB)."""

_OPTIONS = orjson.OPT_SERIALIZE_NUMPY
_NUL = b"\x00"  # never part of JSON text (control characters in strings are escaped)


class PointTable(Sequence):
    """Rows of point values held as columns.

    Parameters
    ----------
    columns : mapping of str -> array_like
        Per-point values in row-member order: float arrays, or sequences of strings.
    nested : mapping of str -> mapping of str -> array_like, optional
        At most one member holding an object per row (e.g. ``"components"``), after
        the columns.

    Reading it as a sequence gives one dict per row (for Python readers); :func:`dumps`
    writes the same rows without making those dicts.
    """

    def __init__(self, columns: Mapping[str, Any], nested: Mapping[str, Mapping[str, Any]] | None = None):
        self.columns = {k: _column(v) for k, v in columns.items()}
        self.nested = {k: {c: _column(v) for c, v in cols.items()} for k, cols in (nested or {}).items()}
        lengths = {len(v) for v in self.columns.values()} | {len(v) for cols in self.nested.values()
                                                            for v in cols.values()}
        if len(lengths) > 1:
            raise ValueError(f"columns of unequal length: {sorted(lengths)}")
        self._n = lengths.pop() if lengths else 0
        if not self.columns or len(self.nested) > 1 or any(not cols for cols in self.nested.values()):
            raise ValueError("a point table has plain columns first and at most one non-empty nested member")

    def __len__(self) -> int:
        return self._n

    def __getitem__(self, i):  # type: ignore[override]
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(self._n))]
        if i < 0:
            i += self._n
        if not 0 <= i < self._n:
            raise IndexError(i)
        row = {k: _item(v, i) for k, v in self.columns.items()}
        for k, cols in self.nested.items():
            row[k] = {c: _item(v, i) for c, v in cols.items()}
        return row

    def __iter__(self) -> Iterator[dict[str, Any]]:
        return (self[i] for i in range(self._n))

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Sequence) and list(self) == list(other)

    def to_json(self) -> bytes:
        """The rows as a JSON array, in the standard library's byte form."""
        if self._n == 0:
            return b"[]"
        names = [(None, k) for k in self.columns] + [(n, k) for n, cols in self.nested.items() for k in cols]
        seps = []
        for j, (group, key) in enumerate(names):
            lead = b"{" if j == 0 else b","
            if group is not None and names[j - 1][0] != group:
                lead += orjson.dumps(group) + b":{"
            seps.append(lead + orjson.dumps(key) + b":")
        seps.append(b"}}," if self.nested else b"},")
        sep_bytes = np.frombuffer(b"".join(seps), dtype=np.uint8)
        sep_starts = np.cumsum([0] + [len(s) for s in seps]).astype(np.int64)
        values = [self.columns[k] if g is None else self.nested[g][k] for g, k in names]
        numeric = np.array([isinstance(v, np.ndarray) for v in values], dtype=np.bool_)
        # upper bound of the text: a float token is at most 24 bytes (+1 when restyled)
        widest = sum(25 if isinstance(v, np.ndarray) else max(len(orjson.dumps(s)) for s in set(v)) for v in values)
        out = np.empty(2 + self._n * (widest + len(sep_bytes)), dtype=np.uint8)
        out[0] = 91  # "["
        w = 1
        for start in range(0, self._n, BLOCK_ROWS):
            stop = min(start + BLOCK_ROWS, self._n)
            texts = [_tokens(v, start, stop) for v in values]
            col_bytes = np.frombuffer(b"".join(texts), dtype=np.uint8)
            col_starts = np.cumsum([0] + [len(x) for x in texts]).astype(np.int64)
            w = _kernels()[0](col_bytes, col_starts, numeric, sep_bytes, sep_starts, stop - start, out, w)
        out[w - 1] = 93  # "]" in place of the last row's ","
        return out[:w].tobytes()


def _column(values: Any) -> Any:
    """Float columns as contiguous float64 arrays; anything else (strings, integers) as a tuple."""
    if isinstance(values, np.ndarray):
        return np.ascontiguousarray(values) if values.dtype.kind == "f" else tuple(values.tolist())
    values = tuple(values)
    if values and all(type(v) is float for v in values):
        return np.asarray(values, dtype=float)
    return values


def _item(values: Any, i: int) -> Any:
    v = values[i]
    return float(v) if isinstance(v, np.floating) else v


def _tokens(values: Any, start: int, stop: int) -> bytes:
    """orjson's text of ``values[start:stop]``, each value followed by a NUL byte."""
    block = values[start:stop]
    if isinstance(values, np.ndarray):
        if not np.all(np.isfinite(block)):
            raise ValueError("point values must be finite (JSON has no NaN or Infinity)")
        return orjson.dumps(block, option=_OPTIONS)[1:-1].replace(b",", _NUL) + _NUL
    distinct = {v: orjson.dumps(v) for v in set(block)}
    return b"".join(distinct[v] + _NUL for v in block)


_COMPILED: tuple | None = None


def _kernels() -> tuple:
    """(row writer, restyle pass), compiled by numba on first use (cached on disk).

    Both copy a number's bytes and then restyle them in place (``restyle_in_place``).
    """
    global _COMPILED
    if _COMPILED is None:
        from numba import njit

        @njit(cache=True, nogil=True, inline="always")
        def restyle_in_place(out, i, j, epos):  # pragma: no cover - compiled
            # the number out[i:j] (orjson style; its "e" at epos or -1) -> Python repr style; returns the new end
            if epos >= 0:
                if j - epos == 3:  # "e", sign, one digit: insert a "0" before the digit
                    out[j] = out[j - 1]
                    out[j - 1] = 48
                    return j + 1
                return j
            b0 = i + 1 if out[i] == 45 else i
            if (j - b0 > 6 and out[b0] == 48 and out[b0 + 1] == 46 and out[b0 + 2] == 48 and out[b0 + 3] == 48
                    and out[b0 + 4] == 48 and out[b0 + 5] == 48 and out[b0 + 6] != 48):
                w = b0
                out[w] = out[b0 + 6]
                w += 1
                if j > b0 + 7:
                    out[w] = 46
                    w += 1
                    for t in range(b0 + 7, j):
                        out[w] = out[t]
                        w += 1
                out[w] = 101
                out[w + 1] = 45
                out[w + 2] = 48
                out[w + 3] = 53
                return w + 4
            return j

        @njit(cache=True, nogil=True)
        def write_rows(col_bytes, col_starts, numeric, sep_bytes, sep_starts, n_rows, out, w):  # pragma: no cover
            # rows of "sep0 value0 sep1 value1 ... close", values taken in turn from NUL-ended column texts
            k = col_starts.size - 1
            cursor = col_starts[:-1].copy()
            for _ in range(n_rows):
                for j in range(k + 1):
                    for b in range(sep_starts[j], sep_starts[j + 1]):
                        out[w] = sep_bytes[b]
                        w += 1
                    if j == k:
                        break
                    e = cursor[j]
                    w0 = w
                    epos = -1
                    while col_bytes[e] != 0:
                        x = col_bytes[e]
                        if x == 101:
                            epos = w
                        out[w] = x
                        w += 1
                        e += 1
                    cursor[j] = e + 1
                    if numeric[j]:
                        w = restyle_in_place(out, w0, w, epos)
            return w

        @njit(cache=True, nogil=True)
        def restyle(src, out):  # pragma: no cover - compiled
            n = src.size
            i = 0
            w = 0
            in_string = False
            while i < n:
                c = src[i]
                if in_string:
                    out[w] = c
                    w += 1
                    if c == 92:  # backslash: the next byte is escaped
                        out[w] = src[i + 1]
                        w += 1
                        i += 2
                        continue
                    if c == 34:
                        in_string = False
                    i += 1
                    continue
                if c == 34:
                    in_string = True
                    out[w] = c
                    w += 1
                    i += 1
                    continue
                if c == 45 or 48 <= c <= 57:
                    w0 = w
                    epos = -1
                    while i < n and (48 <= src[i] <= 57 or src[i] == 46 or src[i] == 101 or src[i] == 43
                                     or src[i] == 45):
                        if src[i] == 101:
                            epos = w
                        out[w] = src[i]
                        w += 1
                        i += 1
                    w = restyle_in_place(out, w0, w, epos)
                    continue
                out[w] = c
                w += 1
                i += 1
            return w

        _COMPILED = (write_rows, restyle)
    return _COMPILED


def _restyle(text: bytes) -> bytes:
    """orjson's number style -> the standard library's, outside strings (see the module notes)."""
    src = np.frombuffer(text, dtype=np.uint8)
    out = np.empty(len(text) + len(text) // 3 + 8, dtype=np.uint8)
    return out[:_kernels()[1](src, out)].tobytes()


def dumps(obj: Any) -> bytes:
    """``json.dumps(obj, separators=(",", ":"), ensure_ascii=False)`` as UTF-8 bytes, with point tables.

    Raises ``ValueError`` for NaN or infinite values (as ``allow_nan=False``) in point tables.

    >>> dumps({"b": [1.0, 2.5e-7, 1.5e-5], "a": "µT 2.5e-7"}).decode()
    '{"b":[1.0,2.5e-07,1.5e-05],"a":"µT 2.5e-7"}'
    """
    tables: list[PointTable] = []

    def default(value: Any) -> Any:
        if isinstance(value, PointTable):
            tables.append(value)
            return orjson.Fragment(_NUL)
        raise TypeError(f"cannot encode {type(value).__name__} as JSON")

    skeleton = _restyle(orjson.dumps(obj, default=default, option=_OPTIONS))
    if not tables:
        return skeleton
    parts = skeleton.split(_NUL)
    out = [parts[0]]
    for table, text in zip(tables, parts[1:]):
        out += [table.to_json(), text]
    return b"".join(out)


def plain(obj: Any) -> Any:
    """The value as plain Python objects (point tables as lists of dicts), as a reader of the JSON gets it."""
    return orjson.loads(dumps(obj))


def warm_up() -> None:
    """Compile (or load from numba's cache) the row writer and the restyle pass now."""
    dumps({"t": PointTable({"x": np.array([2.5e-7])}, {"c": {"y": np.array([1.5e-5])}})})
