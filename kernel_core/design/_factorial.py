"""Two-level factorials: the basic 2^m runs, block generators, the regular-design builder and full factorials."""

from __future__ import annotations

import itertools
import math

import numpy as np

from .._errors import LevelwiseError
from ._design import Design, _check_count
from ._factors import as_factors
from ._twolevel import popcount, span, structure_from_runs


def basic_runs(m: int) -> np.ndarray:
    """The 2^m full factorial in standard (Yates) order, first factor alternating fastest."""
    return np.array([row[::-1] for row in itertools.product((-1.0, 1.0), repeat=m)]).reshape(1 << m, m)


def column_of(basic: np.ndarray, mask: int) -> np.ndarray:
    """Product of the basic columns named by the bits of *mask*."""
    out = np.ones(basic.shape[0])
    for j in range(basic.shape[1]):
        if mask >> j & 1:
            out = out * basic[:, j]
    return out


def choose_block_generators(m: int, k: int, factor_columns, b: int) -> list[int]:
    """Block generators (masks over the m basic factors) for 2^b blocks.

    Each nonzero column c of the basic factorial carries an alias class of effects; the block contrasts
    (the span of the b generators) are chosen so that the lowest-order effect confounded with blocks is of
    the highest order available, then so that as few effects of that order as possible are confounded.
    Every set is tried when there are at most 6000; otherwise the best set of the heaviest columns is improved
    by a bounded exchange search (one generator at a time, all columns at once), which is not guaranteed to be
    optimal.
    *factor_columns* gives, for each factor j, its column as a mask over the basic factors.
    """
    if b == 0:
        return []
    if b >= m + 1 or (1 << b) > (1 << m) // 1:
        raise LevelwiseError(
            f"The 'blocks' parameter ({1 << b}) must be smaller than the number of distinct runs ({1 << m})."
        )
    # Column (mask over basic factors) of every effect (mask over the k factors).
    effects = np.arange(1 << k, dtype=np.int64) if k <= 16 else None
    if effects is None:
        raise LevelwiseError(f"Blocking is supported for up to 16 factors. Got {k} factors.")
    col = np.zeros(1 << k, dtype=np.int64)
    for j in range(k):
        has = (effects >> j) & 1 == 1
        col[has] ^= int(factor_columns[j])
    order = popcount(effects)
    ncols = 1 << m
    min_order = np.full(ncols, 10**6, dtype=np.int64)
    np.minimum.at(min_order, col[1:], order[1:])
    at_min = np.zeros(ncols, dtype=np.int64)
    np.add.at(at_min, col[1:], (order[1:] == min_order[col[1:]]).astype(np.int64))
    candidates = [c for c in range(1, ncols) if min_order[c] >= 2]
    candidates.sort(key=lambda c: (-min_order[c], at_min[c], c))
    limit = len(candidates)
    while limit > b and math.comb(limit, b) > 6000:
        limit -= 1

    def score(gens):
        elements = span(gens)[1:]
        if len(np.unique(elements)) != len(elements) or (elements == 0).any():
            return None
        orders = np.sort(min_order[elements])
        return (tuple(int(o) for o in orders), -int(at_min[elements][min_order[elements] == orders[0]].sum()))

    best, best_score = None, None
    for combo in itertools.combinations(candidates[:limit], b):
        sc = score(combo)
        if sc is not None and (best_score is None or sc > best_score):
            best, best_score = list(combo), sc
    if limit < len(candidates) and best is not None:
        # Too many sets to try them all: improve by exchanging one generator at a time for the best of every
        # column (vectorised), from the best of the heavy columns and from a few seeded random starts.
        everything = np.arange(1, ncols, dtype=np.int64)
        rng = np.random.default_rng(0)
        starts = [best] + [list(rng.choice(everything, size=b, replace=False)) for _ in range(4)]
        for gens in starts:
            gens = [int(g) for g in gens]
            current = score(gens)
            if current is None:
                continue
            for _ in range(20 * b):
                improved = False
                for i in range(b):
                    rest = gens[:i] + gens[i + 1 :]
                    rest_span = span(rest)
                    ok = ~np.isin(everything, rest_span)
                    cands = everything[ok]
                    new_elems = cands[:, None] ^ rest_span[None, :]
                    fixed = np.broadcast_to(min_order[rest_span[1:]], (len(cands), len(rest_span) - 1))
                    orders = np.sort(np.concatenate([min_order[new_elems], fixed], axis=1), axis=1)
                    low = orders[:, :1]
                    all_elems = np.concatenate([new_elems, np.broadcast_to(rest_span[1:], fixed.shape)], axis=1)
                    ties = ((min_order[all_elems] == low) * at_min[all_elems]).sum(axis=1)
                    keys = [ties] + [-orders[:, c] for c in range(orders.shape[1] - 1, -1, -1)]
                    top = int(np.lexsort(keys)[0])
                    trial = rest[:i] + [int(cands[top])] + rest[i:]
                    sc = score(trial)
                    if sc is not None and sc > current:
                        gens, current, improved = trial, sc, True
                if not improved:
                    break
            if current > best_score:
                best, best_score = gens, current
    if best is None or best_score[0][0] < 2:
        raise LevelwiseError(
            f"The 'blocks' parameter ({1 << b}) is too large for this design: a main effect would be confounded "
            f"with blocks. Use fewer blocks or more runs."
        )
    return best


def check_blocks(blocks) -> int:
    """Number of block generators b for ``blocks`` = 2^b."""
    blocks = _check_count(blocks, "blocks", 1)
    if blocks & (blocks - 1):
        raise LevelwiseError(f"The 'blocks' parameter must be a power of two (1, 2, 4, 8, ...). Got {blocks} instead.")
    return blocks.bit_length() - 1


def build_two_level(factors, m, gen_masks, gen_signs, *, center_points, replicates, blocks, randomize, seed,
                    kind, generators=None, metadata=None) -> Design:
    """Assemble a regular two-level design from m basic factors and generator masks (one per added factor)."""
    k = len(factors)
    for f in factors:
        if f.is_categorical and len(f.levels) != 2:
            raise LevelwiseError(
                f"Factor {f.name!r} has {len(f.levels)} levels; two-level designs take continuous factors "
                "or categorical factors with exactly 2 levels."
            )
    if center_points and any(f.is_categorical for f in factors):
        raise LevelwiseError(
            "The 'center_points' parameter must be 0 when a factor is categorical (a categorical factor has no "
            f"centre). Got center_points={center_points}."
        )
    b = check_blocks(blocks)
    basic = basic_runs(m)
    columns = [basic[:, j] for j in range(m)]
    columns += [sign * column_of(basic, mask) for mask, sign in zip(gen_masks, gen_signs)]
    corners = np.column_stack(columns)
    factor_columns = [1 << j for j in range(m)] + list(gen_masks)
    block_gens = choose_block_generators(m, k, factor_columns, b) if b else []
    block_cols = np.column_stack([column_of(basic, g) for g in block_gens]) if b else np.zeros((len(basic), 0))
    block_no = 1 + ((block_cols < 0).astype(int) * (1 << np.arange(b))).sum(axis=1) if b else np.ones(len(basic), int)
    structure = structure_from_runs(corners, [f.name for f in factors], block_cols if b else None, generators)
    n_corner = len(basic)
    coded = np.vstack([corners] * replicates)
    blk = np.concatenate([block_no] * replicates)
    std = np.arange(1, n_corner * replicates + 1)
    role = ["corner"] * len(coded)
    if center_points:
        per_block = np.resize(np.arange(1, (1 << b) + 1), center_points)
        coded = np.vstack([coded, np.zeros((center_points, k))])
        blk = np.concatenate([blk, np.sort(per_block)])
        std = np.concatenate([std, np.arange(len(std) + 1, len(std) + center_points + 1)])
        role += ["centre"] * center_points
    order = np.argsort(blk, kind="stable")
    meta = dict(metadata or {})
    if b:
        meta["block_generators"] = [
            "".join(f.name for j, f in enumerate(factors[:m]) if g >> j & 1)
            if all(len(f.name) == 1 for f in factors) else
            ":".join(f.name for j, f in enumerate(factors[:m]) if g >> j & 1)
            for g in block_gens
        ]
    return Design(factors, coded[order], np.asarray(role, dtype=object)[order], blk[order], randomize=randomize,
                  seed=seed, standard_order=std[order], kind=kind, structure=structure, metadata=meta)


def full_factorial(factors, center_points=0, replicates=1, blocks=1, randomize=True, seed=None) -> Design:
    """Full factorial design: two-level, or general (mixed-level) through ``levelwise._general_factorial``.

    Parameters
    ----------
    factors : list of Factor or int
        The factors; an integer k gives factors A, B, C, ... coded -1 to +1. A categorical factor with more
        than 2 levels, or a continuous factor with ``n_levels`` other than 2, makes a general full factorial
        (every combination of levels; see :func:`levelwise._general_factorial.general_factorial`).
    center_points : int, default 0
        Runs at the centre of the region, added once (not per replicate), spread evenly over the blocks.
    replicates : int, default 1
        Number of times the 2^k corner runs are repeated.
    blocks : int, default 1
        Number of blocks, a power of two. The block contrasts are confounded with the highest-order
        interactions available; :attr:`Design.block_confounded` names them.
    randomize : bool, default True
        Put the runs in random order within each block (seeded by *seed*).
    seed : int, optional
        Seed for a reproducible run order.

    Factors declared ``hard_to_change=True`` make a split-plot design: whole plots (a ``whole_plot`` column)
    are the settings of those factors times the replicates, and the randomisation is restricted (see
    ``levelwise.design._splitplot.split_plot_order``).

    Returns
    -------
    Design

    Raises
    ------
    LevelwiseError
        For more than 15 factors, a block count that is not a power of two, or so many blocks that a main
        effect would be confounded with blocks.

    Examples
    --------
    >>> d = full_factorial(3, center_points=2, randomize=False)
    >>> len(d), list(d.table.role[-2:])
    (10, ['centre', 'centre'])
    >>> full_factorial(3, blocks=2, randomize=False).block_confounded
    ['ABC']
    """
    factors = as_factors(factors)
    center_points = _check_count(center_points, "center_points", 0)
    replicates = _check_count(replicates, "replicates", 1)
    from ._general_factorial import general_factorial, needs_general

    if needs_general(factors, center_points):  # mixed levels, or centre runs with categorical factors
        return general_factorial(factors, center_points, replicates, blocks, randomize, seed)
    k = len(factors)
    if k > 15:
        raise LevelwiseError(f"A full factorial is limited to 15 factors here. Got {k} factors instead.")
    if 2**k * replicates + center_points > 1_000_000:  # a typo such as replicates=10**6 must not hang the kernel
        raise LevelwiseError(
            f"The design would have {2**k * replicates + center_points} runs; the limit is 1,000,000. "
            f"Check 'replicates' ({replicates}) and 'center_points' ({center_points})."
        )
    design = build_two_level(factors, k, [], [], center_points=center_points, replicates=replicates, blocks=blocks,
                             randomize=randomize, seed=seed, kind="full factorial", generators=())
    from ._splitplot import maybe_split_plot  # hard-to-change factors: whole plots (issue 13)

    return maybe_split_plot(design, replicates, randomize, seed)

