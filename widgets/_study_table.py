"""A :class:`levelwise.Study` from a table of runs: how a :class:`SharedModel` built from a DataFrame gets its study."""

from __future__ import annotations

import numpy as np
import pandas as pd

from levelwise import LevelwiseError, Study
from levelwise._errors import describe

#: Model of a response that has none yet.
DEFAULT_MODEL = "main_effects"


def study_from_table(factors, data, responses, *, models=None, units=None, exclusions=None) -> Study:
    """A :class:`Study` holding the runs of a table: one stage, run ids from its ``run`` column (else 1..n).

    Response values are recorded, *models* set (``DEFAULT_MODEL`` for a response without one) and
    *exclusions* (``{run id: reason}``) applied; a bad model or run id raises LevelwiseError naming it.
    """
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    for name in responses:
        if name not in data.columns:
            raise LevelwiseError(f"The response {name!r} is not a column of the data {list(map(str, data.columns))}.")
    study = Study(list(factors))
    table = data.reset_index(drop=True)
    if "run" not in table:
        table = table.assign(run=np.arange(1, len(table) + 1))
    ids = study.add_stage("runs", table)
    for name in responses:
        study.add_response(name, units=str((units or {}).get(name, "")))
    changes = []
    for name in responses:
        values = pd.to_numeric(table[name], errors="coerce").to_numpy(dtype=float)
        for run_id, value in zip(ids, values):
            if np.isfinite(value):
                changes.append(("responses", run_id, name, float(value)))
    if changes:
        study._record_many(changes, overwrite=False, reason=None, source="the data table")
    for name in responses:
        study.set_model(name, str((models or {}).get(name, DEFAULT_MODEL)).strip())
    for run, reason in (exclusions or {}).items():
        study.exclude(_plain_run(run), reason)
    return study


def _plain_run(run):
    return run.item() if isinstance(run, np.generic) else run
