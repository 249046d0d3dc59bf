"""Typed errors raised by the field engine.

Every message follows one template so that callers (the HTTP service, scripts)
can show it unchanged: ``"Input <name> must be <constraint>; instead received <value!r>."``
"""

from __future__ import annotations


class EngineInputError(ValueError):
    """Input that the engine cannot evaluate.

    Parameters
    ----------
    field : str
        Dotted/bracketed path of the offending input, e.g.
        ``"circuits[0].conductors[2].height_m"``.  The service maps it to a JSON path.
    message : str
        Human-readable explanation.
    """

    def __init__(self, field: str, message: str):
        super().__init__(message)
        self.field = field
        self.message = message


class GeometryError(EngineInputError):
    """Physically impossible geometry (conductor below ground, overlap, point inside a conductor)."""


class LoadingError(EngineInputError):
    """Impossible or inconsistent electrical loading (unknown phase label, bad frequency)."""


class CatalogueError(EngineInputError):
    """Unknown reference-level id or malformed custom limit."""


def must_be(field: str, constraint: str, received: object, cls: type[EngineInputError] = EngineInputError) -> EngineInputError:
    """Build an error with the standard message template.

    >>> str(must_be("height_m", "> 0", -3.0))
    'Input height_m must be > 0; instead received -3.0.'
    """
    return cls(field, f"Input {field} must be {constraint}; instead received {received!r}.")
