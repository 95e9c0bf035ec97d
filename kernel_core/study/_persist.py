"""The study's file: text, save, load (with migration of older formats) and the code that rebuilds an analysis.

A part of :class:`Study`, kept in its own module. Saving never loses the previous file (see
:func:`write_atomically`); loading checks the SHA-256 of the file as written and refuses data edited
outside levelwise unless ``accept_outside_edits=True``.
"""

from __future__ import annotations

import copy
import hashlib
import json
import os
from pathlib import Path

from .._errors import LevelwiseError, OutsideEditError, StudyFileError, describe
from ..design import Factor
from ._count_responses import COUNT_KEYS, check_runs, count_spec
from ._format import (
    FORMAT_VERSION,
    _pretty,
    _reject_constant,
    _validate,
    content_hash,
    real_path,
    remove_leftovers,
    write_atomically,
)
from ._goals import GOAL_FIELDS
from ._migrations import MIGRATIONS
from ._values import _factor_entry, _finite, _is_categorical, _name, _plain, _setting, _text


def _file_key(path: Path) -> str:
    """The key under which a study remembers a file's revision: the absolute path of the file written."""
    return os.path.abspath(real_path(path))


def _edited_outside(document: dict, source: str) -> bool:
    """True when the ``sha256`` of *document* does not match its ``data`` and ``audit`` blocks."""
    data, audit = document.get("data"), document.get("audit")
    if not isinstance(data, dict) or not isinstance(audit, list) or "sha256" not in document:
        return False  # the schema check names what is missing
    try:
        return content_hash(data, audit) != document["sha256"]
    except UnicodeEncodeError:
        raise StudyFileError(
            f"The study file '{source}' holds text that is not valid Unicode (a lone surrogate escape such as "
            "\\ud800) in its 'data' or 'audit' block."
        ) from None
    except (ValueError, TypeError) as exc:  # NaN/inf from a number too large for a float
        raise StudyFileError(f"The study file '{source}' holds a number that is not finite: {exc}.") from None



def exclusion_code(exclusions) -> list[str]:
    """The lines of ``Study.to_code`` that leave the excluded runs (or one response's value) out, with reasons."""
    lines = []
    for item in exclusions:
        comment = f"  # {item['reason']!r}, {item['when']}".replace("\n", " ").replace("\r", " ")
        if item["response"] is None:
            lines.append(f"data = data.drop(index={item['run']}){comment}")
        else:
            lines.append(f"data.loc[{item['run']}, {item['response']!r}] = float('nan'){comment}")
    return lines

class StudyFile:
    """The file side of a :class:`Study` (a part of the class, kept in its own module)."""

    # ----- the file --------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """The file's ``data`` block (a deep copy)."""
        return copy.deepcopy(self._data_block())

    def _data_block(self) -> dict:
        runs = list(self._runs.values())
        mixture = {"mixture": self._mixture_entry()} if self.is_mixture else {}  # format 4, optional
        return (
            {
                **mixture,
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

    def save(self, path, *, overwrite: bool = False) -> Path:
        """Write the study to *path* without ever leaving a half-written file.

        The text goes to a temporary file in the same folder, which is fsynced and renamed over
        *path*; the previous file is first kept as ``<path>.bak`` (one generation). If anything
        fails (disk full, permission denied, the process killed), *path* still holds the previous
        complete version, and the temporary file left behind is removed by the next save or load.
        A symbolic link is followed (its target is updated); an existing file keeps its mode, a new
        one gets the umask's.

        A study remembers the SHA-256 of the file it was loaded from or last saved to. If that file
        changed since (another process saved it), the save is refused with
        :class:`StudyConflictError` instead of silently overwriting the other changes.

        Parameters
        ----------
        path : str or Path
        overwrite : bool, default False
            Replace the file even if it changed since this study last read or wrote it.

        Raises
        ------
        StudyConflictError
            The file changed since this study was loaded or last saved (and *overwrite* is False).
        StudyFileError
            The write failed; the message names the path and the operating-system error.
        """
        path = Path(path)
        key = _file_key(path)
        known = self._file_revisions.get(key)
        self._file_revisions[key] = write_atomically(
            path, self.to_json().encode("utf-8"), expected=known, check=known is not None and not overwrite
        )
        return path

    @classmethod
    def load(cls, path, *, accept_outside_edits: bool = False):
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
        remove_leftovers(path)
        try:
            raw = path.read_bytes()
        except OSError as exc:
            raise StudyFileError(f"The study file '{path}' could not be read: {exc.strerror or exc}.") from exc
        try:
            study = cls.from_json(raw, source=str(path), accept_outside_edits=accept_outside_edits)
            study._file_revisions[_file_key(path)] = hashlib.sha256(raw).hexdigest()
            return study
        except StudyFileError as exc:
            bak = path.with_name(path.name + ".bak")
            if not bak.exists():
                raise
            raise type(exc)(f"{exc} The previous version saved by levelwise is kept in '{bak}'.") from None

    @classmethod
    def from_json(cls, text, *, source: str = "<text>", accept_outside_edits: bool = False):
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
    def from_document(cls, document, *, source: str = "<document>", accept_outside_edits: bool = False):
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
        # The hash is checked on the file as written (before any migration); format 0 carries none.
        edited = version >= 1 and _edited_outside(document, source)
        while version < FORMAT_VERSION:
            document = MIGRATIONS[version](document)
            version = document["format_version"]
        _validate(document, source)
        data, audit = document["data"], document["audit"]
        _edited_outside(document, source)  # words a bad text or number in the migrated document
        outside = False
        if edited:
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
    def _from_data(cls, data: dict, audit: list, source: str):
        def fail(field, message):
            raise StudyFileError(f"The study file '{source}' has a bad field '{field}': {message}")

        factors = []
        for i, item in enumerate(data["factors"]):
            try:
                hard = item.get("hard_to_change", False)
                if "levels" in item:
                    factors.append(Factor(item["name"], units=item["units"], levels=tuple(item["levels"]),
                                          hard_to_change=hard))
                else:
                    factors.append(Factor(item["name"], item["low"], item["high"], item["units"],
                                          hard_to_change=hard))
                _name(item["name"], "factor name")
                _text(item["units"], "units", kind="units")
            except LevelwiseError as exc:
                fail(f"data.factors[{i}]", str(exc))
        for field, kind in (("title", "title"), ("notes", "notes")):
            try:
                _text(data[field], field, kind=kind)
            except LevelwiseError as exc:
                fail(f"data.{field}", str(exc))
        mixture = {}
        if "mixture" in data:
            try:
                mixture = cls._mixture_arguments(data["mixture"])
            except LevelwiseError as exc:
                fail("data.mixture", str(exc))
        elif not factors:
            fail("data.factors", "a study without mixture components needs at least one factor")
        try:
            study = cls(factors, title=data["title"], notes=data["notes"], **mixture)
        except LevelwiseError as exc:
            fail("data.mixture" if mixture else "data.factors", str(exc))
        for i, entry in enumerate(audit):
            if entry.get("reason") is not None:
                try:
                    _text(entry["reason"], "reason", kind="reason")
                except LevelwiseError as exc:
                    fail(f"audit[{i}].reason", str(exc))
        study._audit = [dict(entry) for entry in audit]
        names = set(study.setting_names)
        for i, spec in enumerate(data["responses"]):
            name = spec["name"]
            try:
                _name(name, "response name")
                if name in names or name in study._responses:
                    raise LevelwiseError(f"the response name {name!r} is used twice (or is also a factor name)")
                study._responses[name] = cls._response_spec(
                    name, spec["units"], spec["goal"], spec["target"],
                    **{key: spec[key] for key in GOAL_FIELDS if key in spec})
            except LevelwiseError as exc:
                fail(f"data.responses[{i}]", str(exc))
        for i, spec in enumerate(data["responses"]):  # count keys (format 4), once every response is known
            try:
                study._responses[spec["name"]].update(count_spec(
                    {n: (r if n != spec["name"] else {}) for n, r in study._responses.items()}, spec["name"],
                    *(spec.get(key) for key in ("family", "trials", "exposure", "link"))))
            except LevelwiseError as exc:
                fail(f"data.responses[{i}]", str(exc))
        for i, stage in enumerate(data["stages"]):
            try:
                _text(stage["name"], "stage name", kind="name")
            except LevelwiseError as exc:
                fail(f"data.stages[{i}].name", str(exc))
            try:
                _text(stage.get("description", ""), "description", kind="notes")
            except LevelwiseError as exc:
                fail(f"data.stages[{i}].description", str(exc))
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
                fail(f"{where}.planned", f"must give every factor {study.setting_names} and no other; "
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
                "run": run_id, "stage": run["stage"], "block": int(run["block"]),
                "standard_order": int(run["standard_order"]), "role": run["role"],
                **settings,
            }
            if "whole_plot" in run:
                study._runs[run_id]["whole_plot"] = int(run["whole_plot"])
            try:
                check_runs(study._responses, [study._runs[run_id]])
            except LevelwiseError as exc:
                fail(f"{where}.responses", str(exc))
        if study.is_mixture and study._runs:
            try:
                study._mixture.check_blends([[r["planned"][n] for n in study.component_names]
                                             for r in study._runs.values()], "planned blend",
                                            rows=[f"of run {run}" for run in study._runs])
            except LevelwiseError as exc:
                fail("data.runs", str(exc))
        for i, item in enumerate(data["exclusions"]):
            item = {**item, "run": int(item["run"])}
            try:
                _text(item["reason"], "reason", kind="reason")
            except LevelwiseError as exc:
                fail(f"data.exclusions[{i}].reason", str(exc))
            if item["run"] not in study._runs:
                fail(f"data.exclusions[{i}].run", f"run {item['run']} is not in the study")
            if item["response"] is not None and item["response"] not in study._responses:
                fail(f"data.exclusions[{i}].response", f"{item['response']!r} is not a response of the study")
            study._exclusions.append(dict(item))
        for response, model in data["models"].items():
            if response not in study._responses:
                fail(f"data.models.{response}", "is not a response of the study")
            try:
                study._checked_model(model)
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
        if self.is_mixture:
            return self._mixture_code(path)
        lines = [
            "# Rebuilds the analysis of this study from its file.",
            "from levelwise import Factor, fit",
            "from levelwise.study import Study",
            "",
            f"study = Study.load({path!r})",
            "factors = [",
        ]
        for f in self._factors:
            hard = ", hard_to_change=True" if getattr(f, "hard_to_change", False) else ""
            if _is_categorical(f):
                lines.append(f"    Factor({f.name!r}, units={f.units!r}, levels={list(f.levels)!r}{hard}),")
            else:
                lines.append(f"    Factor({f.name!r}, {f.low!r}, {f.high!r}, units={f.units!r}{hard}),")
        lines += [
            "]",
            "# Settings as run: achieved where recorded, planned otherwise. Index = run id.",
            "data = study.data(apply_exclusions=False)",
        ]
        split = ""
        if self.has_whole_plots:  # the split-plot analysis (REML); a run reset on its own is its own whole plot
            lines.append('data["whole_plot"] = study.fit_table(apply_exclusions=False)["whole_plot"]')
            split = ', whole_plot="whole_plot"'
        lines += exclusion_code(self._exclusions)
        lines.append("fits = {}")
        for response, model in self._models.items():
            spec = self._responses[response]
            count = "".join(f", {key}={spec[key]!r}" for key in COUNT_KEYS if spec.get(key))
            lines.append(f"fits[{response!r}] = fit(data, {response!r}, {model!r}, factors=factors"
                         f"{count or split})")
        return "\n".join(lines) + "\n"

