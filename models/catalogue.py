"""Versioned catalogue of reference levels, action levels and national limit values.

The values live in ``models/data/reference_levels.json`` (data with provenance,
not literals in code).  The file is validated and loaded once per process
(:func:`functools.cache`).  Each catalogue row (:class:`LevelDefinition`) gives,
per quantity (``"E"`` electric field, ``"B"`` magnetic flux density), a list of
contiguous frequency pieces with a formula in **f in Hz**:

* ``constant``: ``value = c``
* ``inverse``: ``value = c / f``
* ``inverse_square``: ``value = c / f**2``

A piece applies for ``f_min_hz <= f < f_max_hz``; the last piece also includes
``f_max_hz``; a piece with ``f_min_hz == f_max_hz`` applies at that one frequency
(national rules written for one grid frequency, 50 Hz or 60 Hz).  Coefficients are converted to SI on
load (V/m for E, T for B).

Every catalogue row and every piece and checkpoint carries its own provenance
``status`` with a ``source`` line, one of three levels (:data:`STATUSES`):

* ``"official_text"``: read in the official text itself; the source names the
  document, the table or clause and where the text was read (its address);
* ``"secondary"``: read in a named secondary publication that quotes the official
  text (the source gives that publication and its address), not in the text itself;
* ``"memory"``: from memory of the document, not checked against any published text.

A threshold takes the level of the piece its value comes from; nothing raises a
level, not even a checkpoint at the same frequency.  Published single-frequency
values ("checkpoints") must round to the printed figure when the formula is
evaluated at their frequency (the rounding of the printed last digit, no wider).

Trap (see README "Reference levels"): the general-public B reference level at
50 Hz is 100 µT under ICNIRP 1998 / EU 1999/519/EC but 200 µT under ICNIRP 2010.
Callers must name the edition; there is no default level.
"""

from __future__ import annotations

import difflib
import functools
import json
import math
import re
from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal
from importlib import resources
from pathlib import Path
from typing import Any, Literal, Sequence

from .errors import CatalogueError, must_be

__all__ = [
    "APPLIES_AT",
    "CATALOGUE_VERSION",
    "CatalogueFileError",
    "Checkpoint",
    "FrequencyPiece",
    "LevelDefinition",
    "QuantityDefinition",
    "Threshold",
    "catalogue_ids",
    "custom_threshold",
    "get_level",
    "levels_at",
    "list_levels",
    "load_catalogue",
    "thresholds_for",
    "to_si",
]

Quantity = Literal["E", "B"]

#: unit -> (quantity, power of ten to SI).  SI: V/m for E, T for B.
_UNIT_POW10: dict[str, tuple[str, int]] = {
    "V/m": ("E", 0),
    "kV/m": ("E", 3),
    "T": ("B", 0),
    "mT": ("B", -3),
    "uT": ("B", -6),
    "µT": ("B", -6),  # U+00B5 micro sign
    "μT": ("B", -6),  # U+03BC greek small letter mu
}

#: unit -> (quantity, factor to SI) for every accepted unit.  Convert with :func:`to_si`.
UNIT_TO_SI: dict[str, tuple[str, float]] = {u: (q, 10.0**p) for u, (q, p) in _UNIT_POW10.items()}


def to_si(value: float, unit: str) -> float:
    """Convert a value in ``unit`` (a key of ``UNIT_TO_SI``) to V/m or T.

    The decimal value is shifted exactly (``Decimal.scaleb``) and rounded once, so a
    printed value becomes the double nearest to the SI value: ``100 µT -> 1e-4`` and
    ``0.4 µT -> 4e-7`` exactly, whereas ``100 * 1e-6`` is one ulp low and would make a
    field of exactly 100 µT fail a 100 µT limit.

    >>> to_si(100, "µT") == 1e-4, to_si(0.4, "µT") == 0.4e-6, to_si(2.5, "kV/m")
    (True, True, 2500.0)
    """
    return float(Decimal(repr(float(value))).scaleb(_UNIT_POW10[unit][1]))

SI_UNIT = {"E": "V/m", "B": "T"}
FORMULAS = {"constant": 0, "inverse": 1, "inverse_square": 2}
STATUSES = ("official_text", "secondary", "memory")
"""Provenance levels, strongest first (see the module docstring)."""
LEVEL_WORDS = {"official_text": "official text", "secondary": "secondary publication", "memory": "from memory"}
POPULATIONS = ("general public", "occupational", "general public and occupational")
APPLIES_AT = ("any_point", "right_of_way_edge")
"""Where a row's value is compared: every evaluated point, or the right-of-way edges only."""
_ID_RE = re.compile(r"^[a-z0-9][a-z0-9.\-]*$")
_VERSION_RE = re.compile(r"^\d{4}\.\d{1,2}\.\d+$")
_DEFAULT_FILE = "reference_levels.json"


class CatalogueFileError(ValueError):
    """The catalogue data file is malformed (a packaging defect, not user input).

    Parameters
    ----------
    path : str
        Location inside the file, e.g. ``"levels[3].quantities.B.pieces[1].f_min_hz"``.
    message : str
    """

    def __init__(self, path: str, message: str):
        super().__init__(f"{path}: {message}")
        self.path = path


@dataclass(frozen=True)
class FrequencyPiece:
    """One frequency interval of a quantity's formula (coefficient already in SI).

    ``value_si(f) = coefficient_si / f**power`` with ``power`` 0, 1 or 2 and f in Hz.
    """

    f_min_hz: float
    f_max_hz: float
    formula: str
    coefficient: float
    coefficient_si: float
    status: str
    source: str

    @property
    def power(self) -> int:
        return FORMULAS[self.formula]

    def value_si(self, frequency_hz: float) -> float:
        """Limit at ``frequency_hz`` [V/m or T] (no range check)."""
        return self.coefficient_si / frequency_hz**self.power


@dataclass(frozen=True)
class Checkpoint:
    """A published value at one frequency, re-derived from the formula on load."""

    frequency_hz: float
    value: float
    value_si: float
    status: str
    source: str


@dataclass(frozen=True)
class QuantityDefinition:
    """Pieces and checkpoints of one quantity (``"E"`` or ``"B"``) of a catalogue row."""

    quantity: str
    unit: str
    pieces: tuple[FrequencyPiece, ...]
    checkpoints: tuple[Checkpoint, ...]

    @property
    def f_min_hz(self) -> float:
        return self.pieces[0].f_min_hz

    @property
    def f_max_hz(self) -> float:
        return self.pieces[-1].f_max_hz

    def piece_at(self, frequency_hz: float) -> FrequencyPiece | None:
        """The piece that applies at ``frequency_hz``, or None outside the range."""
        last = len(self.pieces) - 1
        for i, p in enumerate(self.pieces):
            if p.f_min_hz <= frequency_hz < p.f_max_hz or (i == last and frequency_hz == p.f_max_hz):
                return p
        return None

    def range_text(self) -> str:
        if self.f_min_hz == self.f_max_hz:
            return f"{_fmt(self.f_min_hz)} Hz only"
        return f"{_fmt(self.f_min_hz)} Hz to {_fmt(self.f_max_hz)} Hz"


@dataclass(frozen=True)
class LevelDefinition:
    """One catalogue row: a published level with its provenance.

    Attributes
    ----------
    id, title, body, document : str
    year : int or None
    clause : str
        Table or clause of the document.
    population : str
        ``"general public"``, ``"occupational"`` or ``"general public and occupational"``.
    kind : str
        ``"reference level"``, ``"action level"``, ``"national limit"``, ...
    scope : str
        Where and how the value applies (e.g. "places of stay >= 4 h/day").
    notes : tuple of str
    quantities : tuple of QuantityDefinition
    status, source : str
        Provenance of the row itself (title, year, table/clause): its level
        (:data:`STATUSES`) and where the document was read.
    applies_at : str
        Where the value is compared with the field (:data:`APPLIES_AT`):
        ``"any_point"`` (default: the maximum over every evaluated point) or
        ``"right_of_way_edge"`` (the values at the edges of the right-of-way only).
    """

    id: str
    title: str
    body: str
    document: str
    year: int | None
    clause: str
    population: str
    kind: str
    scope: str
    notes: tuple[str, ...]
    quantities: tuple[QuantityDefinition, ...]
    status: str = "memory"
    source: str = ""
    applies_at: str = "any_point"

    @property
    def citation(self) -> str:
        """Body, document, year, table/clause in one line."""
        parts = [self.body, self.document]
        if self.year is not None:
            parts.append(str(self.year))
        parts.append(self.clause)
        return ", ".join(parts)

    def quantity(self, quantity: str) -> QuantityDefinition | None:
        for q in self.quantities:
            if q.quantity == quantity:
                return q
        return None


@dataclass(frozen=True)
class Catalogue:
    """The loaded file: version, rows, and the header notes."""

    version: str
    about: tuple[str, ...]
    levels: tuple[LevelDefinition, ...]

    def by_id(self) -> dict[str, LevelDefinition]:
        return {lv.id: lv for lv in self.levels}


@dataclass(frozen=True)
class Threshold:
    """A limit evaluated at one frequency, ready for comparison.

    Attributes
    ----------
    level_id : str
        Catalogue id (e.g. ``"icnirp-2010-public"``) or a custom id.
    quantity : {"E", "B"}
    limit_si : float
        rms limit at ``frequency_hz``: [V/m] for E, [T] for B.
    frequency_hz : float
    title, citation, population : str
    status : str
        Provenance level of the value: one of :data:`STATUSES` (the level of the piece
        it comes from) or ``"custom"``.
    note : str
        Scope and provenance detail (source of the piece, conversions).
    applies_at : str
        ``"any_point"`` or ``"right_of_way_edge"`` (see :class:`LevelDefinition`).
    """

    level_id: str
    quantity: Quantity
    limit_si: float
    frequency_hz: float
    title: str
    citation: str
    population: str
    status: str
    note: str = ""
    applies_at: str = "any_point"


# --------------------------------------------------------------------------- loading


def _fmt(x: float) -> str:
    return f"{x:g}"


def _require(obj: Any, key: str, path: str, types: type | tuple[type, ...]) -> Any:
    if not isinstance(obj, dict) or key not in obj:
        raise CatalogueFileError(f"{path}.{key}", "missing")
    value = obj[key]
    # bool is an int subclass; never accept it for numbers
    if isinstance(value, bool) or not isinstance(value, types):
        raise CatalogueFileError(f"{path}.{key}", f"expected {types}, got {value!r}")
    return value


def _no_extra(obj: dict, allowed: set[str], path: str) -> None:
    extra = set(obj) - allowed
    if extra:
        raise CatalogueFileError(path, f"unknown keys {sorted(extra)}")


def _positive(obj: dict, key: str, path: str) -> float:
    value = float(_require(obj, key, path, (int, float)))
    if not (math.isfinite(value) and value > 0):
        raise CatalogueFileError(f"{path}.{key}", f"must be finite and > 0, got {value!r}")
    return value


def _text(obj: dict, key: str, path: str) -> str:
    value = _require(obj, key, path, str).strip()
    if not value:
        raise CatalogueFileError(f"{path}.{key}", "must not be empty")
    return value


def _status(obj: dict, path: str) -> str:
    value = _text(obj, "status", path)
    if value not in STATUSES:
        raise CatalogueFileError(f"{path}.status", f"must be one of {STATUSES}, got {value!r}")
    return value


def _parse_quantity(name: str, raw: Any, path: str) -> QuantityDefinition:
    if not isinstance(raw, dict):
        raise CatalogueFileError(path, "must be an object")
    _no_extra(raw, {"unit", "pieces", "checkpoints"}, path)
    unit = _text(raw, "unit", path)
    if unit not in UNIT_TO_SI or UNIT_TO_SI[unit][0] != name:
        valid = sorted(u for u, (q, _) in UNIT_TO_SI.items() if q == name)
        raise CatalogueFileError(f"{path}.unit", f"unit for {name} must be one of {valid}, got {unit!r}")
    raw_pieces = _require(raw, "pieces", path, list)
    if not raw_pieces:
        raise CatalogueFileError(f"{path}.pieces", "must not be empty")
    pieces: list[FrequencyPiece] = []
    for j, rp in enumerate(raw_pieces):
        pp = f"{path}.pieces[{j}]"
        if not isinstance(rp, dict):
            raise CatalogueFileError(pp, "must be an object")
        _no_extra(rp, {"f_min_hz", "f_max_hz", "formula", "coefficient", "status", "source"}, pp)
        f_min = _positive(rp, "f_min_hz", pp)
        f_max = _positive(rp, "f_max_hz", pp)
        if f_max < f_min:
            raise CatalogueFileError(pp, f"f_max_hz {f_max:g} < f_min_hz {f_min:g}")
        if f_max == f_min and len(raw_pieces) > 1:
            raise CatalogueFileError(pp, "a single-frequency piece must be the only piece")
        if pieces and f_min != pieces[-1].f_max_hz:
            raise CatalogueFileError(
                f"{pp}.f_min_hz", f"pieces must be contiguous: {f_min:g} != previous f_max_hz {pieces[-1].f_max_hz:g}"
            )
        formula = _text(rp, "formula", pp)
        if formula not in FORMULAS:
            raise CatalogueFileError(f"{pp}.formula", f"must be one of {sorted(FORMULAS)}, got {formula!r}")
        coefficient = _positive(rp, "coefficient", pp)
        pieces.append(
            FrequencyPiece(
                f_min, f_max, formula, coefficient, to_si(coefficient, unit), _status(rp, pp), _text(rp, "source", pp)
            )
        )
    qd = QuantityDefinition(name, unit, tuple(pieces), ())
    checkpoints: list[Checkpoint] = []
    for j, rc in enumerate(raw.get("checkpoints", [])):
        cp = f"{path}.checkpoints[{j}]"
        if not isinstance(rc, dict):
            raise CatalogueFileError(cp, "must be an object")
        _no_extra(rc, {"frequency_hz", "value", "status", "source"}, cp)
        f = _positive(rc, "frequency_hz", cp)
        value = _positive(rc, "value", cp)
        piece = qd.piece_at(f)
        if piece is None:
            raise CatalogueFileError(f"{cp}.frequency_hz", f"{f:g} Hz is outside {qd.range_text()}")
        formula_value = piece.value_si(f) / to_si(1.0, unit)
        if not _rounds_to(formula_value, rc["value"]):
            raise CatalogueFileError(
                cp, f"published {value:g} {unit} at {f:g} Hz but the formula gives {formula_value:.6g} {unit}"
            )
        checkpoints.append(Checkpoint(f, value, to_si(value, unit), _status(rc, cp), _text(rc, "source", cp)))
    return QuantityDefinition(name, unit, tuple(pieces), tuple(checkpoints))


def _rounds_to(exact: float, printed: float | int) -> bool:
    """True when ``exact`` rounded at the last printed digit of ``printed`` gives ``printed``.

    The printed figure is read from its shortest decimal text (``83.3`` -> one decimal,
    ``4167`` -> units), so a published rounded value is accepted only if it is the
    rounding of the formula's value, not within some wider tolerance.

    >>> _rounds_to(5000 / 60, 83.3), _rounds_to(5000 / 60, 83.4), _rounds_to(2.5e5 / 60, 4167)
    (True, False, True)
    """
    d = Decimal(repr(printed))
    return Decimal(repr(exact)).quantize(Decimal(1).scaleb(d.as_tuple().exponent), rounding=ROUND_HALF_EVEN) == d


def _parse_level(raw: Any, path: str) -> LevelDefinition:
    if not isinstance(raw, dict):
        raise CatalogueFileError(path, "must be an object")
    keys = {"id", "title", "body", "document", "year", "clause", "population", "kind", "scope", "notes", "quantities",
            "applies_at", "status", "source"}
    _no_extra(raw, keys, path)
    applies_at = raw.get("applies_at", "any_point")
    if applies_at not in APPLIES_AT:
        raise CatalogueFileError(f"{path}.applies_at", f"must be one of {APPLIES_AT}, got {applies_at!r}")
    level_id = _text(raw, "id", path)
    if not _ID_RE.match(level_id):
        raise CatalogueFileError(f"{path}.id", f"must match {_ID_RE.pattern}, got {level_id!r}")
    if "year" not in raw:
        raise CatalogueFileError(f"{path}.year", "missing (use null when not verified)")
    year = raw["year"]
    if year is not None and (isinstance(year, bool) or not isinstance(year, int) or not 1900 <= year <= 2100):
        raise CatalogueFileError(f"{path}.year", f"must be a year or null, got {year!r}")
    population = _text(raw, "population", path)
    if population not in POPULATIONS:
        raise CatalogueFileError(f"{path}.population", f"must be one of {POPULATIONS}, got {population!r}")
    notes = _require(raw, "notes", path, list)
    if not all(isinstance(n, str) and n.strip() for n in notes):
        raise CatalogueFileError(f"{path}.notes", "must be a list of non-empty strings")
    raw_q = _require(raw, "quantities", path, dict)
    if not raw_q or set(raw_q) - {"E", "B"}:
        raise CatalogueFileError(f"{path}.quantities", f"must hold 'E' and/or 'B', got {sorted(raw_q)}")
    quantities = tuple(_parse_quantity(q, raw_q[q], f"{path}.quantities.{q}") for q in ("E", "B") if q in raw_q)
    return LevelDefinition(
        id=level_id,
        title=_text(raw, "title", path),
        body=_text(raw, "body", path),
        document=_text(raw, "document", path),
        year=year,
        clause=_text(raw, "clause", path),
        population=population,
        kind=_text(raw, "kind", path),
        scope=_text(raw, "scope", path),
        notes=tuple(notes),
        quantities=quantities,
        status=_status(raw, path),
        source=_text(raw, "source", path),
        applies_at=applies_at,
    )


def parse_catalogue(data: Any) -> Catalogue:
    """Validate a decoded catalogue document and build the rows.

    Parameters
    ----------
    data : dict
        The decoded JSON document.

    Returns
    -------
    Catalogue

    Raises
    ------
    CatalogueFileError
        Naming the location in the document of the first problem found.
    """
    if not isinstance(data, dict):
        raise CatalogueFileError("$", "document must be an object")
    _no_extra(data, {"catalogue_version", "about", "levels"}, "$")
    version = _text(data, "catalogue_version", "$")
    if not _VERSION_RE.match(version):
        raise CatalogueFileError("$.catalogue_version", f"must look like 2026.12.1, got {version!r}")
    about = _require(data, "about", "$", list)
    raw_levels = _require(data, "levels", "$", list)
    if not raw_levels:
        raise CatalogueFileError("$.levels", "must not be empty")
    levels = tuple(_parse_level(r, f"levels[{i}]") for i, r in enumerate(raw_levels))
    seen: set[str] = set()
    for i, lv in enumerate(levels):
        if lv.id in seen:
            raise CatalogueFileError(f"levels[{i}].id", f"duplicate id {lv.id!r}")
        seen.add(lv.id)
    return Catalogue(version, tuple(str(a) for a in about), levels)


def load_catalogue(path: str | Path | None = None) -> Catalogue:
    """Read and validate a catalogue file (uncached; the default file is cached by the API).

    Parameters
    ----------
    path : str or Path, optional
        JSON file; default ``models/data/reference_levels.json``.

    Returns
    -------
    Catalogue

    Raises
    ------
    CatalogueFileError
        If the file is not valid JSON or fails a check.
    """
    if path is None:
        text = resources.files("models").joinpath("data", _DEFAULT_FILE).read_text(encoding="utf-8")
    else:
        text = Path(path).read_text(encoding="utf-8")
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise CatalogueFileError("$", f"not valid JSON: {exc}") from exc
    return parse_catalogue(data)


@functools.cache
def _catalogue() -> Catalogue:
    return load_catalogue()


CATALOGUE_VERSION: str = _catalogue().version
"""Version of the loaded catalogue file (stored with every assessment)."""


# --------------------------------------------------------------------------- public API


def list_levels() -> list[LevelDefinition]:
    """All catalogue rows, in file order.

    Returns
    -------
    list of LevelDefinition
        id, title, citation parts, population, per-quantity frequency pieces
        (formula, SI coefficient, provenance status, source), scope and notes.

    Examples
    --------
    >>> "icnirp-2010-public" in [lv.id for lv in list_levels()]
    True
    """
    return list(_catalogue().levels)


def catalogue_ids() -> list[str]:
    """Catalogue ids, in file order.

    Returns
    -------
    list of str

    Examples
    --------
    >>> catalogue_ids()[:2]
    ['icnirp-1998-public', 'icnirp-1998-occupational']
    """
    return [lv.id for lv in _catalogue().levels]


def get_level(level_id: str, *, field: str = "reference_level") -> LevelDefinition:
    """One catalogue row by id.

    Parameters
    ----------
    level_id : str
    field : str
        Request field named in the error.

    Returns
    -------
    LevelDefinition

    Raises
    ------
    CatalogueError
        Unknown id; the message lists the valid ids (and a close match, if any).

    Examples
    --------
    >>> get_level("eu-2013-35-high-al").population
    'occupational'
    """
    level = _catalogue().by_id().get(level_id) if isinstance(level_id, str) else None
    if level is None:
        raise CatalogueError(field, _unknown_message(level_id))
    return level


def _unknown_message(level_id: object) -> str:
    ids = catalogue_ids()
    msg = f"Unknown reference level {level_id!r}."
    if isinstance(level_id, str):
        close = difflib.get_close_matches(level_id, ids, n=1)
        if close:
            msg += f" Did you mean {close[0]!r}?"
    return msg + " Valid ids: " + ", ".join(ids) + "."


def _check_frequency(frequency_hz: object, field: str) -> float:
    if isinstance(frequency_hz, bool) or not isinstance(frequency_hz, (int, float)):
        raise must_be(field, "a number [Hz]", frequency_hz, CatalogueError)
    f = float(frequency_hz)
    if not (math.isfinite(f) and f > 0):
        raise must_be(field, "finite and > 0 [Hz]", frequency_hz, CatalogueError)
    return f


def _threshold(level: LevelDefinition, qd: QuantityDefinition, f: float) -> Threshold | None:
    piece = qd.piece_at(f)
    if piece is None:
        return None
    # The value's level is its piece's level: a checkpoint never raises it, it is only named.
    note = f"{level.scope} Value ({LEVEL_WORDS[piece.status]}): {piece.source}."
    for cp in qd.checkpoints:
        if cp.frequency_hz == f:
            note += f" Also printed for {f:g} Hz ({LEVEL_WORDS[cp.status]}): {cp.source}."
    return Threshold(
        level_id=level.id,
        quantity=qd.quantity,  # type: ignore[arg-type]
        limit_si=piece.value_si(f),
        frequency_hz=f,
        title=level.title,
        citation=level.citation,
        population=level.population,
        status=piece.status,
        note=note,
        applies_at=level.applies_at,
    )


def thresholds_for(
    level_ids: Sequence[str], frequency_hz: float, *, field: str = "reference_levels"
) -> list[Threshold]:
    """Evaluate catalogue rows at one frequency.

    Parameters
    ----------
    level_ids : sequence of str
        Catalogue ids, e.g. ``["icnirp-2010-public", "eu-2013-35-low-al"]``.
    frequency_hz : float
        System frequency [Hz], > 0.
    field : str
        Name of the request field holding the ids; errors name ``f"{field}[{i}]"``.

    Returns
    -------
    list of Threshold
        For each id in order, one threshold per quantity the row defines (E before B).

    Raises
    ------
    CatalogueError
        Unknown id (message lists the valid ids), an id given twice, or a frequency
        outside the row's validity range for any of its quantities.

    Examples
    --------
    >>> [round(t.limit_si * 1e6, 1) for t in thresholds_for(["icnirp-1998-public"], 60.0) if t.quantity == "B"]
    [83.3]
    """
    if isinstance(level_ids, str) or not isinstance(level_ids, Sequence):
        raise must_be(field, "a list of reference-level ids", level_ids, CatalogueError)
    f = _check_frequency(frequency_hz, "frequency_hz")
    out: list[Threshold] = []
    seen: set[str] = set()
    for i, level_id in enumerate(level_ids):
        item = f"{field}[{i}]"
        level = get_level(level_id, field=item)
        if level.id in seen:
            raise CatalogueError(item, f"Reference level {level.id!r} is listed twice.")
        seen.add(level.id)
        for qd in level.quantities:
            t = _threshold(level, qd, f)
            if t is None:
                raise CatalogueError(
                    item,
                    f"Reference level {level.id!r} defines {qd.quantity} for {qd.range_text()}; "
                    f"instead received frequency_hz={f:g}.",
                )
            out.append(t)
    return out


def levels_at(frequency_hz: float) -> list[Threshold]:
    """Every catalogue threshold valid at one frequency (rows or quantities out of range are skipped).

    Parameters
    ----------
    frequency_hz : float
        [Hz], > 0.

    Returns
    -------
    list of Threshold
        In catalogue order, E before B within a row.

    Examples
    --------
    >>> ids = {t.level_id for t in levels_at(60.0)}
    >>> "it-dpcm-2003-quality-objective" in ids   # a 50 Hz-only national value
    False
    """
    f = _check_frequency(frequency_hz, "frequency_hz")
    out = []
    for level in _catalogue().levels:
        for qd in level.quantities:
            t = _threshold(level, qd, f)
            if t is not None:
                out.append(t)
    return out


def custom_threshold(
    level_id: str,
    quantity: str,
    value: float,
    unit: str,
    frequency_hz: float,
    *,
    title: str = "",
    field: str = "custom_limits[0]",
) -> Threshold:
    """A user-supplied limit, in the same form as a catalogue threshold.

    Parameters
    ----------
    level_id : str
        Caller's id (letters, digits, ``.``, ``-``, ``_``); must not be a catalogue id.
    quantity : {"E", "B"}
    value : float
        rms limit in ``unit``, finite and > 0.
    unit : str
        ``"uT"``/``"µT"``, ``"mT"``, ``"T"`` for B; ``"V/m"``, ``"kV/m"`` for E.
    frequency_hz : float
        [Hz], > 0.
    title : str, optional
    field : str
        Request path of this limit; errors name ``f"{field}.id"``, ``.quantity``,
        ``.value`` or ``.unit``.

    Returns
    -------
    Threshold
        ``status="custom"``, ``limit_si`` in V/m or T.

    Raises
    ------
    CatalogueError

    Examples
    --------
    >>> custom_threshold("site-rule", "B", 0.4, "µT", 50.0).limit_si
    4e-07
    """
    if not isinstance(level_id, str) or not re.match(r"^[A-Za-z0-9][A-Za-z0-9._\-]{0,63}$", level_id):
        raise must_be(f"{field}.id", "1-64 letters, digits, '.', '-' or '_'", level_id, CatalogueError)
    if level_id in _catalogue().by_id():
        raise CatalogueError(f"{field}.id", f"Custom limit id {level_id!r} is a catalogue id; choose another id.")
    if quantity not in ("E", "B"):
        raise must_be(f"{field}.quantity", "'E' or 'B'", quantity, CatalogueError)
    if unit not in UNIT_TO_SI:
        raise must_be(f"{field}.unit", "one of " + ", ".join(UNIT_TO_SI), unit, CatalogueError)
    unit_quantity = UNIT_TO_SI[unit][0]
    if unit_quantity != quantity:
        raise CatalogueError(
            f"{field}.unit", f"Unit {unit!r} is a unit of {unit_quantity}, but quantity is {quantity!r}."
        )
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (math.isfinite(value) and value > 0):
        raise must_be(f"{field}.value", "a finite number > 0", value, CatalogueError)
    f = _check_frequency(frequency_hz, "frequency_hz")
    return Threshold(
        level_id=level_id,
        quantity=quantity,  # type: ignore[arg-type]
        limit_si=to_si(value, unit),
        frequency_hz=f,
        title=title or f"Custom limit {level_id}",
        citation="user-supplied limit",
        population="as stated by the user",
        status="custom",
        note=f"{value:g} {unit} supplied by the user",
    )
