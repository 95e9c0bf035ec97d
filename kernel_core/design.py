"""Designed experiments: the :class:`Design` object and two-level full factorials."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd

from ._errors import LevelwiseError, describe
from .factors import Factor, as_factors

#: Columns that come before the factor columns in :attr:`Design.table`.
META_COLUMNS = ("run", "std_order", "block", "point_type")


def _check_count(value, parameter: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be an integer >= {minimum}. Got {describe(value)} instead."
        )
    return int(value)


class Design:
    """A planned set of runs.

    Attributes
    ----------
    factors : tuple of Factor
        The factors, in column order.
    table : pandas.DataFrame
        One row per run in run (randomised) order, with columns ``run``,
        ``std_order``, ``block``, ``point_type`` and one column per factor in
        natural units.
    coded : pandas.DataFrame
        The same runs in coded units (-1 at low, +1 at high), one column per factor.
    """

    def __init__(self, factors, coded: np.ndarray, point_type, block=None, *, randomize=True, seed=None):
        self.factors = as_factors(factors)
        coded = np.asarray(coded, dtype=float)
        n = coded.shape[0]
        point_type = np.asarray(point_type, dtype=object)
        block = np.ones(n, dtype=int) if block is None else np.asarray(block, dtype=int)
        std_order = np.arange(1, n + 1)
        order = np.arange(n)
        if randomize:
            rng = np.random.default_rng(seed)
            # Randomise within each block, blocks kept in sequence.
            order = np.concatenate([rng.permutation(np.flatnonzero(block == b)) for b in np.unique(block)])
        natural = {f.name: f.to_natural(coded[order, j]) for j, f in enumerate(self.factors)}
        self.table = pd.DataFrame(
            {
                "run": np.arange(1, n + 1),
                "std_order": std_order[order],
                "block": block[order],
                "point_type": point_type[order],
                **natural,
            }
        )
        self.coded = pd.DataFrame(coded[order], columns=[f.name for f in self.factors])

    @property
    def factor_names(self) -> list[str]:
        return [f.name for f in self.factors]

    def __len__(self) -> int:
        return len(self.table)

    def __repr__(self) -> str:
        return f"<Design: {len(self)} runs, factors {self.factor_names}>"


def full_factorial(factors, center_points=0, replicates=1, randomize=True, seed=None) -> Design:
    """Two-level full factorial design.

    Parameters
    ----------
    factors : list of Factor or int
        The factors; an integer k gives factors A, B, C, ... coded -1 to +1.
    center_points : int, default 0
        Runs at the centre of the region, added once (not per replicate).
    replicates : int, default 1
        Number of times the 2^k corner runs are repeated.
    randomize : bool, default True
        Put the runs in random order (seeded by *seed*).
    seed : int, optional
        Seed for a reproducible run order.

    Returns
    -------
    Design

    Examples
    --------
    >>> d = full_factorial(3, center_points=2, randomize=False)
    >>> len(d), list(d.table.point_type[-2:])
    (10, ['center', 'center'])
    """
    factors = as_factors(factors)
    center_points = _check_count(center_points, "center_points", 0)
    replicates = _check_count(replicates, "replicates", 1)
    k = len(factors)
    if k > 15:
        raise LevelwiseError(f"A full factorial is limited to 15 factors here. Got {k} factors instead.")
    if 2**k * replicates + center_points > 1_000_000:  # a typo such as replicates=10**6 must not hang the kernel
        raise LevelwiseError(
            f"The design would have {2**k * replicates + center_points} runs; the limit is 1,000,000. "
            f"Check 'replicates' ({replicates}) and 'center_points' ({center_points})."
        )
    # Standard (Yates) order: the first factor alternates fastest.
    corners = np.array([row[::-1] for row in itertools.product((-1.0, 1.0), repeat=k)])
    coded = np.vstack([corners] * replicates + [np.zeros((center_points, k))])
    point_type = ["factorial"] * (len(corners) * replicates) + ["center"] * center_points
    return Design(factors, coded, point_type, randomize=randomize, seed=seed)


__all__ = ["Design", "Factor", "full_factorial", "META_COLUMNS"]
