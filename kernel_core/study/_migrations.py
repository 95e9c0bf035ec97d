"""Migrations of older study files, applied in turn on load: format 0 -> 1 -> 2 -> 3 -> 4.

Each migration is frozen: it carries its own copy of every name it translates, so a later
renaming in levelwise never changes what an old file turns into.
"""

from __future__ import annotations

import copy

from .._errors import StudyFileError
from ._format import _MAX_INT, _json_path, _validator, content_hash
from ._values import now

_V0_SCHEMA = {
    "type": "object",
    "required": ["format_version", "factors", "response", "runs"],
    "properties": {
        "title": {"type": "string"},
        "notes": {"type": "string"},
        "model": {"type": ["string", "null"]},
        "factors": {"type": "array"},
        "response": {
            "type": "object",
            "required": ["name"],
            "properties": {"name": {"type": "string", "minLength": 1}, "units": {"type": "string"}},
        },
        "runs": {
            "type": "array",
            "items": {
                "type": "object",
                "required": ["run", "settings"],
                "properties": {
                    "run": {"type": "integer", "minimum": 1, "maximum": _MAX_INT},
                    "settings": {"type": "object"},
                    "result": {"type": ["number", "null"]},
                    "block": {"type": "integer", "minimum": -_MAX_INT, "maximum": _MAX_INT},
                    "std_order": {"type": "integer", "minimum": -_MAX_INT, "maximum": _MAX_INT},
                    "point_type": {"type": "string"},
                },
            },
        },
        "excluded": {"type": "array", "items": {"type": "integer", "minimum": 1, "maximum": _MAX_INT}},
    },
}


def migrate_v0(document: dict) -> dict:
    """Turn a format-0 study (the draft layout: one response, ``settings`` and ``result`` per run,
    excluded run ids without reasons, no audit and no hash) into a format-1 document.

    Raises
    ------
    StudyFileError
        When the format-0 document breaks that layout; the message names the field.
    """
    validator = _validator().evolve(schema=_V0_SCHEMA)
    errors = sorted(validator.iter_errors(document), key=lambda e: list(map(str, e.absolute_path)))
    if errors:
        raise StudyFileError(
            f"The format-0 study cannot be migrated: field '{_json_path(errors[0].absolute_path)}': "
            f"{errors[0].message[:200]}"
        )
    when = now()
    name = document["response"]["name"]
    stage = "stage 1"
    runs = []
    for i, run in enumerate(document["runs"]):
        runs.append({
            "run": run["run"],
            "stage": stage,
            "block": run.get("block", 1),
            "std_order": run.get("std_order", i + 1),
            "point_type": run.get("point_type", ""),
            "planned": run["settings"],
            "achieved": {},
            "responses": {name: run["result"]} if run.get("result") is not None else {},
        })
    data = {
        "title": document.get("title", ""),
        "factors": document["factors"],
        "responses": [{"name": name, "units": document["response"].get("units", ""), "goal": "none",
                       "target": None}],
        "stages": [{"name": stage, "description": "runs of a format-0 file", "created": when}],
        "runs": runs,
        "exclusions": [
            {"run": run, "response": None, "reason": "excluded in a format-0 file (no reason was recorded)",
             "when": when}
            for run in document.get("excluded", [])
        ],
        "models": {name: document["model"]} if document.get("model") else {},
        "notes": document.get("notes", ""),
    }
    audit = [{"when": when, "action": "migrate", "what": "migrated from format 0 to format 1", "reason": None}]
    return {"format_version": 1, "data": data, "audit": audit, "sha256": content_hash(data, audit)}


#: Migrations from format N to N + 1, applied in turn.
#: Format 1 -> 2, frozen: the design-table column names ...
V1_RUN_KEYS = {"std_order": "standard_order", "point_type": "role"}
#: ... the values of the role column (a value not listed here, e.g. "" or a user's own word, is kept) ...
V1_ROLES = {"factorial": "corner", "center": "centre", "axial": "axial", "edge": "edge_midpoint",
            "optimal": "optimal"}
#: ... the fields of a desirability goal, wherever a response entry holds them ...
V1_GOAL_FIELDS = {"low": "lower_limit", "high": "upper_limit", "importance": "weight"}
#: ... and the model presets, where a stored model is exactly one of these names.
V1_PRESETS = {"linear": "main_effects", "interactions": "two_factor_interactions", "quadratic": "full_second_order"}


def _stamped(document: dict, data, audit, version: int) -> dict:
    """Set *version*, add the audit log's ``migrate`` entry and recompute the SHA-256 (when the layout allows)."""
    document["format_version"] = version
    if isinstance(data, dict) and isinstance(audit, list):
        audit.append({"when": now(), "action": "migrate",
                      "what": f"migrated from format {version - 1} to format {version}", "reason": None})
        try:
            document["sha256"] = content_hash(data, audit)
        except (UnicodeEncodeError, ValueError, TypeError):
            pass  # the loader reports the bad text or number itself
    return document


def migrate_v1(document: dict) -> dict:
    """Turn a format-1 study into a format-2 document.

    Runs: ``std_order`` becomes ``standard_order`` and ``point_type`` becomes ``role`` with spelled-out
    values (:data:`V1_ROLES`). Responses: goal fields are renamed (:data:`V1_GOAL_FIELDS`). Models: a
    model that is exactly an old preset name becomes the new one (:data:`V1_PRESETS`). The audit log
    gets one ``migrate`` entry and the SHA-256 is recomputed (the loader checked the format-1 hash first).
    A document that breaks the format-1 layout is left for the format-2 schema check to report.
    """
    document = copy.deepcopy(document)
    data = document.get("data")
    if isinstance(data, dict):
        for run in data.get("runs") or []:
            if not isinstance(run, dict):
                continue
            for old, new in V1_RUN_KEYS.items():
                if old in run and new not in run:
                    run[new] = run.pop(old)
            role = run.get("role")
            if isinstance(role, str):
                run["role"] = V1_ROLES.get(role, role)
        for response in data.get("responses") or []:
            if isinstance(response, dict):
                for old, new in V1_GOAL_FIELDS.items():
                    if old in response and new not in response:
                        response[new] = response.pop(old)
        models = data.get("models")
        if isinstance(models, dict):
            for name, model in models.items():
                if isinstance(model, str) and model.strip() in V1_PRESETS:
                    models[name] = V1_PRESETS[model.strip()]
    audit = document.get("audit")
    return _stamped(document, data, audit, 2)


def migrate_v2(document: dict) -> dict:
    """Turn a format-2 study into a format-3 document.

    Format 3 adds optional keys only (absent = the format-2 meaning), so the data is kept as it is: a factor
    without ``hard_to_change`` is easy to change and a run without ``whole_plot`` was reset on its own (split-plot
    studies, issue 13). The audit log gets one ``migrate`` entry and the SHA-256 is recomputed (the loader checked
    the format-2 hash first). A document that breaks the layout is left for the format-3 schema check to report.
    """
    document = copy.deepcopy(document)
    data, audit = document.get("data"), document.get("audit")
    return _stamped(document, data, audit, 3)


def migrate_v3(document: dict) -> dict:
    """Turn a format-3 study into a format-4 document.

    Format 4 adds optional keys only (absent = the format-3 meaning), so the data is kept as it is: a response
    without ``lower_limit``, ``upper_limit``, ``s``, ``t`` or ``weight`` has its goal's limits started from the
    recorded values, as before (issue 16). The audit log gets one ``migrate`` entry and the SHA-256 is
    recomputed (the loader checked the format-3 hash first). A document that breaks the layout is left for the
    format-4 schema check to report.
    Format 4 also adds ``data.mixture`` (the components, total, bounds, constraints and pseudo-component choice
    of a mixture study, issue 12; absent = no components).
    Format 4 also adds the count keys of a response (``family``, ``link``, ``trials``, ``exposure``; issue 15;
    absent = a measurement).
    """
    document = copy.deepcopy(document)
    data, audit = document.get("data"), document.get("audit")
    return _stamped(document, data, audit, 4)


#: Migrations from format N to N + 1, applied in turn.
MIGRATIONS = {0: migrate_v0, 1: migrate_v1, 2: migrate_v2, 3: migrate_v3}

__all__ = ["MIGRATIONS", "V1_GOAL_FIELDS", "V1_PRESETS", "V1_ROLES", "V1_RUN_KEYS", "migrate_v0", "migrate_v1",
           "migrate_v2", "migrate_v3"]
