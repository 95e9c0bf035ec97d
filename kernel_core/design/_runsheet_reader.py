"""Reading a filled run sheet back: validated settings, achieved settings and responses.

Kept in a module of its own (the writer is :mod:`._runsheet`) so the reader can join the study's table importer.
"""

from __future__ import annotations

import json
import os
import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, LevelwiseWarning, describe
from ._design import COLUMN_RENAMES, META_COLUMNS, ROLE_RENAMES, Design
from ._factors import Factor
from ._runsheet import ACHIEVED, SHEET_META, SHEET_RUNS, _responses


@dataclass(frozen=True, eq=False)
class FilledRunSheet:
    """A run sheet read back and validated.

    Attributes
    ----------
    table : pandas.DataFrame
        The sheet as read, with numbers as floats and blanks as NaN.
    factors : tuple of Factor
    responses : tuple of str
    data : pandas.DataFrame
        ``run, standard_order, block, role``, one column per factor holding the achieved setting where one was
        entered and the planned one otherwise, then the responses: ready for fitting on the actual settings.
    missing_responses : dict
        Response name -> list of run ids with no value.
    """

    table: pd.DataFrame
    factors: tuple
    responses: tuple
    data: pd.DataFrame
    missing_responses: dict


def _factors_from_meta(meta: pd.DataFrame):
    factors, responses = [], None
    for field, value in zip(meta["field"], meta["value"]):
        if field == "factor":
            spec = json.loads(value)
            if spec.get("levels"):
                factors.append(Factor(spec["name"], levels=spec["levels"], units=spec.get("units", "")))
            else:
                factors.append(Factor(spec["name"], spec["low"], spec["high"], units=spec.get("units", "")))
        elif field == "responses":
            responses = json.loads(value)
    return tuple(factors), responses


def _numeric(table, column, runs):
    values = table[column]
    converted = pd.to_numeric(values, errors="coerce")
    blank = values.isna() | values.astype(str).str.strip().eq("")
    bad = converted.isna() & ~blank
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise LevelwiseError(
            f"Row {i + 1} (run {runs[i]}), column {column!r} holds {describe(values.iloc[i])}; a number is required."
        )
    return converted.where(~blank).astype(float)


def read_run_sheet(source, design: Design | None = None, responses=None) -> FilledRunSheet:
    """Read a filled run sheet (path to ``.csv``/``.xlsx``, or a DataFrame) and validate it.

    Parameters
    ----------
    source : str, path or pandas.DataFrame
        A sheet from an older levelwise (columns ``std_order`` and ``point_type``, role names such as
        ``"factorial"``) is read with today's names (:data:`levelwise.design.ROLE_RENAMES`).
    design : Design, optional
        The planned design; if omitted, the XLSX ``design`` sheet supplies the factors.
    responses : list of str, optional
        Response column names; default from the XLSX ``design`` sheet, else ``["y"]``.

    Returns
    -------
    FilledRunSheet

    Raises
    ------
    LevelwiseError
        Unknown or missing columns, text in a numeric cell (row and column named), duplicate or missing run
        ids, a categorical setting that is not one of its levels, or no way to know the factors.

    Warns
    -----
    LevelwiseWarning
        An achieved setting outside the planned range of its factor (the value is kept).
    """
    meta = None
    if isinstance(source, pd.DataFrame):
        table = source.copy()
    else:
        path = os.fspath(source)
        if path.lower().endswith(".csv"):
            table = pd.read_csv(path, dtype=object, keep_default_na=True)
        elif path.lower().endswith(".xlsx"):
            sheets = pd.read_excel(path, sheet_name=None, dtype=object, engine="openpyxl")
            if SHEET_RUNS not in sheets:
                raise LevelwiseError(f"The workbook {path!r} has no sheet named {SHEET_RUNS!r}. "
                                     f"Got sheets {list(sheets)!r}.")
            table = sheets[SHEET_RUNS]
            meta = sheets.get(SHEET_META)
        else:
            raise LevelwiseError(f"The run sheet must be a .csv or .xlsx file. Got {path!r} instead.")
    meta_factors, meta_responses = _factors_from_meta(meta) if meta is not None else ((), None)
    if design is not None:
        if not isinstance(design, Design):
            raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
        factors = design.factors
    elif meta_factors:
        factors = meta_factors
    else:
        raise LevelwiseError("read_run_sheet needs the 'design' (a CSV sheet carries no factor definitions).")
    if responses is None:
        responses = meta_responses if meta_responses is not None else ["y"]
    names = [f.name for f in factors]
    achieved = [n + ACHIEVED for n in names]
    responses = _responses(responses, [*META_COLUMNS, *names, *achieved])
    table.columns = [str(c) for c in table.columns]
    # A sheet written by an older levelwise: its column names and role values as they are called today.
    table = table.rename(columns={old: new for old, new in COLUMN_RENAMES.items() if new not in table.columns})
    if "role" in table.columns:
        table["role"] = [ROLE_RENAMES.get(v, v) if isinstance(v, str) else v for v in table["role"]]
    expected = [*META_COLUMNS, *names, *achieved, *responses]
    unknown = [c for c in table.columns if c not in expected]
    missing = [c for c in expected if c not in table.columns]
    if unknown or missing:
        raise LevelwiseError(
            f"The run sheet's columns do not match the design. Unknown columns: {unknown or 'none'}; missing "
            f"columns: {missing or 'none'}. Expected: {expected}."
        )
    table = table[expected].reset_index(drop=True)
    # Run ids
    raw_runs = table["run"]
    run_num = pd.to_numeric(raw_runs, errors="coerce")
    bad = run_num.isna() | (run_num % 1 != 0)
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise LevelwiseError(f"Row {i + 1}, column 'run' holds {describe(raw_runs.iloc[i])}; a whole number is "
                             "required.")
    run_ids = run_num.astype(int).to_numpy()
    values, counts = np.unique(run_ids, return_counts=True)
    if (counts > 1).any():
        dup = int(values[counts > 1][0])
        rows = (np.flatnonzero(run_ids == dup) + 1).tolist()
        raise LevelwiseError(f"The run id {dup} appears more than once (rows {rows}); run ids must be unique.")
    if design is not None:
        planned_ids = set(design.table["run"].tolist())
        strange = sorted(set(run_ids.tolist()) - planned_ids)
        if strange:
            raise LevelwiseError(f"The run sheet has run id(s) {strange} that the design does not have.")
    out = pd.DataFrame({"run": run_ids})
    for col in ("standard_order", "block"):
        values = _numeric(table, col, run_ids)
        out[col] = values.astype(int) if values.notna().all() and (values % 1 == 0).all() else values
    out["role"] = table["role"]
    data = out.copy()
    for f, a in zip(factors, achieved):
        if f.is_categorical:
            for col in (f.name, a):
                cells = table[col]
                blank = cells.isna() | cells.astype(str).str.strip().eq("")
                text = {str(level): level for level in f.levels}
                odd = ~blank & ~cells.astype(str).isin(list(text))
                if odd.any():
                    i = int(np.flatnonzero(odd.to_numpy())[0])
                    raise LevelwiseError(
                        f"Row {i + 1} (run {run_ids[i]}), column {col!r} holds {describe(cells.iloc[i])}; "
                        f"allowed levels: {list(f.levels)!r}."
                    )
                out[col] = [None if b else text[str(v)] for v, b in zip(cells, blank)]
            data[f.name] = [a_ if a_ is not None else p_ for a_, p_ in zip(out[a], out[f.name])]
            continue
        planned = _numeric(table, f.name, run_ids)
        got = _numeric(table, a, run_ids)
        out[f.name], out[a] = planned, got
        lo = np.nanmin([f.low, planned.min()])
        hi = np.nanmax([f.high, planned.max()])
        outside = got.notna() & ((got < lo - 1e-12 * max(1.0, abs(lo))) | (got > hi + 1e-12 * max(1.0, abs(hi))))
        if outside.any():
            which = run_ids[outside.to_numpy()].tolist()
            warnings.warn(
                f"Achieved settings of {f.name!r} outside the planned range [{lo:g}, {hi:g}] in run(s) {which}; "
                "the values are kept.",
                LevelwiseWarning,
                stacklevel=2,
            )
        data[f.name] = got.where(got.notna(), planned)
    missing_resp = {}
    for r in responses:
        out[r] = _numeric(table, r, run_ids)
        data[r] = out[r]
        missing_resp[r] = run_ids[out[r].isna().to_numpy()].tolist()
    return FilledRunSheet(table=out, factors=tuple(factors), responses=tuple(responses), data=data,
                          missing_responses=missing_resp)


__all__ = ["FilledRunSheet", "read_run_sheet"]
