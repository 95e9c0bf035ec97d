"""Plackett-Burman screening designs (12, 20 and 24 runs).

Plackett & Burman (1946), "The design of optimum multifactorial experiments", *Biometrika* 33(4) 305-325,
build an N-run two-level design from one generator row of N - 1 signs: the other rows are its cyclic shifts,
and a last row has every factor at its low level. The generator rows below are the published ones as recalled
(from memory); the test suite confirms by construction that every design here has orthogonal columns
(XᵀX = N·I), which is the property that matters.
"""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import Design, _check_count
from ._factors import as_factors
from ._splitplot_checks import refuse_hard_to_change

#: Generator rows (first row of the cyclic part), "+" high and "-" low.
GENERATORS = {
    12: "++-+++---+-",
    20: "++--++++-+-+----++-",
    24: "+++++-+-++--++--+-+----",
}


def plackett_burman_matrix(runs: int) -> np.ndarray:
    """The N x (N-1) coded Plackett-Burman matrix for N in 12, 20, 24."""
    if runs not in GENERATORS:
        raise LevelwiseError(
            f"The 'runs' parameter of plackett_burman must be one of {sorted(GENERATORS)}. Got {describe(runs)}."
        )
    row = np.array([1.0 if c == "+" else -1.0 for c in GENERATORS[runs]])
    rows = [np.roll(row, shift) for shift in range(runs - 1)]
    rows.append(-np.ones(runs - 1))
    return np.array(rows)


def plackett_burman(factors, runs=None, center_points=0, randomize=True, seed=None) -> Design:
    """Plackett-Burman screening design for up to 23 factors.

    Parameters
    ----------
    factors : list of Factor or int
        Up to runs - 1 factors; they take the first columns of the design.
    runs : {12, 20, 24}, optional
        Default: the smallest of 12, 20, 24 with more runs than factors.
    center_points : int, default 0
        Centre runs added after the design (continuous factors only).
    randomize, seed
        Seeded randomisation of the run order.

    Returns
    -------
    Design
        Not a regular fraction: main effects are partially aliased with two-factor interactions (use
        :func:`levelwise.evaluate` for the alias matrix).

    Examples
    --------
    >>> d = plackett_burman(7, randomize=False)
    >>> len(d), d.kind
    (12, 'Plackett-Burman')
    """
    factors = as_factors(factors)
    refuse_hard_to_change(factors, "plackett_burman")
    k = len(factors)
    center_points = _check_count(center_points, "center_points", 0)
    if runs is None:
        fitting = [n for n in sorted(GENERATORS) if n - 1 >= k]
        if not fitting:
            raise LevelwiseError(f"plackett_burman handles up to 23 factors (24 runs). Got {k} factors.")
        runs = fitting[0]
    matrix = plackett_burman_matrix(runs)
    if k > runs - 1:
        raise LevelwiseError(
            f"The 'runs' parameter ({runs}) is too small for {k} factors: a {runs}-run Plackett-Burman design "
            f"takes at most {runs - 1} factors."
        )
    for f in factors:
        if f.is_categorical and len(f.levels) != 2:
            raise LevelwiseError(f"Factor {f.name!r} must have exactly 2 levels in a Plackett-Burman design.")
    if center_points and any(f.is_categorical for f in factors):
        raise LevelwiseError("The 'center_points' parameter must be 0 when a factor is categorical.")
    coded = np.vstack([matrix[:, :k], np.zeros((center_points, k))])
    role = ["corner"] * runs + ["centre"] * center_points
    return Design(factors, coded, role, randomize=randomize, seed=seed, kind="Plackett-Burman",
                  metadata={"generator_row": GENERATORS[runs]})


__all__ = ["plackett_burman", "plackett_burman_matrix"]
