"""Merging a table into a study by run id: the one table importer (run sheets, spreadsheets, data frames).

Every problem is collected with the row the spreadsheet shows and the column, and raised together
before anything changes; warnings (values outside the design range, columns not used) are listed
in the :class:`ImportReport`. See :mod:`._table_reader` for the header convention.
"""

from __future__ import annotations

import math
import warnings as _warnings

import numpy as np
import pandas as pd

from .._errors import ImportDataError, LevelwiseError, LevelwiseWarning, describe
from ._table_reader import (
    ImportReport,
    Problem,
    _blank,
    _error,
    _number,
    _source_bytes,
    parse_header,
    read_table,
    split_header,
)

#: Column names (before any units) that describe a run rather than measure it: never "unused".
_BOOK_NAMES = {"block": "block", "standard_order": "standard_order", "std_order": "standard_order",
               "role": "role", "point_type": "role", "whole_plot": "whole_plot"}
BOOKKEEPING = frozenset({"run", "stage", "excluded", *_BOOK_NAMES})


# ----- mapping ---------------------------------------------------------------------------------
def guess_mapping(columns, study) -> dict:
    """A column mapping guessed from header names (``Name [units]``; units are ignored here).

    Returns a dict with ``"run"`` (a column or None), ``"factors"``, ``"achieved"`` and
    ``"responses"`` (each a dict of study name -> column). A header ``"Oven (achieved)"`` maps to
    the achieved setting of ``Oven``; a header naming neither a factor nor a response of the study
    is left out (and :func:`import_table` lists it as not used).
    """
    mapping = {"run": None, "factors": {}, "achieved": {}, "responses": {}}
    factors = set(study.factor_names)
    responses = set(study.responses)
    for column in columns:
        name, _, achieved = parse_header(str(column))
        if name.lower() == "run" and not achieved and mapping["run"] is None:
            mapping["run"] = column
        elif achieved and name in factors:
            mapping["achieved"].setdefault(name, column)
        elif not achieved and name in factors:
            mapping["factors"].setdefault(name, column)
        elif not achieved and name in responses:
            mapping["responses"].setdefault(name, column)
    return mapping


def _check_mapping(mapping, columns, study, name) -> dict:
    if not isinstance(mapping, dict):
        raise ImportDataError(
            "The 'mapping' must be a dict with keys 'run', 'factors', 'achieved', 'responses'. "
            f"Got {describe(mapping)} instead."
        )
    unknown = set(mapping) - {"run", "factors", "achieved", "responses"}
    if unknown:
        raise ImportDataError(
            f"The 'mapping' has unknown key(s) {sorted(map(str, unknown))}; allowed: 'run', 'factors', 'achieved', "
            "'responses'."
        )
    clean = {"run": mapping.get("run"), "factors": {}, "achieved": {}, "responses": {}}
    problems = []
    if clean["run"] is not None and clean["run"] not in columns:
        problems.append(Problem(None, str(clean["run"]), "the 'run' column of the mapping is not in the file"))
    for role in ("factors", "achieved", "responses"):
        part = mapping.get(role) or {}
        if not isinstance(part, dict):
            raise ImportDataError(f"The 'mapping[{role!r}]' must be a dict of name -> column. Got {describe(part)}.")
        for key, column in part.items():
            if column not in columns:
                problems.append(Problem(None, str(column), f"mapped to {role} {key!r} but not in the file"))
                continue
            if role != "responses" and key not in study.factor_names:
                problems.append(Problem(None, str(column), f"mapped to {key!r}, which is not a study factor "
                                                           f"{study.factor_names}"))
                continue
            if role == "responses" and key in study.factor_names:
                problems.append(Problem(None, str(column), f"mapped to response {key!r}, which is a factor name"))
                continue
            clean[role][key] = column
    if problems:
        raise _error(name, problems)
    return clean


# ----- importing -------------------------------------------------------------------------------
def import_table(study, source, mapping=None, *, sheet: str | None = None, stage: str | None = None,
                 overwrite: bool = False, reason: str | None = None, delimiter: str = ",",
                 decimal: str = ".", header_row: int | None = None) -> ImportReport:
    """Merge a CSV or XLSX table into *study* by run id; all or nothing.

    Parameters
    ----------
    study : Study
    source : path, bytes or file-like
    mapping : dict, optional
        ``{"run": column, "factors": {factor: column}, "achieved": {factor: column},
        "responses": {response: column}}``; default :func:`guess_mapping`. A response not yet in
        the study is added, with the units declared in its header.
    stage : str, optional
        Rows whose run id is not in the study become new runs of this (new) stage, planned at
        their factor columns (and at their ``block``, ``standard_order`` and ``role`` when the file
        has those columns); they keep the file's run ids (``ImportReport.runs_added``). Without it
        an unknown run id is a problem.
    overwrite : bool, default False
        Replace recorded values that differ from the file. Without it they are problems.
    reason : str, optional
        Written in the audit log with every change.
    sheet, delimiter, header_row
        As for :func:`read_table`; ``decimal`` is the decimal mark of numbers written as text.

    Returns
    -------
    ImportReport
        Including the warnings (values outside the design range, kept; columns the mapping does not
        use, listed and also issued as one :class:`LevelwiseWarning`).

    Raises
    ------
    ImportDataError
        With ``problems``: every problem found, each naming its row and column. The study is
        unchanged.
    """
    from ._study import Study

    if not isinstance(study, Study):
        raise LevelwiseError(f"The 'study' must be a Study. Got {describe(study)} instead.")
    if not isinstance(decimal, str) or len(decimal) != 1:
        raise ImportDataError(f"The 'decimal' must be one character. Got {describe(decimal)} instead.")
    name = _source_bytes(source)[0] if not isinstance(source, pd.DataFrame) else "<DataFrame>"
    if isinstance(source, pd.DataFrame) and source.attrs.get("spreadsheet_rows"):
        # Already read from a file (Study.from_table): its index holds the spreadsheet row numbers.
        name = source.attrs.get("source_name", name)
        frame = source.astype(object)
        frame.attrs.update(source.attrs)
    elif isinstance(source, pd.DataFrame):
        frame = source.astype(object)
        frame.columns = [str(c) for c in frame.columns]
        frame.index = pd.RangeIndex(2, 2 + len(frame))
    else:
        frame = read_table(source, sheet=sheet, delimiter=delimiter, header_row=header_row)
    columns = list(frame.columns)
    header_row = frame.attrs.get("header_row", 1)
    mapping = guess_mapping(columns, study) if mapping is None else _check_mapping(mapping, columns, study, name)
    problems: list[Problem] = []
    warnings: list[Problem] = []
    used = {mapping["run"], *mapping["factors"].values(), *mapping["achieved"].values(),
            *mapping["responses"].values()}
    unused = [c for c in columns if c not in used and split_header(c)[0].lower() not in BOOKKEEPING]
    for column in unused:
        warnings.append(Problem(header_row, column, "the column is not used: it names no factor, no achieved "
                                                    "setting and no response of the study (add the response "
                                                    "first, or map the column)", "warning"))
    factors = {f.name: f for f in study.factors}
    responses = study.responses

    # Units declared in headers.
    new_units = {}
    for role, items in (("factors", mapping["factors"]), ("achieved", mapping["achieved"]),
                        ("responses", mapping["responses"])):
        for key, column in items.items():
            _, units = split_header(column) if role != "achieved" else parse_header(column)[:2]
            if role == "responses" and key not in responses:
                new_units[key] = units or ""
                continue
            expected = factors[key].units if role != "responses" else responses[key].units
            if units is not None and units != expected:
                problems.append(Problem(header_row, column, f"the header declares units {units!r} but "
                                                   f"{'factor' if role != 'responses' else 'response'} {key!r} "
                                                   f"is in {expected!r}"))
    if mapping["run"] is None:
        problems.append(Problem(None, None, "no run-id column: map one as 'run' (a header 'Run' is found "
                                            "automatically)"))
        raise _error(name, problems)
    run_col = mapping["run"]

    # Run ids.
    existing = set(study.run_ids)
    seen: dict[int, int] = {}
    row_ids: dict[int, int] = {}
    for row, cell in frame[run_col].items():
        value, bad = _number(cell, decimal)
        if bad or value is None or value < 1 or not float(value).is_integer():
            problems.append(Problem(row, run_col, f"the run id must be an integer >= 1; got {describe(cell)}"))
            continue
        run_id = int(value)
        if run_id in seen:
            problems.append(Problem(row, run_col, f"duplicate run: run {run_id} is also in row {seen[run_id]}"))
            continue
        seen[run_id] = row
        if run_id not in existing and stage is None:
            problems.append(Problem(row, run_col, f"run {run_id} is not in the study; pass stage=... to add new "
                                                  "runs"))
            continue
        row_ids[row] = run_id
    new_rows = [row for row, run_id in row_ids.items() if run_id not in existing]
    if new_rows:
        missing = [f for f in study.factor_names if f not in mapping["factors"]]
        if missing:
            problems.append(Problem(None, None, f"factors missing: new runs need a column for every factor; "
                                                f"{missing} have none"))
        if stage in {s.name for s in study.stages}:
            problems.append(Problem(None, None, f"the stage {stage!r} already exists; new runs need a new stage"))

    # Ranges: the factor's low..high widened to every planned setting (axial points are in range).
    planned = study.planned()
    continuous = [f for f in factors if not getattr(factors[f], "levels", ())]
    lo = {f: min(factors[f].low, planned[f].min()) if len(planned) else factors[f].low for f in continuous}
    hi = {f: max(factors[f].high, planned[f].max()) if len(planned) else factors[f].high for f in continuous}

    def setting(cell, factor):
        """(value, problem): a number, or one of a categorical factor's levels."""
        if factor in lo:
            return _number(cell, decimal)
        if _blank(cell):
            return None, None
        levels = factors[factor].levels
        candidates = [cell, str(cell).strip()]
        number, _ = _number(cell, decimal)
        if number is not None:
            candidates.append(number)
        for candidate in candidates:
            for level in levels:
                if type(level) is type(candidate) and level == candidate or (
                    not isinstance(level, str) and isinstance(candidate, float) and level == candidate
                ):
                    return level, None
        return None, f"{describe(cell)} is not one of the levels {list(levels)!r} of {factor!r}"

    def outside(value, factor) -> bool:
        return factor in lo and not lo[factor] <= value <= hi[factor]

    def same(a, b) -> bool:
        if isinstance(a, str) or isinstance(b, str):
            return a == b
        return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12)

    def missing(value) -> bool:
        return value is None or (isinstance(value, float) and np.isnan(value))

    current = study.data(apply_exclusions=False)
    achieved_now = study.achieved()
    changes = []  # (kind, run_id, key, value)
    new_runs = {}
    for row, run_id in row_ids.items():
        is_new = run_id not in existing
        settings = {}
        for factor, column in mapping["factors"].items():
            value, bad = setting(frame.at[row, column], factor)
            if bad:
                problems.append(Problem(row, column, bad))
                continue
            if value is None:
                if is_new:
                    problems.append(Problem(row, column, f"factor missing: new run {run_id} has no setting for "
                                                         f"{factor!r}"))
                continue
            if is_new:
                settings[factor] = value
            elif not same(value, planned.at[run_id, factor]):
                was = planned.at[run_id, factor]
                was = was if isinstance(was, str) else float(was)
                problems.append(Problem(row, column, f"run {run_id} was planned at {was!r} "
                                                     f"but the file says {value!r}; map the column under "
                                                     "'achieved' if it holds the settings actually run"))
                continue
            if outside(value, factor):
                warnings.append(Problem(row, column, f"{value!r} is outside the design range "
                                                     f"{float(lo[factor])!r} to {float(hi[factor])!r} of {factor!r} "
                                                     "(kept)", "warning"))
        if is_new:
            new_runs[run_id] = settings
        for kind, items in (("achieved", mapping["achieved"]), ("responses", mapping["responses"])):
            for key, column in items.items():
                cell = frame.at[row, column]
                value, bad = setting(cell, key) if kind == "achieved" else _number(cell, decimal)
                if bad:
                    problems.append(Problem(row, column, bad))
                    continue
                if value is None:
                    continue
                if kind == "achieved":
                    old = np.nan if is_new else achieved_now.at[run_id, key]
                    if outside(value, key):
                        warnings.append(Problem(row, column, f"{value!r} is outside the design range "
                                                             f"{float(lo[key])!r} to {float(hi[key])!r} of {key!r} "
                                                             "(kept)", "warning"))
                else:
                    old = np.nan if is_new or key not in current.columns else current.at[run_id, key]
                if not missing(old):
                    if old == value:
                        continue
                    if not overwrite:
                        old = old if isinstance(old, str) else float(old)
                        problems.append(Problem(row, column, f"run {run_id} already has {key!r} = {old!r}; the "
                                                             f"file says {value!r} (pass overwrite=True to "
                                                             "replace it)"))
                        continue
                changes.append((kind, run_id, key, value))
    book = {key: column for column in columns for key in ("block", "standard_order", "role", "whole_plot")
            if _BOOK_NAMES.get(split_header(column)[0].lower()) == key}

    def bookkeeping(row) -> dict:
        """The block, standard order, role and whole plot of a new run, from the file's columns of those names."""
        out = {}
        for key, column in book.items():
            cell = frame.at[row, column]
            if _blank(cell):
                continue
            if key == "role":
                out[key] = str(cell).strip()
                continue
            value, bad = _number(cell, decimal)
            if bad or not float(value).is_integer():
                problems.append(Problem(row, column, f"the {key} must be an integer; got {describe(cell)}"))
                continue
            out[key] = int(value)
        return out

    for row, run_id in row_ids.items():
        if run_id not in existing:
            bookkeeping(row)  # collects its problems now, before anything changes
    if problems:
        raise _error(name, problems)
    if unused:
        _warnings.warn(f"The import from '{name}' did not use the column(s) {unused}: they name no factor, "
                       "achieved setting or response of the study.", LevelwiseWarning, stacklevel=2)

    # Apply: every check passed, so none of these calls can fail on the data.
    if reason is None:
        reason = f"imported from {name}"
    added = ()
    if new_runs:
        rows = {run_id: row for row, run_id in row_ids.items()}
        table = pd.DataFrame([{"run": run_id, **settings, **bookkeeping(rows[run_id])}
                              for run_id, settings in new_runs.items()])
        added = tuple(study.add_stage(stage, table, reason=reason))
    for key, units in new_units.items():
        study.add_response(key, units=units)
    if changes:
        study._record_many(changes, overwrite=overwrite, reason=reason, source=name)
    return ImportReport(source=name, runs_added=added, values_recorded=len(changes), warnings=tuple(warnings))




__all__ = ["guess_mapping", "import_table"]
