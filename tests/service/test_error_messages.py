"""Every marshmallow error message of every request schema renders (no placeholder KeyError).

marshmallow formats field error messages and validator messages with ``str.format``
(marshmallow ``Field.make_error``, ``validate.Length/Range/OneOf/Regexp/Equal``): a
literal brace in a message, e.g. ``"{id, value, unit}"``, becomes a placeholder and the
request fails with a 500 instead of a 422.  This test walks every schema class of the
service, every field (through ``Nested``, ``List``, ``Tuple``, ``Dict``) and renders each
message with exactly the keyword arguments marshmallow passes for it; it also posts the
inputs a fuzz run found (``"zones": {"thresholds": [5]}``, ``[[1]]``, ``[true]``) and
expects a 422 problem naming the field.
"""

from __future__ import annotations

import copy
import importlib
import inspect
import json
import pkgutil
import string
from collections.abc import Iterator
from pathlib import Path

import pytest
from marshmallow import Schema, fields, validate

import service

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"

# The keyword arguments marshmallow passes to ``make_error(key, ...)`` (marshmallow 3/4
# source, fields.py): "required"/"null"/most "invalid" get none; numbers and temporals pass
# ``input``; DateTime passes ``obj_type`` and ``awareness``; Nested/Pluck "type" passes
# ``input`` and ``type``; Enum "unknown" ``choices``.
FIELD_KWARGS = {"input": "x", "type": "str", "choices": "a, b", "obj_type": "datetime", "awareness": "aware"}
NO_KWARGS_KEYS = {"required", "null"}


def service_modules() -> list:
    mods = []
    for info in pkgutil.iter_modules(service.__path__):
        if info.name in {"migrate", "demo"}:
            continue
        mods.append(importlib.import_module(f"service.{info.name}"))
    return mods


def schema_classes() -> list[type[Schema]]:
    found = {}
    for mod in service_modules():
        for _, obj in inspect.getmembers(mod, inspect.isclass):
            if issubclass(obj, Schema) and obj.__module__.startswith("service."):
                found[f"{obj.__module__}.{obj.__qualname__}"] = obj
    return [found[k] for k in sorted(found)]


def walk_fields(field: fields.Field, path: str, seen: set) -> Iterator[tuple[str, fields.Field]]:
    yield path, field
    children: list[tuple[str, fields.Field]] = []
    if isinstance(field, fields.Nested):
        schema = field.schema
        if id(type(schema)) not in seen:
            seen.add(id(type(schema)))
            children += [(f"{path}.{n}", f) for n, f in schema.fields.items()]
    if isinstance(field, fields.List):
        children.append((f"{path}[]", field.inner))
    if isinstance(field, fields.Tuple):
        children += [(f"{path}[{i}]", f) for i, f in enumerate(field.tuple_fields)]
    if isinstance(field, fields.Dict):
        for part, sub in (("keys", field.key_field), ("values", field.value_field)):
            if sub is not None:
                children.append((f"{path}<{part}>", sub))
    for child_path, child in children:
        yield from walk_fields(child, child_path, seen)


def all_messages() -> list[tuple[str, object]]:
    """(label, zero-argument renderer) for every message reachable from the service's schemas."""
    out = []
    for cls in schema_classes():
        schema = cls()
        for key, msg in schema.error_messages.items():
            out.append((f"{cls.__name__}.error_messages[{key}]", lambda m=msg: str(m)))
        for name, top in schema.fields.items():
            for path, field in walk_fields(top, f"{cls.__name__}.{name}", set()):
                for key, msg in field.error_messages.items():
                    if not isinstance(msg, str):
                        continue
                    kwargs = {} if key in NO_KWARGS_KEYS else FIELD_KWARGS
                    out.append((f"{path} error {key!r}", lambda m=msg, kw=kwargs: m.format(**kw)))
                for validator in field.validators:
                    out.extend(validator_messages(path, validator))
    return out


def validator_messages(path: str, validator) -> list[tuple[str, object]]:
    if isinstance(validator, validate.And):
        return [m for v in validator.validators for m in validator_messages(path, v)]
    if not isinstance(validator, validate.Validator):
        return []  # a plain function raises ValidationError with its own text (never formatted)
    render = validator._format_error  # marshmallow's own formatting, with its own kwargs
    params = [p for p in inspect.signature(render).parameters.values() if p.default is p.empty]
    label = f"{path} validator {type(validator).__name__}"
    if len(params) == 2:  # (value, message): Length, Range
        return [(label, lambda: render("x", validator.error or "x"))]
    return [(label, lambda: render("x"))]


def test_the_walk_reaches_the_route_zone_threshold_field():
    labels = [label for label, _ in all_messages()]
    assert len(labels) > 200
    assert any("thresholds[]" in label and "'invalid'" in label for label in labels)


def test_every_error_message_renders():
    failures = []
    for label, render in all_messages():
        try:
            text = render()
        except (KeyError, IndexError, ValueError) as exc:
            failures.append(f"{label}: {exc!r}")
            continue
        if not (isinstance(text, str) and text):
            failures.append(f"{label}: empty")
    assert not failures, "\n".join(failures)


def test_a_message_with_a_literal_brace_would_be_caught():
    """The check itself: the defective message fails to render as marshmallow renders it."""
    class Bad(fields.Field):
        default_error_messages = {"invalid": "Give an object {id, value, unit}."}

    with pytest.raises(KeyError):
        Bad().make_error("invalid")
    placeholders = [name for _, name, _, _ in string.Formatter().parse("{{id}} {max}") if name]
    assert placeholders == ["max"]


@pytest.mark.parametrize("thresholds", [[5], [[1]], [True], [None], [{"id": "x"}], [{}]])
def test_bad_zone_thresholds_are_a_422_naming_the_field(client, thresholds):
    body = json.loads((EXAMPLES / "demo_route.json").read_text(encoding="utf-8"))
    body = copy.deepcopy(body)
    body["zones"] = {"thresholds": thresholds}
    response = client.post("/v1/evaluate", json=body)
    assert response.status_code == 422, response.get_data(as_text=True)
    problem = response.get_json()
    assert any(e["pointer"].startswith("/zones/thresholds/0") for e in problem["errors"]), problem
