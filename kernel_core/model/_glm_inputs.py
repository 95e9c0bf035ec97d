"""Input checks of a GLM fit: the counts, trials and exposure columns, every bad value named by run and column."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe


def _run_label(data, row):
    return data["run"].iloc[row] if "run" in data.columns else row + 1


def _counts(data, column, role, keep=None):
    """Numeric values of *column*; refuse text, negatives and non-integers (naming run and column)."""
    if not isinstance(column, str) or column not in data.columns:
        raise LevelwiseError(
            f"The '{role}' parameter must name a column of the data {list(map(str, data.columns))}. "
            f"Got {describe(column)} instead."
        )
    values = pd.to_numeric(data[column], errors="coerce").to_numpy(dtype=float)
    text = data[column].notna().to_numpy() & np.isnan(values)
    rows = np.arange(len(values)) if keep is None else np.flatnonzero(keep)
    for row in rows:
        value = values[row]
        if text[row] or (keep is not None and np.isnan(value)) or np.isinf(value):
            raise LevelwiseError(
                f"Run {_run_label(data, row)}: the {role} column {column!r} must hold a whole number. "
                f"Got {describe(data[column].iloc[row])} instead."
            )
        if np.isnan(value):
            continue
        if value < 0 and role != "exposure":
            raise LevelwiseError(
                f"Run {_run_label(data, row)}: the {role} column {column!r} holds {value:g}; counts cannot be "
                "negative."
            )
        if role != "exposure" and abs(value - round(value)) > 1e-9:
            raise LevelwiseError(
                f"Run {_run_label(data, row)}: the {role} column {column!r} holds {value:g}; counts must be "
                "whole numbers."
            )
    return values
