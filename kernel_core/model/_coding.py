"""Coding of factor settings: centre and half-range per continuous factor, sum-to-zero contrasts for
categorical ones, and the expansion of terms with categorical factors into model columns."""

from __future__ import annotations

from dataclasses import dataclass
from itertools import product

import numpy as np

from .._errors import LevelwiseError, describe
from ._formula import ModelSpec, term_name


@dataclass(frozen=True)
class Coding:
    """Centre and half-range per factor: coded = (natural - center) / scale."""

    names: tuple
    center: np.ndarray
    scale: np.ndarray
    low: np.ndarray
    high: np.ndarray

    def to_coded(self, natural: np.ndarray) -> np.ndarray:
        return (natural - self.center) / self.scale



def sum_to_zero(levels: int) -> np.ndarray:
    """(L, L-1) sum-to-zero contrast matrix: a row of -1 for the first level, then identity rows.

    For two levels this is -1 at the first level and +1 at the second, the coding of
    :meth:`Factor.to_coded` for a two-level categorical factor.
    """
    return np.vstack([-np.ones((1, levels - 1)), np.eye(levels - 1)])



def _coding_for(names, data_columns, factors, coding, categories) -> Coding:
    if coding not in ("auto", "none"):
        raise LevelwiseError(f"The 'coding' parameter must be 'auto' or 'none'. Got {describe(coding)} instead.")
    by_name = {f.name: f for f in factors or ()}
    center, scale, low, high = [], [], [], []
    for name, column in zip(names, data_columns):
        if name in categories:
            low.append(0.0)
            high.append(float(len(categories[name]) - 1))
            center.append(0.0)
            scale.append(1.0)
            continue
        if name in by_name and getattr(by_name[name], "low", None) is not None:
            lo, hi = by_name[name].low, by_name[name].high
        else:
            finite = column[np.isfinite(column)]
            lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 0.0)
        low.append(lo)
        high.append(hi)
        if coding == "none" or hi <= lo:
            center.append(0.0)
            scale.append(1.0)
        else:
            center.append((lo + hi) / 2.0)
            scale.append((hi - lo) / 2.0)
    arr = lambda v: np.asarray(v, dtype=float)  # noqa: E731
    return Coding(tuple(names), arr(center), arr(scale), arr(low), arr(high))


def _expand(spec: ModelSpec, names, categories, contrasts):
    """Expand term-level *spec* into model columns over the coded variables.

    Returns (column spec, groups, group exponents). A term with a categorical factor of L levels
    becomes L-1 columns (times those of any other categorical factor in it).
    """
    var_names, var_of = [], []
    for j, name in enumerate(names):
        if contrasts[j] is None:
            var_of.append([len(var_names)])
            var_names.append(name)
        else:
            var_of.append(list(range(len(var_names), len(var_names) + contrasts[j].shape[1])))
            var_names += [f"{name}[{level}]" for level in categories[name][1:]]
    rows, groups, group_exp = [], [], []
    for term_row, written in zip(spec.exponents, spec.terms):
        choices = []
        for j in np.flatnonzero(term_row):
            if contrasts[j] is None:
                choices.append([(var_of[j][0], int(term_row[j]))])
            elif term_row[j] > 1:
                raise LevelwiseError(
                    f"The model {spec.formula!r} raises categorical factor {names[j]!r} to a power; "
                    "only continuous factors can have powers."
                )
            else:
                choices.append([(v, 1) for v in var_of[j]])
        start = len(rows)
        for combo in product(*choices):
            row = np.zeros(len(var_names), dtype=int)
            for v, e in combo:
                row[v] = e
            rows.append(row)
        if term_row.any():
            groups.append((written, tuple(range(start, len(rows)))))
            group_exp.append(term_row)
    exponents = np.array(rows, dtype=int).reshape(len(rows), len(var_names))
    terms = tuple(term_name(row, var_names) for row in exponents)
    column_spec = ModelSpec(formula=spec.formula, factor_names=tuple(var_names), exponents=exponents, terms=terms)
    return column_spec, groups, np.array(group_exp, dtype=int).reshape(len(group_exp), len(names))


def encode(natural: np.ndarray, center: np.ndarray, scale: np.ndarray, contrasts: tuple = ()) -> np.ndarray:
    """Map natural settings (m, k) to the model's coded variables.

    Continuous factors become ``(x - center) / scale``. A categorical factor's column holds
    the index of its level, which becomes a row of its contrast matrix (``contrasts[j]``, an
    (L, L-1) array); ``contrasts`` is empty when every factor is continuous (the fast path).
    """
    natural = np.atleast_2d(np.asarray(natural, dtype=float))
    if not contrasts:
        coded = natural - center  # one new array, then divided in place (keeps *natural*'s memory layout)
        coded /= scale
        return coded
    parts = []
    for j, contrast in enumerate(contrasts):
        if contrast is None:
            parts.append(((natural[:, j] - center[j]) / scale[j])[:, None])
        else:
            parts.append(contrast[natural[:, j].astype(int)])
    return np.hstack(parts) if parts else np.empty((len(natural), 0))

