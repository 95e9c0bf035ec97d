"""Reading a filled run sheet back: the run sheet goes through the one table importer (:func:`import_table`).

A run sheet (see :func:`levelwise.write_run_sheet`) has the columns ``run``, ``standard_order``, ``block``,
``role``, one planned column per factor, one ``"<factor> (achieved)"`` column per factor and one column
per response. Its rows are numbered and its problems collected exactly as for any other import.
"""

from __future__ import annotations

import json
import os
import warnings
from dataclasses import dataclass

import pandas as pd

from .._errors import ImportDataError, LevelwiseError, LevelwiseWarning, describe
from ..design import Factor
from ._import import import_table
from ._table_reader import Problem, _error, parse_header, read_table
from ._tables import ACHIEVED

SHEET_RUNS = "runs"
SHEET_META = "design"


@dataclass(frozen=True, eq=False)
class FilledRunSheet:
    """A run sheet read back and validated.

    Attributes
    ----------
    table : pandas.DataFrame
        ``run``, ``standard_order``, ``block``, ``whole_plot`` (a split-plot sheet only), ``role``, the planned
        settings, the achieved settings
        (``"<factor> (achieved)"``, NaN or None where none was entered) and the responses, in sheet order.
    factors : tuple of Factor
    responses : tuple of str
    data : pandas.DataFrame
        ``run``, ``standard_order``, ``block``, ``role``, one column per factor holding the achieved
        setting where one was entered and the planned one otherwise, then the responses.
    missing_responses : dict
        Response name -> list of run ids with no value.
    study : Study
        The study the sheet was read into (one stage, ``"run sheet"``).
    """

    table: pd.DataFrame
    factors: tuple
    responses: tuple
    data: pd.DataFrame
    missing_responses: dict
    study: object = None


def _meta(raw: bytes, name: str):
    """Factors and response names from the ``design`` sheet of a run-sheet workbook (None: no such sheet)."""
    try:
        meta = read_table(raw, sheet=SHEET_META)
    except ImportDataError:
        return (), None
    factors, responses = [], None
    for field, value in zip(meta.get("field", ()), meta.get("value", ())):
        try:
            if field == "factor":
                spec = json.loads(value)
                hard = bool(spec.get("hard_to_change", False))
                if spec.get("levels"):
                    factors.append(Factor(spec["name"], levels=spec["levels"], units=spec.get("units", ""),
                                          hard_to_change=hard))
                else:
                    factors.append(Factor(spec["name"], spec["low"], spec["high"], units=spec.get("units", ""),
                                          hard_to_change=hard))
            elif field == "responses":
                responses = json.loads(value)
        except (ValueError, TypeError, KeyError) as exc:
            raise ImportDataError(f"The '{SHEET_META}' sheet of '{name}' has a bad {field!r} entry: {exc}.") from None
    return tuple(factors), responses


def read_run_sheet(source, design=None, responses=None) -> FilledRunSheet:
    """Read a filled run sheet (a ``.csv``/``.xlsx`` path, its bytes, or a DataFrame) and validate it.

    Parameters
    ----------
    source : str, path, bytes or pandas.DataFrame
        A DataFrame's first row is spreadsheet row 2 (under its header).
    design : Design, optional
        The planned design; if omitted, the XLSX ``design`` sheet supplies the factors and the planned
        settings come from the sheet.
    responses : list of str, optional
        Response column names; default from the XLSX ``design`` sheet, else ``["y"]``.

    Raises
    ------
    ImportDataError
        With ``problems``: every problem found, each naming the spreadsheet row and the column
        (text in a numeric cell, an unknown level, a duplicate or unknown run id, a planned setting
        that differs from the design, a missing factor column).

    Warns
    -----
    LevelwiseWarning
        Achieved settings outside the planned range (the values are kept), naming the run ids;
        columns the sheet has but the design does not use.
    """
    from ._study import Study

    meta_factors, meta_responses, raw, name = (), None, None, "<DataFrame>"
    if isinstance(source, pd.DataFrame):
        frame = source
    else:
        if isinstance(source, (str, os.PathLike)):
            path = os.fspath(source)
            if not path.lower().endswith((".csv", ".xlsx")):
                raise LevelwiseError(f"The run sheet must be a .csv or .xlsx file. Got {path!r} instead.")
        from ._table_reader import _source_bytes

        name, raw = _source_bytes(source)
        is_xlsx = raw[:4] == b"PK\x03\x04"
        if is_xlsx:
            meta_factors, meta_responses = _meta(raw, name)
        frame = read_table(source if isinstance(source, (str, os.PathLike)) else raw,
                           sheet=SHEET_RUNS if is_xlsx and meta_factors else None)
    if design is not None:
        if not hasattr(design, "factors") or not hasattr(design, "table"):
            raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
        factors = tuple(design.factors)
    elif meta_factors:
        factors = meta_factors
    else:
        raise LevelwiseError("read_run_sheet needs the 'design' (a CSV sheet carries no factor definitions).")
    if responses is None:
        responses = meta_responses if meta_responses is not None else ["y"]
    responses = [responses] if isinstance(responses, str) else list(responses)
    study = Study(list(factors), title=f"run sheet {name}")
    names = [f.name for f in factors]
    mapping = {"run": None, "factors": {}, "achieved": {}, "responses": {}}
    units = {}
    for column in map(str, frame.columns):  # the one header convention: "Name [units]", "<factor> (achieved)"
        base, unit, achieved = parse_header(column)
        if base == "run" and not achieved:
            mapping["run"] = mapping["run"] or column
        elif base in names:
            mapping["achieved" if achieved else "factors"].setdefault(base, column)
        elif base in responses and not achieved:
            mapping["responses"].setdefault(base, column)
            units.setdefault(base, unit or "")
    missing = [r for r in responses if r not in mapping["responses"]]
    if missing:
        raise _error(name, [Problem(None, r, "the response column is missing") for r in missing])
    for r in responses:
        study.add_response(r, units=units[r])
    given = source if raw is None or isinstance(source, (str, os.PathLike)) else raw
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if design is not None:
            study.add_stage("run sheet", design)
            import_table(study, given, mapping,
                         sheet=SHEET_RUNS if meta_factors else None)
        else:
            import_table(study, given, mapping, stage="run sheet",
                         sheet=SHEET_RUNS if meta_factors else None)
    for item in caught:
        warnings.warn(item.message, item.category, stacklevel=2)
    planned, achieved, values = study.planned(), study.achieved(), study.data(apply_exclusions=False)
    _warn_outside(study, planned, achieved)
    book = planned[["run", "standard_order", "block", *(["whole_plot"] if "whole_plot" in planned else []), "role"]]
    table = pd.concat([book, planned[names], achieved[names].add_suffix(ACHIEVED), values[responses]], axis=1)
    data = pd.concat([book, values[names], values[responses]], axis=1)
    missing_responses = {r: [int(i) for i in values.index[values[r].isna()]] for r in responses}
    return FilledRunSheet(table=table.reset_index(drop=True), factors=tuple(factors), responses=tuple(responses),
                          data=data.reset_index(drop=True), missing_responses=missing_responses, study=study)


def _warn_outside(study, planned, achieved) -> None:
    """One warning per factor whose achieved settings leave the planned range (factor range widened to the plan)."""
    for f in study.factors:
        if getattr(f, "levels", ()):
            continue
        lo, hi = min(f.low, planned[f.name].min()), max(f.high, planned[f.name].max())
        got = achieved[f.name]
        outside = got.notna() & ((got < lo - 1e-12 * max(1.0, abs(lo))) | (got > hi + 1e-12 * max(1.0, abs(hi))))
        if outside.any():
            which = [int(i) for i in got.index[outside]]
            warnings.warn(
                f"Achieved settings of {f.name!r} outside the planned range [{lo:g}, {hi:g}] in run(s) {which}; "
                "the values are kept.", LevelwiseWarning, stacklevel=3,
            )


__all__ = ["FilledRunSheet", "read_run_sheet"]
