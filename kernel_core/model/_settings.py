"""The one settings check of the prediction engine (see :mod:`levelwise.model._engine` for the rule).

A setting is a dict ``{factor: value}`` (natural units; a level for a categorical factor) or a table
(a DataFrame, or a dict of equal-length lists). Every factor the model uses must be given, except the
factor(s) a trace or slice sweeps; a factor the fit knows but the model does not use may be left out.
A dict naming something that is not a factor of the fit is refused; a DataFrame may carry other columns.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._numbers import finite_number, finite_sum
from ._inputs import _level_indices, _numeric_column

_PLAIN_TYPES = frozenset((int, float, np.float64, np.float32, np.int64, np.int32))
_BLANK = object()


def check_points(points) -> int:
    """``points`` of a trace: an integer from 2 to 100000 (the one rule for every call)."""
    if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not 2 <= points <= 100_000:
        raise LevelwiseError(
            f"The 'points' parameter must be an integer from 2 to 100000. Got {describe(points)} instead."
        )
    return int(points)


def check_shape(shape) -> tuple:
    """``shape`` of a slice: a pair of integers (nx, ny), each >= 2."""
    if type(shape) is tuple and len(shape) == 2 and type(shape[0]) is int and type(shape[1]) is int \
            and shape[0] >= 2 and shape[1] >= 2:
        return shape
    try:
        nx, ny = (int(v) for v in shape)
        ok = nx >= 2 and ny >= 2 and (nx, ny) == tuple(shape) and not any(isinstance(v, bool) for v in shape)
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise LevelwiseError(
            f"The 'shape' parameter must be a pair of integers (nx, ny), each >= 2. Got {describe(shape)} instead."
        )
    return nx, ny


class SettingsCheck:
    """The settings check of :class:`~levelwise.model._engine.PredictionEngine` (a mixin).

    Reads the engine's ``factor_names``, ``k``, ``categories``, ``used``, ``center``, ``_index``,
    ``_required`` and ``_defaults``.
    """

    def _refuse_names(self, names):
        unknown = [str(key) for key in names if key not in self._index]
        if unknown:
            raise LevelwiseError(
                f"The 'settings' parameter names {unknown}, which the fit does not have; its factors are "
                f"{list(self.factor_names)}."
            )

    def _refuse_missing(self, given, free=()):
        missing = [name for name in self._required if name not in given and name not in free]
        if missing:
            raise LevelwiseError(
                f"The 'settings' parameter is missing factor(s) {missing}; it must give every factor the model "
                f"uses {list(self._required)}."
            )

    def vector(self, settings, free=()) -> np.ndarray:
        """One setting ``{factor: value}`` checked into a (k,) array (level indices for categorical factors).

        Factors in *free* (swept by a trace or slice) may be left out. Checked by hand, without
        pandas: this runs on every slider event.
        """
        if not isinstance(settings, dict):
            raise LevelwiseError(
                "The 'settings' parameter must be a dict of factor -> natural setting. "
                f"Got {describe(settings)} instead."
            )
        if not self.categories and len(settings) == self.k:
            try:
                row = list(map(settings.__getitem__, self.factor_names))
            except KeyError:
                row = None
            # Plain numbers whose sum is finite are each finite (an overflowing sum just takes the checks below).
            if row is not None and _PLAIN_TYPES.issuperset(map(type, row)) and finite_sum(row):
                return np.array(row, dtype=float)
        self._refuse_names(settings)
        self._refuse_missing(settings, free)
        vector = np.empty(self.k)
        for j, name in enumerate(self.factor_names):
            value = settings.get(name, _BLANK)
            if name in self.categories:
                if value is _BLANK:
                    vector[j] = 0.0
                    continue
                index = _level_indices([value], name, self.categories[name], "setting")[0]
                if np.isnan(index):
                    raise LevelwiseError(
                        f"The setting for categorical factor {name!r} must be one of its levels "
                        f"{list(self.categories[name])}. Got {describe(value)} instead."
                    )
                vector[j] = index
                continue
            if value is _BLANK:
                vector[j] = self._defaults[j]
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
                    or not finite_number(value):
                raise LevelwiseError(
                    f"The setting for factor {name!r} must be a finite number. Got {describe(value)} instead."
                )
            vector[j] = value
        return vector

    def table(self, settings) -> np.ndarray:
        """Settings as a dict (one setting), a dict of equal-length lists or a DataFrame -> (m, k) array."""
        return self.columns(settings).T

    def table_columns(self, settings) -> np.ndarray:
        """:meth:`columns` for a table to predict at: a DataFrame of exactly the fit's factors (in order, all
        float64, all finite) comes back as a read-only (k, m) view of its values, not a copy (its rows may
        then be strided). Anything else, or an engine with its own :meth:`columns`, goes through that."""
        if type(self).columns is SettingsCheck.columns and not self.categories \
                and isinstance(settings, pd.DataFrame) and tuple(settings.columns) == self.factor_names:
            values = settings.to_numpy()
            # A sum is finite only if every value is (an overflowing sum just takes the checked path).
            if values.dtype == np.float64 and math.isfinite(values.sum()):
                values = values.T.view()
                values.flags.writeable = False
                return values
        return self.columns(settings)

    def columns(self, settings) -> np.ndarray:
        """:meth:`table` laid out by factor: a (k, m) array, one contiguous row per factor."""
        if isinstance(settings, dict):
            if not any(isinstance(v, (list, tuple, np.ndarray, pd.Series)) for v in settings.values()):
                return self.vector(settings)[:, None]
            self._refuse_names(settings)
            columns = {key: np.atleast_1d(np.asarray(value, dtype=object)) for key, value in settings.items()}
            lengths = {len(v) for v in columns.values()} - {1}
            if len(lengths) > 1 or 0 in lengths or any(np.ndim(v) != 1 for v in columns.values()):
                raise LevelwiseError(
                    "The 'settings' values must be single numbers or lists of one common length. "
                    f"Got {describe(settings)} instead."
                )
            m = lengths.pop() if lengths else 1
            frame = pd.DataFrame({key: np.resize(v, m) if len(v) == 1 else v for key, v in columns.items()})
        elif isinstance(settings, pd.DataFrame):
            frame, m = settings, len(settings)
        else:
            raise LevelwiseError(
                "The 'settings' parameter must be a dict or DataFrame of factor settings in natural units. "
                f"Got {describe(settings)} instead."
            )
        self._refuse_missing(frame.columns)
        out = np.empty((self.k, m))
        for j, name in enumerate(self.factor_names):
            if not self.used[j] and name not in frame.columns:
                out[j] = 0.0 if name in self.categories else self.center[j]
            elif name in self.categories:
                out[j] = _level_indices(frame[name], name, self.categories[name], "settings")
            else:
                values = frame[name].to_numpy()
                out[j] = values if values.dtype.kind in "fiu" else _numeric_column(frame, name, "setting")
        bad = ~np.isfinite(out)
        if bad.any():
            col, row = np.argwhere(bad.T)[0][::-1]
            raise LevelwiseError(
                f"The setting for factor {self.factor_names[col]!r} in row {row + 1} must be a finite number. "
                f"Got {float(out[col, row])!r} instead."
            )
        return out
