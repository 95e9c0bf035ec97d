"""Response-surface designs: central composite and Box-Behnken."""

from __future__ import annotations

import itertools
import math
import numbers

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import Design, _check_count
from ._factorial import basic_runs
from ._factors import as_factors
from ._splitplot_checks import refuse_hard_to_change


def _continuous(factors, what):
    for f in factors:
        if f.is_categorical:
            raise LevelwiseError(f"{what} needs continuous factors; factor {f.name!r} is categorical.")


def rotatable_alpha(cube_points: int) -> float:
    """Axial distance of a rotatable central composite design, F^(1/4) (Box & Hunter 1957)."""
    return float(cube_points) ** 0.25


def orthogonal_alpha(cube_points: int, k: int, center_points: int) -> float:
    """Axial distance making the pure quadratic columns orthogonal to each other.

    alpha^4 = F (sqrt(N) - sqrt(F))^2 / 4 with N = F + 2k + n0 (from memory; the tests check the property
    itself: the centred squared columns are orthogonal).
    """
    n = cube_points + 2 * k + center_points
    return (cube_points * (math.sqrt(n) - math.sqrt(cube_points)) ** 2 / 4.0) ** 0.25


def central_composite(factors, alpha="rotatable", kind="circumscribed", center_points=None, fraction=None,
                      randomize=True, seed=None) -> Design:
    """Central composite design: a two-level cube, 2k axial runs and centre runs.

    Parameters
    ----------
    factors : list of Factor or int
        Continuous factors, k >= 2.
    alpha : "rotatable", "orthogonal", "face" or float, default "rotatable"
        Axial distance in coded units of the cube: rotatable F^(1/4) (Box & Hunter 1957, F = cube runs);
        orthogonal (pure quadratic columns orthogonal); face = 1.
    kind : "circumscribed", "inscribed" or "face", default "circumscribed"
        circumscribed: cube at +-1, axial runs at +-alpha (beyond the factor limits);
        inscribed: the whole design scaled so the axial runs sit at +-1 (cube at +-1/alpha);
        face: alpha = 1, axial runs on the faces of the cube.
    center_points : int, optional
        Default 4 (common practice: a handful of centre runs estimates pure error and keeps the prediction
        variance near the centre moderate).
    fraction : int, optional
        p of a 2^(k-p) cube. Default: a full cube for k <= 4 and, for k >= 5, the smallest
        minimum-aberration fraction of resolution >= V. ``fraction=0`` forces the full cube.
    randomize, seed
        Seeded randomisation of the run order.

    Returns
    -------
    Design
        ``metadata["alpha"]`` holds the axial distance (in cube units) and ``metadata["cube"]`` the cube used.

    Examples
    --------
    >>> d = central_composite(3, center_points=6, randomize=False)
    >>> len(d), round(d.metadata["alpha"], 4)
    (20, 1.6818)
    """
    factors = as_factors(factors)
    refuse_hard_to_change(factors, "central_composite")
    _continuous(factors, "central_composite")
    k = len(factors)
    if k < 2:
        raise LevelwiseError(f"central_composite needs at least 2 factors. Got {k}.")
    center_points = 4 if center_points is None else _check_count(center_points, "center_points", 0)
    if kind not in ("circumscribed", "inscribed", "face"):
        raise LevelwiseError(
            f"The 'kind' parameter must be 'circumscribed', 'inscribed' or 'face'. Got {describe(kind)} instead."
        )
    if fraction is None:
        fraction_p = None if k >= 5 else 0
    else:
        fraction_p = _check_count(fraction, "fraction", 0)
        if fraction_p >= k - 1:
            raise LevelwiseError(f"The 'fraction' parameter must be below k - 1 = {k - 1}. Got {fraction_p}.")
    cube_meta = {}
    if fraction_p == 0:
        cube = basic_runs(k)
        cube_label = f"2^{k}"
    else:
        from ._fractional import fractional_factorial

        if fraction_p is None:
            frac = fractional_factorial(k, resolution=5, randomize=False)
        else:
            frac = fractional_factorial(k, runs=1 << (k - fraction_p), randomize=False)
            if (frac.resolution or 99) < 5:
                raise LevelwiseError(
                    f"A 2^({k}-{fraction_p}) cube has resolution {frac.resolution}; a central composite design "
                    "needs resolution V or more for the two-factor interactions. Use a smaller 'fraction'."
                )
        order = np.argsort(frac.table.standard_order.to_numpy())
        cube = frac.coded.to_numpy()[order]
        cube_label = f"2^({k}-{k - int(round(math.log2(len(cube))))})"
        cube_meta = {"cube_generators": frac.generators, "cube_resolution": frac.resolution}
    F = len(cube)
    if isinstance(alpha, str):
        if alpha == "rotatable":
            a = rotatable_alpha(F)
        elif alpha == "orthogonal":
            a = orthogonal_alpha(F, k, center_points)
        elif alpha == "face":
            a = 1.0
        else:
            raise LevelwiseError(
                "The 'alpha' parameter must be 'rotatable', 'orthogonal', 'face' or a positive number. "
                f"Got {alpha!r} instead."
            )
    elif isinstance(alpha, numbers.Real) and not isinstance(alpha, bool) and math.isfinite(alpha) and alpha > 0:
        a = float(alpha)
    else:
        raise LevelwiseError(
            "The 'alpha' parameter must be 'rotatable', 'orthogonal', 'face' or a positive number. "
            f"Got {describe(alpha)} instead."
        )
    if kind == "face":
        if alpha not in ("face", "rotatable") and not (isinstance(alpha, numbers.Real) and a == 1.0):
            raise LevelwiseError(f"kind='face' puts the axial runs at alpha = 1. Got alpha={alpha!r} as well.")
        a = 1.0
    axial = np.vstack([sign * a * np.eye(k)[i] for i in range(k) for sign in (-1.0, 1.0)])
    coded = np.vstack([cube, axial, np.zeros((center_points, k))])
    if kind == "inscribed":
        coded = coded / a
    role = ["corner"] * F + ["axial"] * (2 * k) + ["centre"] * center_points
    meta = {"alpha": a, "kind_of_ccd": kind, "cube": cube_label, "cube_points": F, **cube_meta}
    return Design(factors, coded, role, randomize=randomize, seed=seed, kind="central composite", metadata=meta)


#: Factor groups of the Box-Behnken designs: each group runs a 2^g factorial with the other factors at 0.
#: k = 3, 4, 5: every pair of factors (a balanced incomplete block design, Box & Behnken 1960).
#: k = 6: the six triples of Box & Behnken (1960), as recalled (from memory); every pair of factors appears in
#:        at least one triple (checked in the tests), three pairs twice - a partially balanced design.
#: k = 7: the seven triples of the balanced incomplete block design with 7 treatments in blocks of 3 (every pair
#:        exactly once, checked in the tests), as used by Box & Behnken (1960) (from memory).
BB_GROUPS = {
    3: list(itertools.combinations(range(3), 2)),
    4: list(itertools.combinations(range(4), 2)),
    5: list(itertools.combinations(range(5), 2)),
    6: [(0, 1, 3), (1, 2, 4), (2, 3, 5), (0, 3, 4), (1, 4, 5), (0, 2, 5)],
    7: [(3, 4, 5), (0, 5, 6), (1, 4, 6), (0, 1, 3), (2, 3, 6), (0, 2, 4), (1, 2, 5)],
}

#: Default centre runs per k (common practice: 3 for k = 3, about k - 1 beyond, for pure error and a stable
#: prediction variance at the centre).
BB_DEFAULT_CENTER = {3: 3, 4: 3, 5: 4, 6: 5, 7: 6}


def box_behnken(factors, center_points=None, randomize=True, seed=None) -> Design:
    """Box-Behnken design for 3 to 7 continuous factors (Box & Behnken 1960, *Technometrics* 2(4) 455-475).

    Each group of factors (a block of an incomplete block design) runs a two-level factorial while the other
    factors sit at their centre; every run is at the middle of an edge (or face) of the cube, none at a corner.

    Parameters
    ----------
    factors : list of Factor or int
        3 to 7 continuous factors.
    center_points : int, optional
        Default 3, 3, 4, 5, 6 for k = 3..7 (common practice).
    randomize, seed
        Seeded randomisation of the run order.

    Returns
    -------
    Design
        12, 24, 40, 48, 56 runs for k = 3..7, plus the centre runs.

    Examples
    --------
    >>> len(box_behnken(3, center_points=0))
    12
    """
    factors = as_factors(factors)
    refuse_hard_to_change(factors, "box_behnken")
    _continuous(factors, "box_behnken")
    k = len(factors)
    if k not in BB_GROUPS:
        raise LevelwiseError(f"box_behnken handles 3 to 7 factors. Got {k} factor(s).")
    center_points = BB_DEFAULT_CENTER[k] if center_points is None else _check_count(center_points,
                                                                                      "center_points", 0)
    rows = []
    for group in BB_GROUPS[k]:
        square = basic_runs(len(group))
        block = np.zeros((len(square), k))
        block[:, list(group)] = square
        rows.append(block)
    coded = np.vstack(rows + [np.zeros((center_points, k))])
    n_edge = len(coded) - center_points
    role = ["edge_midpoint"] * n_edge + ["centre"] * center_points
    return Design(factors, coded, role, randomize=randomize, seed=seed, kind="Box-Behnken",
                  metadata={"groups": [[factors[j].name for j in g] for g in BB_GROUPS[k]]})


__all__ = ["box_behnken", "central_composite", "orthogonal_alpha", "rotatable_alpha"]
