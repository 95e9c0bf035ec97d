"""The yes/no schema check that spares a viewer's kernel the jsonschema import agrees with jsonschema itself
(the reference library) on the shipped study files and on thousands of seeded, damaged copies of them."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from levelwise.study import Study
from levelwise.study._format import _schema
from levelwise.study._schema_check import conforms

ROOT = Path(__file__).resolve().parent.parent
FILES = sorted((ROOT / "dashboards" / "data").glob("*.json")) + [ROOT / "tests" / "data" / "study_example.json"]


def _documents():
    return [json.loads(Study.load(path).to_json()) for path in FILES]  # each in the current format


def _paths(value, prefix=()):
    yield prefix
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _paths(item, (*prefix, key))
    elif isinstance(value, list):
        for i, item in enumerate(value[:6]):  # the first runs stand for the rest
            yield from _paths(item, (*prefix, i))


REPLACEMENTS = [None, True, False, 0, -1, 1.5, 2**60, "", "x", "=1+1", [], {}, [1], {"a": 1}, 4, "corner", float(3)]


def _mutate(document, rng):
    doc = copy.deepcopy(document)
    paths = [p for p in _paths(doc) if p]
    path = paths[int(rng.integers(len(paths)))]
    parent = doc
    for key in path[:-1]:
        parent = parent[key]
    last = path[-1]
    kind = int(rng.integers(4))
    if kind == 0 and isinstance(parent, dict):
        del parent[last]
    elif kind == 1 and isinstance(parent, dict):
        parent[f"extra{int(rng.integers(3))}"] = REPLACEMENTS[int(rng.integers(len(REPLACEMENTS)))]
    else:
        parent[last] = REPLACEMENTS[int(rng.integers(len(REPLACEMENTS)))]
    return doc


def test_shipped_study_files_conform():
    schema = _schema()
    validator = jsonschema.validators.validator_for(schema)(schema)
    for document in _documents():
        assert not list(validator.iter_errors(document))
        assert conforms(document, schema) is True


@pytest.mark.parametrize("seed", range(3))
def test_agrees_with_jsonschema_on_damaged_documents(seed):
    schema = _schema()
    validator = jsonschema.validators.validator_for(schema)(schema)
    rng = np.random.default_rng(seed)
    refused = 0
    for document in _documents():
        for _ in range(100):
            doc = _mutate(document, rng)
            valid = not list(validator.iter_errors(doc))
            assert conforms(doc, schema) is valid, json.dumps(doc)[:300]
            refused += not valid
    assert refused > 50  # the damage reached the schema's rules, not only free-form fields


def test_a_keyword_it_does_not_know_sends_the_document_to_jsonschema():
    assert conforms({"a": 1}, {"type": "object", "propertyNames": {"maxLength": 3}}) is None
    assert conforms(1, {"type": "integer"}) is True and conforms(True, {"type": "integer"}) is False
    assert conforms(1.0, {"type": "integer"}) is True and conforms(1, {"const": True}) is False
