"""A yes/no check of a study document against the study schema, without importing ``jsonschema``.

Loading a study (every viewer's kernel of a published dashboard does) needs only to know that the document
follows the schema; importing ``jsonschema`` for that costs a kernel about 20 MB. :func:`conforms` evaluates the
keywords the shipped schema uses (JSON Schema 2020-12 semantics: ``type``, ``required``, ``properties``,
``additionalProperties``, ``items``, ``minItems``, ``minLength``, ``minimum``, ``maximum``, ``exclusiveMinimum``,
``enum``, ``const``, ``pattern``, ``not``, ``anyOf``, ``oneOf``). Only a document it does not pass is handed to
``jsonschema``, which words the error; a keyword it does not know sends every document there.
``tests/test_study_schema_check.py`` checks that both agree on the shipped files and on many damaged ones.
"""

from __future__ import annotations

import re

#: Keywords that only annotate.
_NOTES = frozenset(("$schema", "$id", "title", "description", "default", "$comment", "examples"))
_KNOWN = frozenset(("type", "required", "properties", "additionalProperties", "items", "minItems", "minLength",
                    "minimum", "maximum", "exclusiveMinimum", "enum", "const", "pattern", "not", "anyOf", "oneOf"))


class Unknown(Exception):
    """The schema uses a keyword this check does not evaluate."""


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _is_type(value, name: str) -> bool:
    if name == "object":
        return isinstance(value, dict)
    if name == "array":
        return isinstance(value, list)
    if name == "string":
        return isinstance(value, str)
    if name == "number":
        return _is_number(value)
    if name == "integer":
        return _is_number(value) and (isinstance(value, int) or float(value).is_integer())
    if name == "boolean":
        return isinstance(value, bool)
    if name == "null":
        return value is None
    raise Unknown(f"type {name!r}")


def _equal(a, b) -> bool:
    """JSON equality: true is not 1, and 1 equals 1.0."""
    if isinstance(a, bool) or isinstance(b, bool):
        return isinstance(a, bool) and isinstance(b, bool) and a == b
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_equal(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_equal(x, y) for x, y in zip(a, b))
    if _is_number(a) and _is_number(b):
        return a == b
    return type(a) is type(b) and a == b


def _ok(value, schema) -> bool:
    if schema is True:
        return True
    if schema is False:
        return False
    unknown = schema.keys() - _KNOWN - _NOTES
    if unknown:
        raise Unknown(sorted(unknown))
    if "type" in schema:
        names = schema["type"] if isinstance(schema["type"], list) else [schema["type"]]
        if not any(_is_type(value, name) for name in names):
            return False
    if "const" in schema and not _equal(value, schema["const"]):
        return False
    if "enum" in schema and not any(_equal(value, option) for option in schema["enum"]):
        return False
    if isinstance(value, dict):
        if any(key not in value for key in schema.get("required", ())):
            return False
        properties = schema.get("properties", {})
        extra = schema.get("additionalProperties", True)
        for key, item in value.items():
            if key in properties:
                if not _ok(item, properties[key]):
                    return False
            elif not _ok(item, extra):
                return False
    if isinstance(value, list):
        if len(value) < schema.get("minItems", 0):
            return False
        if "items" in schema and not all(_ok(item, schema["items"]) for item in value):
            return False
    if isinstance(value, str):
        if len(value) < schema.get("minLength", 0):
            return False
        if "pattern" in schema and re.search(schema["pattern"], value) is None:
            return False
    if _is_number(value):
        if "minimum" in schema and not value >= schema["minimum"]:
            return False
        if "maximum" in schema and not value <= schema["maximum"]:
            return False
        if "exclusiveMinimum" in schema and not value > schema["exclusiveMinimum"]:
            return False
    if "not" in schema and _ok(value, schema["not"]):
        return False
    if "anyOf" in schema and not any(_ok(value, s) for s in schema["anyOf"]):
        return False
    if "oneOf" in schema and sum(_ok(value, s) for s in schema["oneOf"]) != 1:
        return False
    return True


def conforms(document, schema) -> bool | None:
    """True when *document* follows *schema*, False when it does not, None when the schema is beyond this check."""
    try:
        return _ok(document, schema)
    except Unknown:
        return None
