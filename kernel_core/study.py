"""The study: everything recorded about one experiment, and its file.

A :class:`Study` holds the factors, one or more design stages (for example a screen, its
fold-over, then a response-surface stage), the planned and achieved settings of every run,
the responses with their units and goals, the exclusions with their reasons, one model per
response and free-text notes. Every change appends an entry to an audit log.

The file is our own JSON layout (see ``study_schema.json`` beside this module):

* ``format_version`` -- an integer; older versions are migrated on load, newer ones refused;
* ``data`` -- the study itself, keys sorted, one run per line so that a diff shows the runs
  that changed;
* ``audit`` -- the append-only log of changes (what, when, and the reason where one applies);
* ``sha256`` -- the SHA-256 of the canonical form of ``data`` and ``audit`` together. A
  mismatch on load means the file was edited outside levelwise and raises
  :class:`OutsideEditError` unless ``accept_outside_edits=True``.

Saving never loses the previous file: the new text goes to a temporary file in the same
folder, is fsynced, and is renamed over the old file, after the old file has been linked
(or copied) to ``<name>.bak``.
"""

from __future__ import annotations

import copy
import errno
import hashlib
import json
import math
import os
import shutil
import tempfile
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import resources
from pathlib import Path

import numpy as np
import pandas as pd

from ._errors import LevelwiseError, OutsideEditError, StudyFileError, describe
from .design import Factor, as_factors
from .model import parse_model

#: The format this version of levelwise writes.
FORMAT_VERSION = 1

#: Column names used by :meth:`Study.data` and :meth:`Study.table`; no factor or response may take them.
RESERVED_NAMES = ("run", "stage", "block", "std_order", "point_type", "excluded")

GOALS = ("none", "maximize", "minimize", "target")


@dataclass(frozen=True)
class Response:
    """A measured response: its name, units and goal (``target`` only for ``goal="target"``)."""

    name: str
    units: str = ""
    goal: str = "none"
    target: float | None = None


@dataclass(frozen=True)
class Stage:
    """One design stage (e.g. ``"screen"``, ``"fold-over"``, ``"surface"``) and when it was added."""

    name: str
    description: str
    created: str


@dataclass(frozen=True)
class AuditEntry:
    """One line of the audit log: when, the kind of change, what changed, and the reason if one was given."""

    when: str
    action: str
    what: str
    reason: str | None = None


# ----- small validators ------------------------------------------------------------------------
def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _text(value, field: str, *, empty: bool = True) -> str:
    """A string that can be written as UTF-8 (no lone surrogates)."""
    if not isinstance(value, str):
        raise LevelwiseError(f"The '{field}' must be a string. Got {describe(value)} instead.")
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        raise LevelwiseError(
            f"The '{field}' holds characters that cannot be written as UTF-8 (a lone surrogate). "
            f"Got {describe(value)} instead."
        ) from None
    if not empty and not value.strip():
        raise LevelwiseError(f"The '{field}' must be a non-empty string. Got {describe(value)} instead.")
    return value


def _name(value, field: str) -> str:
    name = _text(value, field, empty=False)
    if name in RESERVED_NAMES:
        raise LevelwiseError(
            f"The '{field}' may not be one of the reserved column names {list(RESERVED_NAMES)}. Got {name!r} instead."
        )
    return name


def _finite(value, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise LevelwiseError(f"The '{field}' must be a finite number. Got {describe(value)} instead.")
    try:
        number = float(value)
    except OverflowError:
        raise LevelwiseError(f"The '{field}' must be a finite number. Got a number too large for a float.") from None
    if not math.isfinite(number):
        raise LevelwiseError(f"The '{field}' must be a finite number. Got {number!r} instead.")
    return number


def _setting(factor: Factor, value, field: str):
    """A planned or achieved setting: a finite number, or one of a categorical factor's levels."""
    levels = getattr(factor, "levels", ())
    if not levels:
        return _finite(value, field)
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, str):
        value = value.strip()
    for level in levels:
        if type(level) is type(value) and level == value or (
            not isinstance(level, str) and not isinstance(value, (str, bool)) and level == value
        ):
            return level
    raise LevelwiseError(
        f"The '{field}' must be one of the levels {list(levels)!r} of factor {factor.name!r}. "
        f"Got {describe(value)} instead."
    )


def _plain(value):
    """A float for numbers (JSON-friendly), levels as they are."""
    return value if isinstance(value, str) else float(value)


def _factor_entry(f: Factor) -> dict:
    if _is_categorical(f):
        return {"name": f.name, "levels": list(f.levels), "units": f.units}
    return {"name": f.name, "low": f.low, "high": f.high, "units": f.units}


def _is_categorical(factor) -> bool:
    return bool(getattr(factor, "levels", ()))


def _run_id(value, field: str = "run") -> int:
    integral = isinstance(value, (int, np.integer)) or (
        isinstance(value, (float, np.floating)) and math.isfinite(value) and float(value).is_integer()
    )
    if isinstance(value, bool) or not integral or not 1 <= value <= 2**53 - 1:
        raise LevelwiseError(
            f"The '{field}' must be a run id (an integer from 1 to 2**53 - 1). Got {describe(value)} instead."
        )
    return int(value)


def _reason(reason, field: str = "reason", required: bool = False) -> str | None:
    if reason is None and not required:
        return None
    return _text(reason, field, empty=False)


# ----- JSON text -------------------------------------------------------------------------------
def _compact(value) -> str:
    return json.dumps(value, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(", ", ": "))


def _pretty(value, level: int = 0) -> str:
    """Indented JSON with sorted keys; a list of objects is written one object per line."""
    pad, end = "  " * (level + 1), "  " * level
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f"{pad}{json.dumps(k, ensure_ascii=False)}: {_pretty(value[k], level + 1)}" for k in sorted(value)]
        return "{\n" + ",\n".join(items) + "\n" + end + "}"
    if isinstance(value, list):
        if not value:
            return "[]"
        if all(isinstance(item, dict) for item in value):
            items = [pad + _compact(item) for item in value]
        else:
            items = [pad + _pretty(item, level + 1) for item in value]
        return "[\n" + ",\n".join(items) + "\n" + end + "]"
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def content_hash(data: dict, audit: list) -> str:
    """SHA-256 (hex) of the canonical JSON of the ``data`` and ``audit`` blocks of a study file."""
    canonical = json.dumps(
        {"audit": audit, "data": data}, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(",", ":")
    )
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def _reject_constant(name):
    raise ValueError(f"{name} is not allowed in a study file (JSON has no NaN or infinity)")


def _schema() -> dict:
    text = resources.files("levelwise").joinpath("study_schema.json").read_text(encoding="utf-8")
    return json.loads(text)


_VALIDATOR = None


def _validator():
    global _VALIDATOR
    if _VALIDATOR is None:
        import jsonschema

        schema = _schema()
        cls = jsonschema.validators.validator_for(schema)
        _VALIDATOR = cls(schema)
    return _VALIDATOR


#: Runs beyond this many are checked by a fast test of the same rules as the schema's run item;
#: any run that fails it is then validated by jsonschema, which words the error.
_SCHEMA_RUNS = 500
_RUN_KEYS = frozenset(("run", "stage", "block", "std_order", "point_type", "planned", "achieved", "responses"))


def _run_ok(run) -> bool:
    if type(run) is not dict or run.keys() != _RUN_KEYS:
        return False
    for key, low in (("run", 1), ("block", -_MAX_INT), ("std_order", -_MAX_INT)):
        if type(run[key]) is not int or not low <= run[key] <= _MAX_INT:
            return False
    if type(run["stage"]) is not str or type(run["point_type"]) is not str:
        return False
    for block, kinds in (("planned", (int, float, str)), ("achieved", (int, float, str)), ("responses", (int, float))):
        values = run[block]
        if type(values) is not dict or any(type(v) not in kinds for v in values.values()):
            return False
    return True


def _validate(document, source: str) -> None:
    """Validate a format-1 document against the shipped schema; the error names the field."""
    validator = _validator()
    runs = document.get("data", {}).get("runs") if isinstance(document.get("data"), dict) else None
    offset, errors = 0, []
    if isinstance(runs, list) and len(runs) > _SCHEMA_RUNS:
        head = {**document, "data": {**document["data"], "runs": runs[:_SCHEMA_RUNS]}}
        errors = list(validator.iter_errors(head))
        if not errors:
            item = validator.evolve(schema=validator.schema["properties"]["data"]["properties"]["runs"]["items"])
            for i in range(_SCHEMA_RUNS, len(runs)):
                if not _run_ok(runs[i]):
                    errors = list(item.iter_errors(runs[i]))
                    if errors:
                        offset = i
                        break
    else:
        errors = list(validator.iter_errors(document))
    if errors:
        errors.sort(key=lambda e: list(map(str, e.absolute_path)))
        error = errors[0]
        parts = ["data", "runs", offset, *error.absolute_path] if offset else list(error.absolute_path)
        message = error.message if len(error.message) <= 200 else error.message[:197] + "..."
        raise StudyFileError(
            f"The study file '{source}' does not follow the study schema: field '{_json_path(parts)}': {message}"
            + (f" ({len(errors) - 1} more problem(s))." if len(errors) > 1 else "")
        )


def _json_path(parts) -> str:
    out = ""
    for part in parts:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


# ----- migrations ------------------------------------------------------------------------------
_MAX_INT = 2**53 - 1  # integers exact in every JSON reader; the schema caps run ids, blocks and orders here

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
    when = _now()
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
MIGRATIONS = {0: migrate_v0}


# ----- the study -------------------------------------------------------------------------------
class Study:
    """An experiment's complete record, with an audit log of every change.

    Parameters
    ----------
    factors : list of Factor
        The study factors; every stage's runs give a planned setting for each.
    title : str, optional
    notes : str, optional
        Free text.

    Examples
    --------
    >>> from levelwise import Factor, full_factorial
    >>> s = Study([Factor("A", 0, 1), Factor("B", 10, 20, "min")], title="demo")
    >>> s.add_stage("screen", full_factorial(s.factors, randomize=False))
    [1, 2, 3, 4]
    >>> s.add_response("y", units="g", goal="maximize")
    >>> s.record(2, "y", 4.5)
    >>> s.data().loc[2, "y"]
    np.float64(4.5)
    """

    def __init__(self, factors, *, title: str = "", notes: str = ""):
        self._factors = as_factors(factors)
        for f in self._factors:
            for level in getattr(f, "levels", ()):
                if isinstance(level, str):
                    _text(level, f"level of factor {f.name!r}", empty=False)
                else:
                    _finite(level, f"level of factor {f.name!r}")
            _name(f.name, "factor name")
            _text(f.units, f"units of factor {f.name!r}")
        self._title = _text(title, "title")
        self._notes = _text(notes, "notes")
        self._stages: list[dict] = []
        self._runs: dict[int, dict] = {}
        self._responses: dict[str, dict] = {}
        self._exclusions: list[dict] = []
        self._models: dict[str, str] = {}
        self._audit: list[dict] = []
        self._log("create", f"study created with factors {[f.name for f in self._factors]}")

    # ----- read-only views -------------------------------------------------------------------
    @property
    def factors(self) -> tuple[Factor, ...]:
        return self._factors

    @property
    def factor_names(self) -> list[str]:
        return [f.name for f in self._factors]

    @property
    def title(self) -> str:
        return self._title

    @property
    def notes(self) -> str:
        return self._notes

    @property
    def responses(self) -> dict[str, Response]:
        return {name: Response(name, **spec) for name, spec in self._responses.items()}

    @property
    def stages(self) -> tuple[Stage, ...]:
        return tuple(Stage(**stage) for stage in self._stages)

    @property
    def run_ids(self) -> list[int]:
        return list(self._runs)

    @property
    def models(self) -> dict[str, str]:
        return dict(self._models)

    @property
    def audit(self) -> tuple[AuditEntry, ...]:
        return tuple(AuditEntry(**entry) for entry in self._audit)

    @property
    def exclusions(self) -> pd.DataFrame:
        """One row per exclusion: ``run``, ``response`` (None: every response), ``reason``, ``when``."""
        return pd.DataFrame(self._exclusions, columns=["run", "response", "reason", "when"]).astype(
            {"run": "int64"}
        )

    def __len__(self) -> int:
        return len(self._runs)

    def __repr__(self) -> str:
        return (
            f"<Study {self._title!r}: {len(self._runs)} runs in {len(self._stages)} stage(s), "
            f"factors {self.factor_names}, responses {list(self._responses)}>"
        )

    # ----- internal helpers ------------------------------------------------------------------
    def _log(self, action: str, what: str, reason: str | None = None) -> None:
        self._audit.append({"when": _now(), "action": action, "what": what, "reason": reason})

    def _factor(self, name) -> Factor:
        for f in self._factors:
            if f.name == name:
                return f
        raise LevelwiseError(f"The 'factor' must be one of {self.factor_names}. Got {describe(name)} instead.")

    def _run(self, run) -> dict:
        run_id = _run_id(run)
        if run_id not in self._runs:
            known = f"{min(self._runs)}..{max(self._runs)}" if self._runs else "none yet"
            raise LevelwiseError(f"The 'run' {run_id} is not in the study (runs: {known}).")
        return self._runs[run_id]

    def _response(self, name) -> str:
        if name not in self._responses:
            raise LevelwiseError(
                f"The 'response' must be one of {list(self._responses)} (add it with add_response). "
                f"Got {describe(name)} instead."
            )
        return name

    # ----- changes ---------------------------------------------------------------------------
    def set_notes(self, text: str, *, reason: str | None = None) -> None:
        """Replace the free-text notes."""
        reason = _reason(reason)
        self._notes = _text(text, "notes")
        self._log("notes", f"notes set ({len(text)} characters)", reason)

    def set_title(self, title: str) -> None:
        """Replace the title."""
        self._title = _text(title, "title")
        self._log("title", f"title set to {title!r}")

    def add_response(self, name: str, units: str = "", goal: str = "none", target: float | None = None) -> None:
        """Add a response with its units and goal (``"none"``, ``"maximize"``, ``"minimize"``, ``"target"``)."""
        name = _name(name, "response name")
        if name in self._responses or name in self.factor_names:
            raise LevelwiseError(f"The 'response name' {name!r} is already used by a response or a factor.")
        spec = self._response_spec(name, units, goal, target)
        self._responses[name] = spec
        self._log("add_response", f"response {name!r} added ({spec['units'] or 'no units'}, goal {goal})")

    def set_goal(self, response: str, goal: str, target: float | None = None) -> None:
        """Change a response's goal."""
        name = self._response(response)
        spec = self._response_spec(name, self._responses[name]["units"], goal, target)
        self._responses[name] = spec
        self._log("set_goal", f"goal of {name!r} set to {goal}" + (f" {spec['target']}" if goal == "target" else ""))

    @staticmethod
    def _response_spec(name, units, goal, target) -> dict:
        units = _text(units, f"units of response {name!r}")
        if goal not in GOALS:
            raise LevelwiseError(f"The 'goal' of response {name!r} must be one of {list(GOALS)}. Got {describe(goal)}.")
        if goal == "target":
            target = _finite(target, f"target of response {name!r}")
        elif target is not None:
            raise LevelwiseError(f"The 'target' of response {name!r} is only allowed with goal='target'.")
        return {"units": units, "goal": goal, "target": target}

    def add_stage(self, name: str, design, *, description: str = "", reason: str | None = None) -> list[int]:
        """Append a design stage; its runs get new run ids after the existing ones.

        Parameters
        ----------
        name : str
            Unique stage name, e.g. ``"screen"``, ``"fold-over"``, ``"surface"``.
        design : Design or pandas.DataFrame
            A :class:`~levelwise.design.Design` or a table with one column per study factor
            (natural units) and optionally ``block``, ``std_order`` and ``point_type``.

        Returns
        -------
        list of int
            The new run ids, in run order.
        """
        name = _text(name, "stage name", empty=False)
        reason = _reason(reason)
        description = _text(description, "description")
        if any(stage["name"] == name for stage in self._stages):
            raise LevelwiseError(f"The 'stage name' {name!r} is already used; stage names must be unique.")
        table = getattr(design, "table", design)
        if not isinstance(table, pd.DataFrame):
            raise LevelwiseError(
                f"The 'design' must be a Design or a DataFrame of factor settings. Got {describe(design)} instead."
            )
        missing = [n for n in self.factor_names if n not in table.columns]
        if missing:
            raise LevelwiseError(
                f"The 'design' has no column for factor(s) {missing}; it must give every study factor "
                f"{self.factor_names}."
            )
        n = len(table)
        settings = {}
        for f in self._factors:
            if _is_categorical(f):
                settings[f.name] = [
                    _setting(f, value, f"planned setting of factor {f.name!r} in row {row + 1} of the design")
                    for row, value in enumerate(table[f.name].tolist())
                ]
                continue
            values = pd.to_numeric(table[f.name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
            bad = ~np.isfinite(values)
            if bad.any():
                row = int(np.flatnonzero(bad)[0])
                raw = table[f.name].iloc[row]
                raw = raw.item() if isinstance(raw, np.generic) else raw
                raise LevelwiseError(
                    f"The planned setting of factor {f.name!r} in row {row + 1} of the design must be a finite "
                    f"number. Got {describe(raw)} instead."
                )
            settings[f.name] = values
        block = self._int_column(table, "block", 1, n)
        # A Design's table names these standard_order and role (levelwise.design); older tables std_order/point_type.
        order_column = "standard_order" if "standard_order" in table else "std_order"
        role_column = "role" if "role" in table else "point_type"
        std_order = self._int_column(table, order_column, None, n)
        point_type = (
            [_text(str(v), role_column) for v in table[role_column]] if role_column in table else [""] * n
        )
        start = max(self._runs, default=0) + 1
        ids = list(range(start, start + n))
        names = self.factor_names
        for i, run_id in enumerate(ids):
            self._runs[run_id] = {
                "run": run_id,
                "stage": name,
                "block": block[i],
                "std_order": std_order[i] if std_order is not None else i + 1,
                "point_type": point_type[i],
                "planned": {f: _plain(settings[f][i]) for f in names},
                "achieved": {},
                "responses": {},
            }
        self._stages.append({"name": name, "description": description, "created": _now()})
        span = f"runs {start}..{start + n - 1}" if n else "no runs"
        self._log("add_stage", f"stage {name!r} added with {n} run(s) ({span})", reason)
        return ids

    @staticmethod
    def _int_column(table, column, default, n):
        if column not in table:
            return [default] * n if default is not None else None
        values = pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        bad = ~np.isfinite(values) | (values != np.round(values)) | (np.abs(values) > 2**53 - 1)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise LevelwiseError(
                f"The '{column}' of row {row + 1} of the design must be an integer. "
                f"Got {describe(table[column].iloc[row])} instead."
            )
        return [int(v) for v in values]

    def record(self, run: int, response: str, value, *, overwrite: bool = False, reason: str | None = None) -> None:
        """Record a response value for a run.

        A value already recorded is replaced only with ``overwrite=True`` (and the old value is
        kept in the audit log). ``value=None`` with ``overwrite=True`` clears it.
        """
        reason = _reason(reason)
        record = self._run(run)
        response = self._response(response)
        old = self._set_value(record, "responses", response, value, overwrite, f"response {response!r}")
        self._log_value("record", record, response, value, old, reason)

    def record_achieved(self, run: int, factor: str, value, *, overwrite: bool = False,
                        reason: str | None = None) -> None:
        """Record the setting actually achieved for one factor of a run (natural units)."""
        reason = _reason(reason)
        record = self._run(run)
        factor = self._factor(factor).name
        old = self._set_value(record, "achieved", factor, value, overwrite, f"achieved setting of {factor!r}",
                              self._factor(factor))
        self._log_value("record_achieved", record, factor, value, old, reason)

    def _set_value(self, record, block, key, value, overwrite, label, factor=None):
        old = record[block].get(key)
        if value is None:
            if not overwrite:
                raise LevelwiseError(f"Clearing the {label} of run {record['run']} needs overwrite=True.")
        else:
            field = f"{label} of run {record['run']}"
            value = _finite(value, field) if factor is None else _setting(factor, value, field)
        if old is not None and not overwrite and old != value:
            raise LevelwiseError(
                f"The {label} of run {record['run']} is already recorded as {old!r}; "
                f"pass overwrite=True to replace it with {value!r}."
            )
        if value is None:
            record[block].pop(key, None)
        else:
            record[block][key] = value
        return old

    def _record_many(self, changes, *, overwrite: bool, reason: str | None, source: str) -> None:
        """Record many values at once (an import): ``changes`` is a list of
        ``(kind, run, key, value)`` with kind ``"responses"`` or ``"achieved"``.

        The audit log gets one summary entry, plus one entry per replaced value (so that the
        old value stays on record). Every value is validated before any is stored.
        """
        reason = _reason(reason)
        checked = []
        for kind, run, key, value in changes:
            record = self._run(run)
            if kind == "responses":
                self._response(key)
            else:
                self._factor(key)
            field = f"{key} of run {record['run']}"
            value = _finite(value, field) if kind == "responses" else _setting(self._factor(key), value, field)
            old = record[kind].get(key)
            if old is not None and old != value and not overwrite:
                raise LevelwiseError(
                    f"The {key!r} of run {record['run']} is already recorded as {old!r}; pass overwrite=True."
                )
            checked.append((record, kind, key, value, old))
        replaced = 0
        for record, kind, key, value, old in checked:
            record[kind][key] = value
            if old is not None and old != value:
                replaced += 1
                action = "record" if kind == "responses" else "record_achieved"
                self._log(action, f"run {record['run']}: {key} = {value!r} (was {old!r})", reason)
        keys = sorted({key for _, _, key, _ in changes})
        runs = sorted({record["run"] for record, *_ in checked})
        span = f"runs {runs[0]}..{runs[-1]}" if runs else "no runs"
        self._log("import", f"{len(checked)} value(s) of {keys} recorded for {len(runs)} run(s) ({span}) from "
                            f"{source}; {replaced} replaced a recorded value", reason)

    def _log_value(self, action, record, key, value, old, reason):
        was = "not recorded" if old is None else repr(old)
        self._log(action, f"run {record['run']}: {key} = {value!r} (was {was})", reason)

    def exclude(self, run: int, reason: str, response: str | None = None) -> None:
        """Exclude a run from fitting (every response, or only *response*); a reason is required."""
        record = self._run(run)
        reason = _reason(reason, required=True)
        if response is not None:
            response = self._response(response)
        for item in self._exclusions:
            if item["run"] == record["run"] and item["response"] in (None, response):
                scope = "every response" if item["response"] is None else repr(item["response"])
                raise LevelwiseError(f"The 'run' {record['run']} is already excluded from {scope}.")
        self._exclusions.append({"run": record["run"], "response": response, "reason": reason, "when": _now()})
        scope = "every response" if response is None else repr(response)
        self._log("exclude", f"run {record['run']} excluded from {scope}", reason)

    def include(self, run: int, response: str | None = None, *, reason: str | None = None) -> None:
        """Undo the exclusions of a run (all of them, or the one for *response*)."""
        reason = _reason(reason)
        record = self._run(run)
        keep, dropped = [], []
        for item in self._exclusions:
            match = item["run"] == record["run"] and (response is None or item["response"] == response)
            (dropped if match else keep).append(item)
        if not dropped:
            raise LevelwiseError(f"The 'run' {record['run']} has no exclusion to undo"
                                 + (f" for response {response!r}." if response is not None else "."))
        self._exclusions = keep
        scopes = ", ".join("every response" if d["response"] is None else repr(d["response"]) for d in dropped)
        self._log("include", f"run {record['run']} included again in {scopes}", reason)

    def set_model(self, response: str, model: str, *, reason: str | None = None) -> None:
        """Set the model (a Wilkinson formula or preset over the factor names) for a response."""
        reason = _reason(reason)
        response = self._response(response)
        parse_model(model, self.factor_names)  # raises LevelwiseError naming the bad term
        _text(model, "model")
        old = self._models.get(response)
        self._models[response] = model
        self._log("set_model", f"model of {response!r} set to {model!r} (was {old!r})", reason)

    # ----- tables ----------------------------------------------------------------------------
    def _frame(self, factor_block: str) -> pd.DataFrame:
        runs = list(self._runs.values())
        index = pd.Index([r["run"] for r in runs], dtype="int64")
        columns = {
            "run": np.array([r["run"] for r in runs], dtype=np.int64),
            "stage": pd.array([r["stage"] for r in runs], dtype=object),
            "block": np.array([r["block"] for r in runs], dtype=np.int64),
            "std_order": np.array([r["std_order"] for r in runs], dtype=np.int64),
            "point_type": pd.array([r["point_type"] for r in runs], dtype=object),
        }
        for factor in self._factors:
            f, dtype = factor.name, (object if _is_categorical(factor) else float)
            missing = None if _is_categorical(factor) else np.nan
            if factor_block == "actual":
                columns[f] = np.array([r["achieved"].get(f, r["planned"][f]) for r in runs], dtype=dtype)
            else:
                columns[f] = np.array([r[factor_block].get(f, missing) for r in runs], dtype=dtype)
        for name in self._responses:
            columns[name] = np.array([r["responses"].get(name, np.nan) for r in runs], dtype=float)
        return pd.DataFrame(columns, index=index)

    def data(self, *, apply_exclusions: bool = True) -> pd.DataFrame:
        """The table for fitting: one row per run (index = run id), settings in natural units.

        Factor columns hold the achieved setting where one was recorded and the planned
        setting otherwise. With *apply_exclusions*, runs excluded from every response are
        dropped and a run excluded from one response has that response set to NaN.
        A new DataFrame every call: changing it does not change the study.
        """
        frame = self._frame("actual")
        if apply_exclusions:
            drop = []
            for item in self._exclusions:
                if item["response"] is None:
                    drop.append(item["run"])
                else:
                    frame.loc[item["run"], item["response"]] = np.nan
            frame = frame.drop(index=drop)
        return frame

    def table(self) -> pd.DataFrame:
        """Every run (nothing dropped), settings as run, every response, and an ``excluded`` column.

        ``excluded`` holds the reasons, e.g. ``"all: panel dropped"`` or ``"Impact: bubbles"``
        (``""`` when the run is used for every response). For showing the study; fit on :meth:`data`.
        """
        frame = self._frame("actual")
        notes = {run: [] for run in self._runs}
        for item in self._exclusions:
            scope = "all" if item["response"] is None else item["response"]
            notes[item["run"]].append(f"{scope}: {item['reason']}")
        frame["excluded"] = pd.array(["; ".join(notes[run]) for run in frame.index], dtype=object)
        return frame

    @property
    def response_names(self) -> list[str]:
        return list(self._responses)

    @property
    def revision(self) -> int:
        """A number that grows with every change (the length of the audit log): cheap change detection."""
        return len(self._audit)

    def copy(self) -> Study:
        """An independent copy (same data and audit log)."""
        return Study.from_json(self.to_json(), source="<copy>")

    def planned(self) -> pd.DataFrame:
        """Planned settings: the run sheet with one column per factor (index = run id)."""
        return self._frame("planned")[["run", "stage", "block", "std_order", "point_type", *self.factor_names]]

    def achieved(self) -> pd.DataFrame:
        """Achieved settings as recorded (NaN where none was), one column per factor (index = run id)."""
        return self._frame("achieved")[["run", *self.factor_names]]

    # ----- fitting ---------------------------------------------------------------------------
    def fit(self, response: str, model: str | None = None, *, level: float = 0.95):
        """Fit *response* with its model (or *model*) on :meth:`data`, coded by the study factors."""
        from .model import fit

        response = self._response(response)
        if model is None:
            if response not in self._models:
                raise LevelwiseError(
                    f"The response {response!r} has no model yet; call set_model({response!r}, ...) or pass 'model'."
                )
            model = self._models[response]
        return fit(self.data(), response, model, factors=list(self._factors), level=level)

    def fits(self, *, level: float = 0.95) -> dict:
        """A :class:`~levelwise.fit.Fit` for every response that has a model."""
        return {response: self.fit(response, level=level) for response in self._responses if response in self._models}

    # ----- the file --------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """The file's ``data`` block (a deep copy)."""
        return copy.deepcopy(self._data_block())

    def _data_block(self) -> dict:
        runs = list(self._runs.values())
        return (
            {
                "title": self._title,
                "factors": [_factor_entry(f) for f in self._factors],
                "responses": [{"name": name, **spec} for name, spec in self._responses.items()],
                "stages": self._stages,
                "runs": runs,
                "exclusions": self._exclusions,
                "models": self._models,
                "notes": self._notes,
            }
        )

    def to_json(self) -> str:
        """The complete file text."""
        data = self._data_block()  # serialised at once, so no copy is needed
        audit = self._audit
        document = {"format_version": FORMAT_VERSION, "data": data, "audit": audit,
                    "sha256": content_hash(data, audit)}
        return _pretty(document) + "\n"

    def save(self, path) -> Path:
        """Write the study to *path* without ever leaving a half-written file.

        The text goes to a temporary file in the same folder, which is fsynced and renamed over
        *path*; the previous file is first kept as ``<path>.bak`` (one generation). If anything
        fails (disk full, permission denied, the process killed), *path* still holds the previous
        complete version.

        Raises
        ------
        StudyFileError
            The write failed; the message names the path and the operating-system error.
        """
        path = Path(path)
        payload = self.to_json().encode("utf-8")
        folder = path.parent if str(path.parent) else Path(".")
        tmp_name = None
        try:
            fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
            with os.fdopen(fd, "wb") as handle:
                handle.write(payload)
                handle.flush()
                os.fsync(handle.fileno())
            if path.exists():
                _keep_backup(path)
            os.replace(tmp_name, path)
            tmp_name = None
            _fsync_folder(folder)
        except OSError as exc:
            reason = os.strerror(exc.errno) if exc.errno else str(exc)
            if exc.errno == errno.ENOSPC:
                reason = "the disk is full"
            raise StudyFileError(
                f"The study could not be saved to '{path}': {reason}. The previous file (if any) is unchanged."
            ) from exc
        finally:
            if tmp_name is not None:
                try:
                    os.unlink(tmp_name)
                except OSError:
                    pass
        return path

    @classmethod
    def load(cls, path, *, accept_outside_edits: bool = False) -> Study:
        """Read a study file, migrating an older format and checking the SHA-256 of its data.

        Parameters
        ----------
        path : str or Path
        accept_outside_edits : bool, default False
            Accept a file whose data no longer matches its SHA-256 (edited by hand or by another
            program); the acceptance is recorded in the audit log.

        Raises
        ------
        StudyFileError
            Unreadable, truncated or corrupt JSON; not a study; a newer format; a field that
            breaks the schema or the study's rules (the message names the field).
        OutsideEditError
            The data was edited outside levelwise and *accept_outside_edits* is False.
        """
        path = Path(path)
        try:
            raw = path.read_bytes()
        except OSError as exc:
            raise StudyFileError(f"The study file '{path}' could not be read: {exc.strerror or exc}.") from exc
        try:
            return cls.from_json(raw, source=str(path), accept_outside_edits=accept_outside_edits)
        except StudyFileError as exc:
            bak = path.with_name(path.name + ".bak")
            if not bak.exists():
                raise
            raise type(exc)(f"{exc} The previous version saved by levelwise is kept in '{bak}'.") from None

    @classmethod
    def from_json(cls, text, *, source: str = "<text>", accept_outside_edits: bool = False) -> Study:
        """Build a study from the text (str or UTF-8 bytes) of a study file. See :meth:`load`."""
        if isinstance(text, bytes):
            try:
                text = text.decode("utf-8")
            except UnicodeDecodeError as exc:
                raise StudyFileError(
                    f"The study file '{source}' is not UTF-8 text (bad byte at offset {exc.start})."
                ) from None
        if not isinstance(text, str):
            raise StudyFileError(f"The study text must be a str or bytes. Got {describe(text)} instead.")
        if text.startswith("\ufeff"):
            text = text[1:]
        try:
            document = json.loads(text, parse_constant=_reject_constant)
        except json.JSONDecodeError as exc:
            raise StudyFileError(
                f"The study file '{source}' is not valid JSON (truncated or corrupt?): {exc.msg} "
                f"at line {exc.lineno}, column {exc.colno}."
            ) from None
        except (ValueError, RecursionError) as exc:
            raise StudyFileError(f"The study file '{source}' could not be read as JSON: {exc}.") from None
        return cls.from_document(document, source=source, accept_outside_edits=accept_outside_edits)

    @classmethod
    def from_document(cls, document, *, source: str = "<document>", accept_outside_edits: bool = False) -> Study:
        """Build a study from a parsed study file (a dict). See :meth:`load`."""
        if not isinstance(document, dict) or "format_version" not in document:
            raise StudyFileError(
                f"'{source}' is not a levelwise study: it has no 'format_version' field "
                f"(got {describe(type(document).__name__)} with keys "
                f"{describe(sorted(map(str, document))[:8]) if isinstance(document, dict) else 'none'})."
            )
        version = document["format_version"]
        if isinstance(version, bool) or not isinstance(version, int) or version < 0:
            raise StudyFileError(
                f"The 'format_version' of '{source}' must be a non-negative integer. Got {describe(version)} instead."
            )
        if version > FORMAT_VERSION:
            raise StudyFileError(
                f"The 'format_version' of '{source}' is {version}, written by a newer levelwise; this version "
                f"reads formats up to {FORMAT_VERSION}. Update levelwise to open it."
            )
        migrated = version < FORMAT_VERSION
        while version < FORMAT_VERSION:
            document = MIGRATIONS[version](document)
            version = document["format_version"]
        _validate(document, source)
        data, audit = document["data"], document["audit"]
        outside = False
        try:
            expected = content_hash(data, audit)
        except UnicodeEncodeError:
            raise StudyFileError(
                f"The study file '{source}' holds text that is not valid Unicode (a lone surrogate escape such as "
                "\\ud800) in its 'data' or 'audit' block."
            ) from None
        except ValueError as exc:  # NaN/inf from a number too large for a float
            raise StudyFileError(f"The study file '{source}' holds a number that is not finite: {exc}.") from None
        if expected != document["sha256"] and not migrated:
            if not accept_outside_edits:
                raise OutsideEditError(
                    f"The data in '{source}' was edited outside levelwise: its 'sha256' field does not match the "
                    "data and audit blocks. Check the changes, then load with accept_outside_edits=True to accept "
                    "them (the acceptance is recorded in the audit log)."
                )
            outside = True
        study = cls._from_data(data, audit, source)
        if outside:
            study._log("accept_outside_edits", f"accepted data edited outside levelwise in '{source}'")
        return study

    @classmethod
    def _from_data(cls, data: dict, audit: list, source: str) -> Study:
        def fail(field, message):
            raise StudyFileError(f"The study file '{source}' has a bad field '{field}': {message}")

        factors = []
        for i, item in enumerate(data["factors"]):
            try:
                if "levels" in item:
                    factors.append(Factor(item["name"], units=item["units"], levels=tuple(item["levels"])))
                else:
                    factors.append(Factor(item["name"], item["low"], item["high"], item["units"]))
                _name(item["name"], "factor name")
                _text(item["units"], "units")
            except LevelwiseError as exc:
                fail(f"data.factors[{i}]", str(exc))
        try:
            study = cls(factors, title=data["title"], notes=data["notes"])
        except LevelwiseError as exc:
            fail("data.factors", str(exc))
        study._audit = [dict(entry) for entry in audit]
        names = set(study.factor_names)
        for i, spec in enumerate(data["responses"]):
            name = spec["name"]
            try:
                _name(name, "response name")
                if name in names or name in study._responses:
                    raise LevelwiseError(f"the response name {name!r} is used twice (or is also a factor name)")
                study._responses[name] = cls._response_spec(name, spec["units"], spec["goal"], spec["target"])
            except LevelwiseError as exc:
                fail(f"data.responses[{i}]", str(exc))
        for i, stage in enumerate(data["stages"]):
            if any(s["name"] == stage["name"] for s in study._stages):
                fail(f"data.stages[{i}].name", f"the stage name {stage['name']!r} appears twice")
            study._stages.append(dict(stage))
        stage_names = {s["name"] for s in study._stages}
        for i, run in enumerate(data["runs"]):
            where = f"data.runs[{i}]"
            run_id = int(run["run"])
            if run_id in study._runs:
                fail(f"{where}.run", f"the run id {run_id} appears twice")
            if run["stage"] not in stage_names:
                fail(f"{where}.stage", f"the stage {run['stage']!r} is not one of the stages {sorted(stage_names)}")
            if set(run["planned"]) != names:
                fail(f"{where}.planned", f"must give every factor {study.factor_names} and no other; "
                                         f"got {sorted(run['planned'])}")
            for block, allowed in (("achieved", names), ("responses", set(study._responses))):
                extra = sorted(set(run[block]) - allowed)
                if extra:
                    fail(f"{where}.{block}", f"{extra} are not among {sorted(allowed)}")
            settings = {}
            for block in ("planned", "achieved", "responses"):
                settings[block] = {}
                for key, value in run[block].items():
                    field = f"{where}.{block}.{key}"
                    try:
                        if block == "responses":
                            settings[block][key] = _finite(value, field)
                        else:
                            settings[block][key] = _plain(_setting(study._factor(key), value, field))
                    except LevelwiseError as exc:
                        fail(field, str(exc))
            study._runs[run_id] = {
                "run": run_id, "stage": run["stage"], "block": int(run["block"]), "std_order": int(run["std_order"]),
                "point_type": run["point_type"],
                **settings,
            }
        for i, item in enumerate(data["exclusions"]):
            item = {**item, "run": int(item["run"])}
            if item["run"] not in study._runs:
                fail(f"data.exclusions[{i}].run", f"run {item['run']} is not in the study")
            if item["response"] is not None and item["response"] not in study._responses:
                fail(f"data.exclusions[{i}].response", f"{item['response']!r} is not a response of the study")
            study._exclusions.append(dict(item))
        for response, model in data["models"].items():
            if response not in study._responses:
                fail(f"data.models.{response}", "is not a response of the study")
            try:
                parse_model(model, study.factor_names)
            except LevelwiseError as exc:
                fail(f"data.models.{response}", str(exc))
            study._models[response] = model
        # Floats written as integers (e.g. 2 for 2.0) are normalised above; keep the hash stable.
        return study

    # ----- reproducibility -------------------------------------------------------------------
    def to_code(self, path=None) -> str:
        """Python that rebuilds the current analysis (exclusions, models, fits) from the study file.

        Parameters
        ----------
        path : str or Path, optional
            The file the code loads; defaults to ``"study.json"``.
        """
        path = str(path) if path is not None else "study.json"
        lines = [
            "# Rebuilds the analysis of this study from its file.",
            "from levelwise import Factor, fit",
            "from levelwise.study import Study",
            "",
            f"study = Study.load({path!r})",
            "factors = [",
        ]
        for f in self._factors:
            if _is_categorical(f):
                lines.append(f"    Factor({f.name!r}, units={f.units!r}, levels={list(f.levels)!r}),")
            else:
                lines.append(f"    Factor({f.name!r}, {f.low!r}, {f.high!r}, units={f.units!r}),")
        lines += [
            "]",
            "# Settings as run: achieved where recorded, planned otherwise. Index = run id.",
            "data = study.data(apply_exclusions=False)",
        ]
        for item in self._exclusions:
            comment = f"  # {item['reason']!r}, {item['when']}".replace("\n", " ").replace("\r", " ")
            if item["response"] is None:
                lines.append(f"data = data.drop(index={item['run']}){comment}")
            else:
                lines.append(f"data.loc[{item['run']}, {item['response']!r}] = float('nan'){comment}")
        lines.append("fits = {}")
        for response, model in self._models.items():
            lines.append(f"fits[{response!r}] = fit(data, {response!r}, {model!r}, factors=factors)")
        return "\n".join(lines) + "\n"


def _keep_backup(path: Path) -> None:
    """Make ``<path>.bak`` a complete copy of *path*, atomically (never a half-copied backup)."""
    bak = path.with_name(path.name + ".bak")
    fd, tmp = tempfile.mkstemp(prefix=f".{bak.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        os.unlink(tmp)
        try:
            os.link(path, tmp)  # a hard link costs nothing; the old inode stays the backup after the rename
        except OSError:
            shutil.copy2(path, tmp)
        os.replace(tmp, bak)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


__all__ = [
    "FORMAT_VERSION",
    "GOALS",
    "MIGRATIONS",
    "AuditEntry",
    "Response",
    "Stage",
    "Study",
    "content_hash",
    "migrate_v0",
]
