"""General (mixed-level) full factorial designs: every combination of the factors' levels.

A factor's levels are its categorical levels, or ``n_levels`` equally spaced settings of a continuous factor
(two, -1 and +1, when ``n_levels`` is not given). Runs are listed in standard order, first factor changing
fastest, as in the two-level designs.

Blocks
------
Whole replicates can be blocks (``blocks`` divides ``replicates``). Otherwise, for ``blocks = s^b`` with s
prime, each replicate is split by b independent linear combinations, modulo s, of the level indices of the
factors that have exactly s levels: the runs with equal values of the combinations form a block. The block
contrasts are then confounded with interaction components of those factors only, and the search picks the
generators whose combinations involve as many factors as possible (the classic 3^k in 3 blocks takes
x1 + x2 + ... + xk mod 3). A main effect is never confounded with blocks.

Centre runs
-----------
``center_points`` runs sit at coded 0 in every continuous factor. When the design has categorical factors
(which have no centre), that many centre runs are made at each combination of their levels, so that the
curvature test of the ANOVA can compare the centre with the corners within each combination.
"""

from __future__ import annotations

import itertools

import numpy as np

from .._errors import LevelwiseError
from ._design import Design, _check_count
from ._factors import as_factors
from ._splitplot_checks import refuse_hard_to_change

#: Run count above which a full factorial is refused (a typo such as replicates=10**6 must not hang the kernel).
MAX_RUNS = 1_000_000

CORNER_ROLE = "corner"  # every continuous factor at low or high, every categorical factor two-level
GRID_ROLE = "grid"  # a general factorial run that is not a two-level corner
CENTRE_ROLE = "centre"


def level_counts(factors) -> list[int]:
    """Number of levels of each factor in a full factorial (2 for a continuous factor without ``n_levels``)."""
    return [f.level_count or 2 for f in factors]


def needs_general(factors, center_points=0) -> bool:
    """True when a full factorial of *factors* is not a plain two-level one (the two-level builder's domain)."""
    counts = level_counts(factors)
    categorical = any(f.is_categorical for f in factors)
    return any(c != 2 for c in counts) or bool(center_points and categorical)


def _is_prime(s: int) -> bool:
    return s >= 2 and all(s % d for d in range(2, int(s**0.5) + 1))


def _prime_power(blocks: int):
    """(s, b) with blocks = s^b, s prime; None otherwise."""
    for s in range(2, blocks + 1):
        if _is_prime(s) and blocks % s == 0:
            b, rest = 0, blocks
            while rest % s == 0:
                rest //= s
                b += 1
            return (s, b) if rest == 1 else None
    return None


def _span(generators: np.ndarray, s: int) -> np.ndarray:
    """Every nonzero combination of the generator rows modulo s."""
    b, m = generators.shape
    rows = []
    for coef in itertools.product(range(s), repeat=b):
        if any(coef):
            rows.append(np.asarray(coef) @ generators % s)
    return np.array(rows).reshape(-1, m)


def block_generators(m: int, s: int, b: int) -> np.ndarray:
    """b generator vectors over GF(s) on m factors: every nonzero combination involves >= 2 factors, and the
    smallest number of factors involved is as large as possible (then fewest combinations at that size)."""
    if b > m - 1 and not (b == 1 and m >= 2):
        raise LevelwiseError(
            f"The 'blocks' parameter ({s}^{b} = {s**b}) is too large: {m} factor(s) with {s} levels cannot carry "
            f"{b} block generator(s) without confounding a main effect with blocks."
        )
    # Vectors normalised to a leading 1 (one per one-dimensional subspace).
    vectors = [np.asarray(v) for v in itertools.product(range(s), repeat=m) if any(v) and v[next(
        i for i, x in enumerate(v) if x)] == 1]
    vectors.sort(key=lambda v: -int(np.count_nonzero(v)))
    best, best_score = None, None
    tried = 0
    for combo in itertools.combinations(range(len(vectors)), b):
        tried += 1
        if tried > 20000:
            break
        gens = np.array([vectors[i] for i in combo])
        span = _span(gens, s)
        if (span == 0).all(axis=1).any():
            continue  # dependent generators
        weights = np.count_nonzero(span, axis=1)
        score = (int(weights.min()), -int((weights == weights.min()).sum()))
        if best_score is None or score > best_score:
            best, best_score = gens, score
    if best is None or best_score[0] < 2:
        raise LevelwiseError(
            f"The 'blocks' parameter ({s**b}) is too large for {m} factor(s) with {s} levels: a main effect would be "
            "confounded with blocks. Use fewer blocks, or blocks that hold whole replicates."
        )
    return best


def general_factorial(factors, center_points=0, replicates=1, blocks=1, randomize=True, seed=None) -> Design:
    """Full factorial over any mix of level counts (see the module docstring).

    Parameters
    ----------
    factors : list of Factor or int
        Categorical factors with any number of levels; continuous factors with ``n_levels`` equally spaced
        settings (two when not given).
    center_points : int, default 0
        Runs at coded 0 in every continuous factor, added once (not per replicate); with categorical factors,
        that many at each combination of their levels. Refused when no factor is continuous.
    replicates : int, default 1
    blocks : int, default 1
        Whole replicates per block when it divides *replicates*; else a prime power s^b confounded with
        interaction components of the s-level factors.
    randomize : bool, default True
    seed : int, optional

    Returns
    -------
    Design
        ``metadata`` holds ``levels`` (level count per factor) and, when blocks split replicates,
        ``block_generators`` (each a dict factor -> coefficient, modulo ``block_modulus``).

    Examples
    --------
    >>> from levelwise import Factor
    >>> d = general_factorial([Factor("Supplier", levels=["a", "b", "c"]), Factor("T", 150, 200, n_levels=3)],
    ...                       randomize=False)
    >>> len(d), d.table["Supplier"].tolist()[:4], d.table["T"].tolist()[:4]
    (9, ['a', 'b', 'c', 'a'], [150.0, 150.0, 150.0, 175.0])
    """
    factors = as_factors(factors)
    refuse_hard_to_change(factors, "general_factorial (a full factorial with more than two levels)")
    center_points = _check_count(center_points, "center_points", 0)
    replicates = _check_count(replicates, "replicates", 1)
    blocks = _check_count(blocks, "blocks", 1)
    counts = level_counts(factors)
    k = len(factors)
    cells = int(np.prod(counts, dtype=object))
    categorical = [j for j, f in enumerate(factors) if f.is_categorical]
    continuous = [j for j in range(k) if j not in categorical]
    if center_points and not continuous:
        raise LevelwiseError(
            f"The 'center_points' parameter must be 0 when every factor is categorical (a categorical factor has "
            f"no centre). Got center_points={center_points}."
        )
    cat_cells = int(np.prod([counts[j] for j in categorical], dtype=object)) if categorical else 1
    total = cells * replicates + center_points * cat_cells
    if total > MAX_RUNS:
        raise LevelwiseError(
            f"The design would have {total} runs; the limit is {MAX_RUNS:,}. Check the factors' levels {counts}, "
            f"'replicates' ({replicates}) and 'center_points' ({center_points})."
        )
    # Level indices in standard order, first factor fastest.
    index = np.array([row[::-1] for row in itertools.product(*[range(c) for c in counts[::-1]])], dtype=int)
    index = index.reshape(cells, k)
    grids = [np.array(f.coded_levels or (-1.0, 1.0)) for f in factors]
    coded_cells = np.column_stack([grids[j][index[:, j]] for j in range(k)])
    corner = np.all(np.abs(np.abs(coded_cells[:, continuous]) - 1.0) < 1e-12, axis=1) & all(
        counts[j] == 2 for j in categorical)
    roles_cells = np.where(corner, CORNER_ROLE, GRID_ROLE).astype(object)
    meta = {"levels": {f.name: counts[j] for j, f in enumerate(factors)}}
    # Blocks within each replicate.
    if blocks == 1 or replicates % blocks == 0:
        cell_block = np.zeros(cells, dtype=int)
        if blocks > 1:
            meta["blocks_hold"] = "whole replicates"
        replicate_block = [r * blocks // replicates for r in range(replicates)]
    else:
        found = _prime_power(blocks)
        users = [j for j in range(k) if found and counts[j] == found[0]]
        if found is None or replicates != 1 or len(users) < 2:
            raise LevelwiseError(
                f"The 'blocks' parameter ({blocks}) must divide 'replicates' ({replicates}) (whole replicates per "
                "block), or be a power s^b of a prime s with replicates=1 and at least two factors at s levels "
                f"(level counts here: {counts})."
            )
        s, b = found
        gens = block_generators(len(users), s, b)
        values = index[:, users] @ gens.T % s
        cell_block = values @ (s ** np.arange(b))
        replicate_block = [0]
        meta["block_modulus"] = s
        meta["block_generators"] = [
            {factors[users[i]].name: int(c) for i, c in enumerate(g) if c} for g in gens
        ]
    coded_parts, role_parts, block_parts, std_parts = [], [], [], []
    for r in range(replicates):
        coded_parts.append(coded_cells)
        role_parts.append(roles_cells)
        block_parts.append(cell_block + replicate_block[r] + 1)
        std_parts.append(np.arange(r * cells + 1, (r + 1) * cells + 1))
    if center_points:
        if categorical:
            cat_index = np.array([row[::-1] for row in itertools.product(
                *[range(counts[j]) for j in categorical[::-1]])], dtype=int).reshape(cat_cells, len(categorical))
        else:
            cat_index = np.zeros((1, 0), dtype=int)
        centre = np.zeros((center_points * cat_cells, k))
        for position, j in enumerate(categorical):
            centre[:, j] = np.tile(grids[j][cat_index[:, position]], center_points)
        n_blocks = int(max(b.max() for b in block_parts))
        centre_block = np.sort(np.resize(np.arange(1, n_blocks + 1), len(centre)))
        coded_parts.append(centre)
        role_parts.append(np.full(len(centre), CENTRE_ROLE, dtype=object))
        block_parts.append(centre_block)
        start = cells * replicates
        std_parts.append(np.arange(start + 1, start + len(centre) + 1))
    coded = np.vstack(coded_parts)
    roles = np.concatenate(role_parts)
    block = np.concatenate(block_parts)
    std = np.concatenate(std_parts)
    order = np.argsort(block, kind="stable")
    return Design(factors, coded[order], roles[order], block[order], randomize=randomize, seed=seed,
                  standard_order=std[order], kind="general full factorial", metadata=meta)


__all__ = ["general_factorial", "needs_general"]
