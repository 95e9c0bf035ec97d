"""Input checks of :func:`levelwise.fit`: numeric columns, categorical levels, achieved settings, ``level``."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._numbers import float_values

#: Suffix of a column holding the achieved setting of a factor: ``"Oven (achieved)"``.
ACHIEVED_SUFFIX = " (achieved)"


def _check_level(level) -> float:
    if (
        isinstance(level, bool)
        or not isinstance(level, (int, float, np.floating, np.integer))
        or not 0 < level < 1
    ):
        raise LevelwiseError(
            f"The 'level' parameter must be a number in the open interval (0, 1). Got {describe(level)} instead."
        )
    return float(level)


def _numeric_column(data: pd.DataFrame, column: str, role: str) -> np.ndarray:
    """Column as a new float array (NaN where empty), with an error naming the row and value of the first
    non-number."""
    values = data[column]
    if isinstance(values.dtype, np.dtype) and values.dtype.kind == "f":
        # A numpy float column holds numbers or NaN (empty) already: one copy, no conversion pass.
        array = values.to_numpy(dtype=float, copy=True)
    else:
        array = float_values(values)  # (an int beyond the float range becomes +-inf, refused below)
        bad = np.isnan(array) & values.notna().to_numpy()
        if bad.any():
            row = bad.nonzero()[0][0]
            raise LevelwiseError(
                f"The {role} column {column!r} must hold numbers. "
                f"Row {row + 1} (index {data.index[row]!r}) holds {describe(values.iloc[row])} instead."
            )
    # A finite sum rules out infinities in one pass; only a column with NaN or inf (or an overflowing
    # sum) is searched for the first infinity.
    if not math.isfinite(array.sum()) and (infinite := np.isinf(array)).any():
        row = int(np.flatnonzero(infinite)[0])
        raise LevelwiseError(
            f"The {role} column {column!r} must hold finite numbers. Row {row + 1} holds {array[row].item()!r} instead."
        )
    return array


_PLAIN_NUMBERS = (int, float, np.float64, np.float32, np.int64, np.int32)
_PLAIN_TYPES = frozenset(_PLAIN_NUMBERS)


def _read_only(*arrays):
    """Mark arrays read-only, so a Fit's numbers cannot be changed in place."""
    for array in arrays:
        if isinstance(array, np.ndarray):
            array.flags.writeable = False
    return arrays if len(arrays) > 1 else arrays[0]


def _is_text_column(values: pd.Series) -> bool:
    return not (pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values))



def _level_indices(values: pd.Series, name: str, levels: tuple, role: str) -> np.ndarray:
    """Indices of categorical *values* in *levels*; NaN where missing; error on an unknown level."""
    lookup = {level: i for i, level in enumerate(levels)}
    lookup.update({str(level): i for i, level in enumerate(levels)})
    out = np.full(len(values), np.nan)
    for row, value in enumerate(values):
        if value is None or (isinstance(value, float) and math.isnan(value)):
            continue
        key = value if value in lookup else str(value)
        if key not in lookup:
            raise LevelwiseError(
                f"The {role} for categorical factor {name!r} in row {row + 1} is level {describe(value)}, "
                f"which was not in the data of this fit. Allowed levels: {list(levels)}."
            )
        out[row] = lookup[key]
    return out



def _factor_columns(data, names, factors, response):
    """Settings of each factor: (list of float columns, {categorical name: levels})."""
    by_name = {f.name: f for f in factors or ()}
    columns, categories = [], {}
    for name in names:
        if name not in data.columns:
            columns.append(np.zeros(len(data)))
            continue
        factor = by_name.get(name)
        declared = factor is not None and getattr(factor, "is_categorical", False)
        if declared or (factor is None and _is_text_column(data[name])):
            values = data[name]
            present = [v for v in values[values.notna()].unique()]
            if declared:
                order = list(getattr(factor, "levels", ()) or ())
                known = {str(level) for level in order}
                stray = [v for v in present if v not in order and str(v) not in known]
                if stray:
                    raise LevelwiseError(
                        f"The factor column {name!r} holds level {describe(stray[0])}, which is not a level of the "
                        f"factor. Allowed levels: {order}."
                    )
                seen = {str(v) for v in present}
                levels = tuple(level for level in order if level in present or str(level) in seen)
            else:
                levels = tuple(sorted(present, key=str))
            categories[name] = levels
            columns.append(_level_indices(values, name, levels, "factor column"))
        else:
            columns.append(_numeric_column(data, name, "factor"))
    return columns, categories


def _achieved_columns(data, names, categories, achieved):
    """Factor name -> column of achieved settings."""
    if achieved is None:
        return {}
    if isinstance(achieved, str) and achieved == "auto":
        return {
            name: name + ACHIEVED_SUFFIX
            for name in names
            if name not in categories and name + ACHIEVED_SUFFIX in data.columns
        }
    if not isinstance(achieved, dict):
        raise LevelwiseError(
            "The 'achieved' parameter must be 'auto', None or a dict {factor: column of achieved settings}. "
            f"Got {describe(achieved)} instead."
        )
    for name, column in achieved.items():
        if name not in names or name in categories:
            raise LevelwiseError(
                f"The 'achieved' parameter names factor {name!r}, which is not a continuous factor of the model "
                f"{[n for n in names if n not in categories]}."
            )
        if column not in data.columns:
            raise LevelwiseError(
                f"The 'achieved' parameter maps factor {name!r} to column {column!r}, which is not in the data."
            )
    return dict(achieved)



def _run_ids(data: pd.DataFrame) -> pd.Index:
    """Run ids of the rows of *data*: its ``run`` column when present (unique, no gaps), else 1..n."""
    if "run" not in data.columns:
        return pd.Index(np.arange(1, len(data) + 1), name="run")
    values = data["run"]
    numbers = pd.to_numeric(values, errors="coerce")
    if numbers.notna().all() and (numbers == np.round(numbers)).all():
        ids = pd.Index(numbers.to_numpy().astype(np.int64), name="run")
    elif values.notna().all():
        ids = pd.Index(values.to_numpy(), name="run")
    else:
        row = int(np.flatnonzero(values.isna().to_numpy())[0])
        raise LevelwiseError(f"The 'run' column is empty in row {row + 1}. Every run needs a run id.")
    if not ids.is_unique:
        twice = ids[ids.duplicated()][0]
        raise LevelwiseError(f"The 'run' column holds run id {twice!r} more than once. Run ids must be unique.")
    return ids
