"""Definitive screening designs from conference matrices, and the alias structure among second-order terms.

Construction (Jones & Nachtsheim 2011, J. Quality Technology 43(1) 1-15; the conference-matrix form of
Xiao, Lin & Bai 2012, J. Quality Technology 44(1) 2-8): with C a conference matrix of order m,

    D = [C; -C; 0]   (2m + 1 runs, levels -1, 0, +1)

and k factors take k columns of C. m = k for even k; for odd k, m = k + 1 and one column is dropped (2k + 3
runs). Where no conference matrix of that order exists (order 22) the next shipped order is used and more
columns are dropped. Because each run has its mirror image (the fold-over), every main effect is orthogonal to
every two-factor interaction and to every (centred) pure quadratic; C'C = (m - 1) I makes the main effects
orthogonal to each other.

Two-level categorical factors (Jones & Nachtsheim 2013, J. Quality Technology 45(2) 121-129; the variant
that keeps the fold-over, from memory): a categorical factor takes a column of C whose single zero becomes +1
in C and -1 in -C, and the one centre run becomes two runs with the continuous factors at 0 and every
categorical factor at its first level in one and its second level in the other (2m + 2 runs). Every main
effect stays orthogonal to every second-order term; a categorical main effect is then slightly correlated
with each continuous main effect (|r| = 1 / sqrt(m^2 - 1), e.g. 0.0709 for m = 14).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ._conference import SHIPPED_ORDERS, conference_matrix
from ._design import Design, _check_count
from ._factors import as_factors
from ._splitplot_checks import refuse_hard_to_change

FOLD_ROLE = "fold_pair"
CENTRE_ROLE = "centre"


def conference_order(columns: int) -> int:
    """The order of the conference matrix used for *columns* design columns: the smallest shipped order >= the
    columns rounded up to even."""
    wanted = columns + (columns % 2)
    for order in SHIPPED_ORDERS:
        if order >= wanted:
            return order
    raise LevelwiseError(
        f"A definitive screening design is built here for up to {SHIPPED_ORDERS[-1]} factors. Got {columns}."
    )


def definitive_screening(factors, extra_centre_runs: int = 0, randomize: bool = True, seed=None) -> Design:
    """Definitive screening design (see the module docstring).

    Parameters
    ----------
    factors : list of Factor or int
        Continuous factors (set at low, centre and high; ``n_levels`` must be None or 3) and categorical
        factors with exactly 2 levels. At least 2 factors, one of them continuous.
    extra_centre_runs : int, default 0
        Runs added at the centre of the continuous factors (categorical factors alternate their levels).
    randomize : bool, default True
    seed : int, optional

    Returns
    -------
    Design
        Roles ``fold_pair`` and ``centre``; ``metadata`` holds ``conference_order``, ``columns_dropped`` and
        ``categorical_factors``.

    Examples
    --------
    >>> d = definitive_screening(6, randomize=False)
    >>> len(d), sorted(set(d.coded["A"]))
    (13, [-1.0, 0.0, 1.0])
    """
    factors = as_factors(factors)
    refuse_hard_to_change(factors, "definitive_screening")
    extra = _check_count(extra_centre_runs, "extra_centre_runs", 0)
    for f in factors:
        if f.is_categorical and len(f.levels) != 2:
            raise LevelwiseError(
                f"Factor {f.name!r} has {len(f.levels)} levels; a definitive screening design takes continuous "
                "factors and categorical factors with exactly 2 levels."
            )
        if not f.is_categorical and f.n_levels not in (None, 3):
            raise LevelwiseError(
                f"Factor {f.name!r} has n_levels={f.n_levels}; a definitive screening design sets continuous "
                "factors at 3 levels (n_levels None or 3)."
            )
    continuous = [j for j, f in enumerate(factors) if not f.is_categorical]
    categorical = [j for j, f in enumerate(factors) if f.is_categorical]
    if len(factors) < 2 or not continuous:
        raise LevelwiseError(
            f"A definitive screening design needs at least 2 factors, one of them continuous. Got "
            f"{describe([f.name for f in factors])}."
        )
    k = len(factors)
    m = conference_order(k)
    C = conference_matrix(m)
    # Continuous factors take the first columns, categorical factors the next ones; the rest are dropped.
    column_of = {j: position for position, j in enumerate(continuous + categorical)}
    top = np.column_stack([C[:, column_of[j]] for j in range(k)])
    bottom = -top
    for j in categorical:
        zero_row = column_of[j]  # C has its zero of column c in row c
        top[zero_row, j] = 1.0
        bottom[zero_row, j] = -1.0
    n_centre = (2 if categorical else 1) + extra
    centre = np.zeros((n_centre, k))
    for r in range(n_centre):
        for j in categorical:
            centre[r, j] = -1.0 if r % 2 == 0 else 1.0
    coded = np.vstack([top, bottom, centre])
    roles = np.array([FOLD_ROLE] * (2 * m) + [CENTRE_ROLE] * n_centre, dtype=object)
    meta = {
        "conference_order": m,
        "columns_dropped": m - k,
        "categorical_factors": [factors[j].name for j in categorical],
        "extra_centre_runs": extra,
    }
    return Design(factors, coded, roles, None, randomize=randomize, seed=seed, kind="definitive screening",
                  metadata=meta)


@dataclass(frozen=True, eq=False)
class SecondOrderAliasing:
    """Correlations of the main effects and second-order terms of a design (see :func:`second_order_aliasing`).

    Attributes
    ----------
    main_effects, second_order : tuple of str
        Term names: ``A``; ``A:B`` and ``A^2`` (pure quadratics of factors set at 3 or more levels).
    correlation : pandas.DataFrame
        Correlation among the second-order terms (columns centred; NaN for a constant column).
    main_vs_second_order : pandas.DataFrame
        Correlation of each main effect (rows) with each second-order term (columns).
    max_abs_main_vs_second_order : float
        0 when every main effect is clear of every second-order term.
    max_abs_among_second_order : float
        Largest |r| between two different second-order terms (1 means a pair cannot be told apart).
    confounded_pairs : tuple of (str, str)
        Pairs of second-order terms with |r| = 1 (to 1e-9).
    """

    main_effects: tuple
    second_order: tuple
    correlation: pd.DataFrame
    main_vs_second_order: pd.DataFrame
    max_abs_main_vs_second_order: float
    max_abs_among_second_order: float
    confounded_pairs: tuple


def _correlation(A: np.ndarray, B: np.ndarray) -> np.ndarray:
    A = A - A.mean(axis=0)
    B = B - B.mean(axis=0)
    na, nb = np.linalg.norm(A, axis=0), np.linalg.norm(B, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        R = (A.T @ B) / np.outer(na, nb)
    R[np.abs(R) < 1e-12] = 0.0
    return R


def second_order_aliasing(design: Design) -> SecondOrderAliasing:
    """The alias structure among the second-order terms of *design* (any design with coded -1..+1 columns).

    Two-factor interactions of every pair of factors, and pure quadratics of the factors the design sets at
    3 or more levels (categorical factors with more than 2 levels are left out: they have no single column).
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    keep = [j for j, f in enumerate(design.factors) if not (f.is_categorical and len(f.levels) > 2)]
    names = [design.factors[j].name for j in keep]
    X = design.coded.to_numpy(dtype=float)[:, keep]
    main = X
    cols, labels = [], []
    for a, b in itertools.combinations(range(len(keep)), 2):
        cols.append(X[:, a] * X[:, b])
        labels.append(f"{names[a]}:{names[b]}")
    for a in range(len(keep)):
        if len(np.unique(X[:, a])) >= 3:
            cols.append(X[:, a] ** 2)
            labels.append(f"{names[a]}^2")
    second = np.column_stack(cols) if cols else np.zeros((len(X), 0))
    among = _correlation(second, second)
    cross = _correlation(main, second)
    off = among.copy()
    np.fill_diagonal(off, 0.0)
    pairs = tuple((labels[i], labels[j]) for i, j in zip(*np.nonzero(np.abs(np.triu(off, 1)) > 1 - 1e-9)))
    return SecondOrderAliasing(
        main_effects=tuple(names),
        second_order=tuple(labels),
        correlation=pd.DataFrame(among, index=labels, columns=labels),
        main_vs_second_order=pd.DataFrame(cross, index=names, columns=labels),
        max_abs_main_vs_second_order=float(np.nanmax(np.abs(cross))) if cross.size else 0.0,
        max_abs_among_second_order=float(np.nanmax(np.abs(off))) if off.size else 0.0,
        confounded_pairs=pairs,
    )


__all__ = ["SecondOrderAliasing", "conference_order", "definitive_screening", "second_order_aliasing"]
