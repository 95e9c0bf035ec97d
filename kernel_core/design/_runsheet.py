"""Run sheets: the planned runs in run order, written to CSV or XLSX (read back by
:func:`levelwise.read_run_sheet`, in :mod:`levelwise.study`).

A run sheet has the columns ``run, standard_order, block, role`` (and ``whole_plot`` after ``block`` for a
split-plot design), one planned column per factor (natural
units), one ``"<factor> (achieved)"`` column per factor for the setting actually reached (blank = as planned),
and one blank column per response. The XLSX file has a second sheet, ``design``, with the design's metadata, so
a filled sheet can be read back without the Design object.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pandas as pd

from .._cells import write_csv, write_xlsx
from .._errors import LevelwiseError, describe
from ._design import META_COLUMNS, Design

ACHIEVED = " (achieved)"
SHEET_RUNS = "runs"
SHEET_META = "design"
FORMAT = "levelwise run sheet 1"


def _responses(responses, design_columns):
    if isinstance(responses, str):
        responses = [responses]
    try:
        responses = list(responses)
    except TypeError:
        raise LevelwiseError(f"The 'responses' parameter must be a list of names. Got {describe(responses)}.") from None
    for r in responses:
        if not isinstance(r, str) or not r.strip():
            raise LevelwiseError(f"Each response name must be a non-empty string. Got {describe(r)} instead.")
        if r in design_columns:
            raise LevelwiseError(f"The response name {r!r} clashes with a run-sheet column; choose another name.")
    if len(set(responses)) != len(responses):
        raise LevelwiseError(f"The response names must be unique. Got {responses!r}.")
    return responses


def run_sheet(design: Design, responses=("y",)) -> pd.DataFrame:
    """The run sheet of *design*: natural units in run order, blank achieved-setting and response columns.

    Examples
    --------
    >>> from levelwise import full_factorial
    >>> list(run_sheet(full_factorial(2, randomize=False), responses=["yield"]).columns)
    ['run', 'standard_order', 'block', 'role', 'A', 'B', 'A (achieved)', 'B (achieved)', 'yield']
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    names = design.factor_names
    achieved = [n + ACHIEVED for n in names]
    responses = _responses(responses, [*META_COLUMNS, *names, *achieved])
    sheet = design.table.copy()
    for n, a in zip(names, achieved):
        sheet[a] = pd.Series([None] * len(sheet), dtype=object) if design.factors[names.index(n)].is_categorical \
            else np.nan
    for r in responses:
        sheet[r] = np.nan
    return sheet


def _metadata_rows(design: Design, responses) -> list[tuple[str, str]]:
    rows = [("format", FORMAT), ("responses", json.dumps(list(responses)))]
    for f in design.factors:
        spec = {"name": f.name, "low": f.low, "high": f.high, "units": f.units, "levels": list(f.levels)}
        if f.hard_to_change:
            spec["hard_to_change"] = True
        rows.append(("factor", json.dumps(spec, ensure_ascii=False, default=str)))
    for key, value in design.metadata.items():
        rows.append((key, json.dumps(value, default=str, ensure_ascii=False)))
    return rows


def write_run_sheet(design: Design, path, responses=("y",)) -> str:
    """Write the run sheet to *path* (``.csv`` or ``.xlsx``); XLSX gets a second ``design`` sheet of metadata.

    Text that a spreadsheet would read as a formula stays text (see ``levelwise._cells``).

    Returns
    -------
    str
        The path written.
    """
    path = os.fspath(path)
    sheet = run_sheet(design, responses)
    if path.lower().endswith(".csv"):
        write_csv(sheet, path, index=False)
    elif path.lower().endswith(".xlsx"):
        meta = pd.DataFrame(_metadata_rows(design, _responses(responses, [])), columns=["field", "value"])
        write_xlsx({SHEET_RUNS: sheet, SHEET_META: meta}, path)
    else:
        raise LevelwiseError(f"The 'path' must end in .csv or .xlsx. Got {path!r} instead.")
    return path


__all__ = ["run_sheet", "write_run_sheet"]
