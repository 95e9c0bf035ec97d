"""Numbers from user input without an OverflowError: an int beyond the float range is not finite.

Python ints have no upper bound, so ``math.isfinite(10**400)`` and ``float(10**400)`` raise OverflowError.
Bad input must give a :class:`~levelwise.LevelwiseError` naming the field, so the settings checks treat such an
int as infinite (and refuse it, naming the factor or component).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd


def finite_number(value) -> bool:
    """``math.isfinite(value)``, but False (not OverflowError) for an int too large for a float."""
    try:
        return math.isfinite(value)
    except OverflowError:
        return False


def finite_sum(values) -> bool:
    """Whether ``sum(values)`` of plain numbers is finite; False (not OverflowError) when an int is beyond the
    float range. A finite sum of plain numbers means each is finite."""
    try:
        return math.isfinite(sum(values))
    except OverflowError:
        return False


def _in_float_range(value):
    if isinstance(value, int) and not isinstance(value, bool):
        try:
            float(value)
        except OverflowError:
            return math.inf if value > 0 else -math.inf
    return value


def float_values(values) -> np.ndarray:
    """A column (Series or sequence) as a new float array: numbers as floats, anything else NaN, and an int
    beyond the float range as +-inf (so a finite check names it) rather than an OverflowError."""
    try:
        return pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    except OverflowError:
        cleaned = [_in_float_range(value) for value in values]
        return pd.to_numeric(pd.Series(cleaned, dtype=object), errors="coerce").to_numpy(dtype=float,
                                                                                        na_value=np.nan)
