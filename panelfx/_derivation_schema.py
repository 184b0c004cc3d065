"""The JSON Schema of saved derivations, generated from the transform registry.

``panelfx/derivation.schema.json`` (package data) is this module's output; a test regenerates
it and compares, so the published schema cannot drift from the transforms.  After adding or
changing a transform, write it again with::

    python -m panelfx._derivation_schema

The schema (JSON Schema draft 2020-12) says what :meth:`panelfx.Derivation.from_json` checks
by key and type: the layout, every transform type with its options (types from the dataclass
annotations, the same ones the loader checks), required options, and no unknown keys.  Rules
between values (``periods`` is not 0, a column made by a later transform, a name made twice)
are checked by panelfx when it loads the file, not by the schema.  One difference in kind: the
schema's "integer" also accepts ``2.0``, which panelfx refuses where an integer is expected.
"""

from __future__ import annotations

import dataclasses
import json
import os
import types
import typing
from collections.abc import Mapping, Sequence
from typing import Any, Literal, Union

from ._panel import UNITS_NS
from ._transform import REGISTRY
from .derivation import FORMAT, LABEL_CHARS, VERSION, _hints

#: The file in the package, beside this module.
SCHEMA_FILE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "derivation.schema.json")
DRAFT = "https://json-schema.org/draft/2020-12/schema"


def derivation_schema() -> dict[str, Any]:
    """The JSON Schema of a saved derivation (the layout of :meth:`panelfx.Derivation.to_dict`)."""
    names = sorted(REGISTRY)
    units: list[Any] = [*sorted(UNITS_NS), None]
    column = {"type": "string", "minLength": 1}
    return {
        "$schema": DRAFT,
        "title": "panelfx saved derivation",
        "description": f"A panel declaration and an ordered list of transforms ({FORMAT}, version {VERSION}). "
                       "Generated from panelfx's transform registry by panelfx._derivation_schema.",
        "type": "object",
        "properties": {
            "format": {"const": FORMAT},
            "version": {"const": VERSION},
            "description": {"type": "string"},
            "panel": {
                "type": "object",
                "properties": {
                    "id": {"anyOf": [column, {"type": "array", "items": column, "minItems": 1}]},
                    "time": column,
                    "unit": {"enum": units},
                    "order": {"anyOf": [column, {"type": "null"}]},
                    "time_unit": {"enum": units},
                },
                "required": ["id", "time"],
                "additionalProperties": False,
            },
            "transforms": {"type": "array", "items": {"$ref": "#/$defs/transform"}},
        },
        "required": ["format", "version", "panel", "transforms"],
        "additionalProperties": False,
        "$defs": {
            # "type" picks the options' schema (if/then gives one clear error, where oneOf gives many)
            "transform": {
                "type": "object",
                "properties": {
                    "type": {"enum": names},
                    "label": {"type": "string", "maxLength": LABEL_CHARS, "pattern": "^[^\\n\\r\\t]*$"},
                    "note": {"type": "string"},
                    "options": {"type": "object"},
                },
                "required": ["type"],
                "additionalProperties": False,
                "allOf": [{"if": {"properties": {"type": {"const": name}}},
                           "then": {"$ref": f"#/$defs/{name}"}} for name in names],
            },
            **{name: _transform_schema(REGISTRY[name]) for name in names},
        },
    }


def _transform_schema(cls: type) -> dict[str, Any]:
    fields = [f for f in dataclasses.fields(cls) if f.init]
    hints = _hints(cls)
    required = [f.name for f in fields
                if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING]
    options: dict[str, Any] = {"type": "object",
                               "properties": {f.name: _hint_schema(hints.get(f.name, Any)) for f in fields},
                               "additionalProperties": False}
    if required:
        options["required"] = required
    schema: dict[str, Any] = {"properties": {"options": options}}
    if required:
        schema["required"] = ["options"]
    return schema


_NoneType = type(None)


def _hint_schema(hint: Any) -> dict[str, Any]:
    """A field annotation as JSON Schema, as panelfx.derivation._match reads it."""
    if hint is Any or hint is object:
        return {}
    if hint is None or hint is _NoneType:
        return {"type": "null"}
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if origin is Union or (hasattr(types, "UnionType") and isinstance(hint, types.UnionType)):
        parts = [_hint_schema(a) for a in args]
        return {} if {} in parts else {"anyOf": parts}
    if origin is Literal:
        return {"enum": list(args)}
    simple = {bool: "boolean", int: "integer", float: "number", str: "string"}
    if hint in simple:
        return {"type": simple[hint]}
    seq = origin or hint
    if seq in (list, tuple, Sequence, typing.Sequence):
        if origin is tuple and args and not (len(args) == 2 and args[1] is Ellipsis):
            return {"type": "array", "prefixItems": [_hint_schema(a) for a in args], "items": False,
                    "minItems": len(args)}
        return {"type": "array", "items": _hint_schema(args[0])} if args else {"type": "array"}
    if seq in (dict, Mapping, typing.Mapping):
        return {"type": "object", "additionalProperties": _hint_schema(args[1])} if len(args) == 2 \
            else {"type": "object"}
    return {}  # an annotation the loader does not check either: the transform's validation decides


def schema_text() -> str:
    """The schema as written to :data:`SCHEMA_FILE` (stable key order, one trailing newline)."""
    return json.dumps(derivation_schema(), indent=2, ensure_ascii=False) + "\n"


def main() -> None:
    with open(SCHEMA_FILE, "w", encoding="utf-8") as fh:
        fh.write(schema_text())
    print(f"wrote {SCHEMA_FILE}")


if __name__ == "__main__":
    main()
