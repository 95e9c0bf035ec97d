"""Regular two-level fractional factorials: generators, minimum-aberration search, fold-over.

The search works in GF(2) bit arithmetic. With m basic factors (2^m runs), each added factor is a column of
the basic factorial, i.e. a mask over the basic factors of weight >= 2. A set of added columns defines the
design; its word-length pattern is the histogram of word lengths over the defining group. Designs are ranked
by the word-length pattern read lexicographically, (A3, A4, A5, ...): the smallest is the design of maximum
resolution with minimum aberration (Fries & Hunter 1980, *Technometrics* 22(4) 601-608).

Search (exact, bounded):

* Symmetry: permuting the basic factors leaves the pattern unchanged, so the added column of largest weight w1
  can be taken to be the first w1 basic factors, and the heaviest of the others (weight w2) can be taken in a
  canonical form fixed by w2 and its overlap with the first. Only those two levels use symmetry.
* The remaining columns are chosen as increasing index sequences among columns of weight <= w2 (heavier
  columns first, and children visited best first, so good designs are met early).
* Bound: adding a factor only adds words, so the pattern of a partial design is a componentwise lower bound
  of every completion; a partial design whose pattern is already lexicographically >= the best found is cut.
* The last column is chosen for all candidates at once with vectorised popcounts.

A node budget bounds the search; if it runs out the best design found is returned and the design's metadata
says the search was not completed.
"""

from __future__ import annotations

import math
import re
import time

import numpy as np

from ._errors import LevelwiseError, describe
from ._splitplot_designs import maybe_split_plot
from ._twolevel import popcount, structure_from_runs
from .design import Design, _check_count, build_two_level
from .factors import as_factors

#: Search budget (nodes and seconds); keeps every search bounded.
NODE_BUDGET = 200_000
TIME_LIMIT = 3.0


def _wlp_key(counts, k):
    return tuple(int(c) for c in counts[1 : k + 1])


def _greedy(k, m, p, cand, min_resolution):
    """A quick incumbent: add, one at a time, the column giving the smallest pattern so far."""
    chosen, group = [], np.zeros(0, dtype=np.int64)
    counts = np.zeros(k + 1, dtype=np.int64)
    for j in range(p):
        best = None
        for c in cand:
            if c in chosen:
                continue
            cw = int(c) | (1 << (m + j))
            new = np.concatenate([[cw], group ^ cw])
            new_counts = counts + np.bincount(popcount(new), minlength=k + 1)
            if min_resolution > 1 and new_counts[1:min_resolution].any():
                continue
            key = _wlp_key(new_counts, k)
            if best is None or key < best[0]:
                best = (key, int(c), new, new_counts)
        if best is None:
            return None, None
        chosen.append(best[1])
        group = np.concatenate([group, best[2]])
        counts = best[3]
    return chosen, _wlp_key(counts, k)


def minimum_aberration(k: int, m: int, min_resolution: int = 3, budget: int = NODE_BUDGET,
                       time_limit: float = TIME_LIMIT):
    """Generator masks of a maximum-resolution, minimum-aberration 2^(k-p) design with 2^m runs.

    Parameters
    ----------
    k, m : int
        Factors and basic factors (runs = 2^m); p = k - m added factors.
    min_resolution : int
        Only designs whose every word has at least this length are considered.
    budget : int
        Node budget of the search.
    time_limit : float
        Seconds before the search stops with the best design so far.

    Returns
    -------
    masks : list of int or None
        One mask over the basic factors per added factor (None when no design reaches *min_resolution*).
    pattern : tuple
        (A1, ..., Ak) of the design found.
    complete : bool
        False when the budget ran out before the search finished.
    """
    p = k - m
    if p <= 0:
        return [], (0,) * k, True
    min_w = max(2, min_resolution - 1)
    cand = [c for c in range(1, 1 << m) if popcount(c) >= min_w]
    cand.sort(key=lambda c: (-int(popcount(c)), c))
    cand_arr = np.array(cand, dtype=np.int64)
    cand_w = popcount(cand_arr)
    best = {"key": None, "masks": None}
    nodes = [0]
    complete = [True]
    deadline = time.perf_counter() + time_limit
    # Incumbents: greedy over all columns, and over odd-weight columns (all words then have even length,
    # so the design has resolution >= IV whenever there are enough such columns).
    odd = [c for c in cand if popcount(c) % 2 == 1 and popcount(c) >= 3]
    for pool in (cand, odd):
        if len(pool) >= p:
            masks, key = _greedy(k, m, p, pool, min_resolution)
            if masks is not None and (best["key"] is None or key < best["key"]):
                best["key"], best["masks"] = key, masks

    def words_of(c, j):
        return int(c) | (1 << (m + j))

    def recurse(chosen, group, counts, start, allowed):
        # group: int64 array of words so far (without identity); counts: histogram over lengths 0..k.
        nodes[0] += 1
        if nodes[0] > budget or (nodes[0] % 64 == 0 and time.perf_counter() > deadline):
            complete[0] = False
            return
        j = len(chosen)
        remaining = p - j
        idx = np.arange(start, len(cand))
        idx = idx[allowed[idx]]
        if len(idx) < remaining:
            return
        cw = cand_arr[idx] | (1 << (m + j))
        lengths = popcount(group[None, :] ^ cw[:, None])
        full = np.column_stack([lengths, popcount(cw)])
        rows = np.repeat(np.arange(len(idx)), full.shape[1])
        hist = np.bincount(rows * (k + 1) + full.ravel(), minlength=len(idx) * (k + 1)).reshape(len(idx), k + 1)
        hist += counts
        if min_resolution > 1:
            ok = hist[:, 1:min_resolution].sum(axis=1) == 0
            hist, idx, cw = hist[ok], idx[ok], cw[ok]
            if not len(idx):
                return
        order = np.lexsort(hist[:, k:0:-1].T)  # lexicographic on lengths 1..k, smallest first
        if remaining == 1:
            top = order[0]
            key = _wlp_key(hist[top], k)
            if best["key"] is None or key < best["key"]:
                best["key"] = key
                best["masks"] = [*chosen, int(cand_arr[idx[top]])]
            return
        last_start = len(cand) - remaining + 1
        for r in order:
            key = _wlp_key(hist[r], k)
            if best["key"] is not None and key >= best["key"]:
                break  # children are sorted: every later one is at least as bad
            if idx[r] >= last_start:
                continue
            c = int(cw[r])
            new = np.concatenate([[c], group ^ c])
            recurse([*chosen, int(cand_arr[idx[r]])], np.concatenate([group, new]), hist[r], idx[r] + 1, allowed)
            if not complete[0]:
                return

    def consider(chosen, allowed):
        """Start the search from the fixed first generators *chosen* (canonical forms)."""
        group = np.zeros(0, dtype=np.int64)
        counts = np.zeros(k + 1, dtype=np.int64)
        for j, c in enumerate(chosen):
            cw = int(c) | (1 << (m + j))
            new = np.concatenate([[cw], group ^ cw])
            group = np.concatenate([group, new])
            counts = counts + np.bincount(popcount(new), minlength=k + 1)
        if min_resolution > 1 and counts[1:min_resolution].any():
            return
        key = _wlp_key(counts, k)
        if best["key"] is not None and key >= best["key"]:
            return
        if len(chosen) == p:
            best["key"], best["masks"] = key, list(chosen)
            return
        recurse(list(chosen), group, counts, 0, allowed)

    # Symmetry: the heaviest added column is the first w1 basic factors; permuting inside and outside those
    # keeps it fixed, so the heaviest of the others has a canonical form set by its weight w2 and its overlap.
    for w1 in sorted({int(x) for x in cand_w}, reverse=True):
        g1 = (1 << w1) - 1
        if p == 1:
            consider([g1], None)
            continue
        for w2 in range(w1, min_w - 1, -1):
            for overlap in range(min(w1, w2), max(0, w2 - (m - w1)) - 1, -1):
                g2 = ((1 << overlap) - 1) | (((1 << (w2 - overlap)) - 1) << w1)
                if g2 == g1 or popcount(g2) < min_w:
                    continue
                allowed = (cand_w <= w2) & (cand_arr != g1) & (cand_arr != g2)
                consider([g1, g2], allowed)
                if not complete[0]:
                    break
            if not complete[0]:
                break
        if not complete[0]:
            break
    if best["masks"] is None:
        return None, None, complete[0]
    return best["masks"], best["key"], complete[0]


_SPLIT = re.compile(r"\s*[:*·]\s*")


def _parse_word(text, names, parameter, generator):
    text = text.strip()
    if not text:
        raise LevelwiseError(f"The generator {generator!r} in '{parameter}' has an empty side.")
    if any(sep in text for sep in ":*·"):
        parts = [t for t in _SPLIT.split(text) if t]
    elif text in names:
        parts = [text]
    elif all(len(n) == 1 for n in names):
        parts = list(text.replace(" ", ""))
    else:
        parts = [text]
    for part in parts:
        if part not in names:
            raise LevelwiseError(
                f"The generator {generator!r} in '{parameter}' names an unknown factor {part!r}. "
                f"Known factors: {', '.join(map(repr, names))}."
            )
    if len(set(parts)) != len(parts):
        raise LevelwiseError(f"The generator {generator!r} in '{parameter}' repeats a factor.")
    return [names.index(part) for part in parts]


def parse_generators(generators, names, parameter="generators"):
    """Parse ``["E=ABCD", "F=-ABC"]`` (or ``"Film = Oven:Dwell"``) into (added index, basic indices, sign).

    Raises
    ------
    LevelwiseError
        Unknown factors, a factor defined twice, a right side using a defined factor, or generators that are
        not independent (two added factors equal to the same column, or to a single basic factor).
    """
    if isinstance(generators, str):
        generators = [g for g in re.split(r"[,;]", generators) if g.strip()]
    try:
        items = list(generators)
    except TypeError:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be a list such as ['E=ABCD']. Got {describe(generators)} instead."
        ) from None
    parsed = []
    for g in items:
        if not isinstance(g, str) or g.count("=") != 1:
            raise LevelwiseError(
                f"Each item of '{parameter}' must look like 'E=ABCD' (added factor = product of basic factors). "
                f"Got {describe(g)} instead."
            )
        lhs, rhs = g.split("=")
        rhs = rhs.strip()
        sign = 1
        if rhs.startswith(("-", "+")):
            sign = -1 if rhs[0] == "-" else 1
            rhs = rhs[1:]
        left = _parse_word(lhs, names, parameter, g)
        if len(left) != 1:
            raise LevelwiseError(f"The left side of generator {g!r} in '{parameter}' must be one factor.")
        parsed.append((left[0], _parse_word(rhs, names, parameter, g), sign, g.strip()))
    added = [a for a, _, _, _ in parsed]
    if len(set(added)) != len(added):
        dup = next(names[a] for a in added if added.count(a) > 1)
        raise LevelwiseError(f"The factor {dup!r} is defined by more than one generator in '{parameter}'.")
    columns = {}
    for _a, rhs, _, text in parsed:
        used = [names[j] for j in rhs if j in added]
        if used:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {text!r} uses the generated factor(s) "
                f"{used}; write each generator in basic factors only."
            )
        if len(rhs) < 2:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {text!r} makes a factor equal to a single "
                "factor (a main effect aliased with a main effect). Use a product of at least 2 basic factors."
            )
        key = frozenset(rhs)
        if key in columns:
            raise LevelwiseError(
                f"The generators in '{parameter}' are not independent: {columns[key]!r} and {text!r} give the same "
                "column, so those two factors would be aliased."
            )
        columns[key] = text
    return parsed


def _check_runs(runs, k):
    runs = _check_count(runs, "runs", 2)
    if runs & (runs - 1):
        raise LevelwiseError(f"The 'runs' parameter must be a power of two (8, 16, 32, ...). Got {runs} instead.")
    if runs < k + 1:
        raise LevelwiseError(
            f"The 'runs' parameter ({runs}) is too small for {k} factors: a two-level fraction needs at least "
            f"k + 1 = {k + 1} runs, i.e. {1 << math.ceil(math.log2(k + 1))} or more."
        )
    return runs


def fractional_factorial(
    factors,
    runs=None,
    generators=None,
    resolution=None,
    center_points=0,
    replicates=1,
    blocks=1,
    randomize=True,
    seed=None,
) -> Design:
    """Regular two-level fractional factorial 2^(k-p).

    Parameters
    ----------
    factors : list of Factor or int
        The factors (an integer k gives A, B, C, ... skipping I).
    runs : int, optional
        Number of distinct runs, a power of two (4 to 128 for the search).
    generators : list of str, optional
        Generators such as ``["E=ABCD"]`` or ``["Film=Oven:Dwell"]``; a leading ``-`` on the right side gives
        the other half. Checked for independence. Factors not on a left side are the basic factors.
    resolution : int, optional
        Minimum resolution wanted. With *runs*, an error if no fraction of that size reaches it; without *runs*,
        the smallest run count that reaches it.
    center_points, replicates, blocks, randomize, seed
        As in :func:`levelwise.full_factorial` (hard-to-change factors give a split-plot design there too).

    Returns
    -------
    Design
        With ``generators``, ``defining_relation``, ``resolution``, ``word_length_pattern`` and ``aliases()``.
        ``metadata["search_complete"]`` is False if the bounded search stopped early.

    Raises
    ------
    LevelwiseError
        Dependent generators, a run count that is not a power of two or too small for k, or an unreachable
        resolution.

    Examples
    --------
    >>> d = fractional_factorial(5, runs=16, randomize=False)
    >>> d.generators, d.resolution, d.word_length_pattern
    (['E=ABCD'], 5, (0, 0, 1))
    """
    factors = as_factors(factors)
    names = [f.name for f in factors]
    k = len(factors)
    center_points = _check_count(center_points, "center_points", 0)
    replicates = _check_count(replicates, "replicates", 1)
    if resolution is not None:
        resolution = _check_count(resolution, "resolution", 3)
    meta = {}
    if generators is not None:
        parsed = parse_generators(generators, names)
        added = [a for a, _, _, _ in parsed]
        basic = [j for j in range(k) if j not in added]
        m = len(basic)
        if runs is not None and _check_count(runs, "runs", 2) != 1 << m:
            raise LevelwiseError(
                f"The 'runs' parameter ({runs}) disagrees with the generators: {len(parsed)} generators for {k} "
                f"factors give 2^{m} = {1 << m} runs."
            )
        order = basic + added
        ordered = [factors[j] for j in order]
        position = {j: i for i, j in enumerate(basic)}
        masks = [sum(1 << position[j] for j in rhs) for _, rhs, _, _ in parsed]
        signs = [s for _, _, s, _ in parsed]
        design = build_two_level(ordered, m, masks, signs, center_points=center_points, replicates=replicates,
                                 blocks=blocks, randomize=False, seed=seed, kind="fractional factorial")
        # Back to the user's factor order, keeping the generators as written.
        coded = design.coded[names].to_numpy()
        structure = structure_from_runs(coded[design.table.point_type.to_numpy() == "factorial"], names,
                                        _block_columns(design), tuple(t for _, _, _, t in parsed))
        result = Design(factors, coded, design.table.point_type.to_numpy(), design.table.block.to_numpy(),
                        randomize=randomize, seed=seed, std_order=design.table.std_order.to_numpy(),
                        kind="fractional factorial", structure=structure,
                        metadata={k_: v for k_, v in design.metadata.items() if k_ == "block_generators"})
        if resolution is not None and (result.resolution or k + 1) < resolution:
            raise LevelwiseError(
                f"The generators give resolution {result.resolution}, below the requested 'resolution' "
                f"{resolution}. Got generators {list(generators)!r}."
            )
        return maybe_split_plot(result, replicates, randomize, seed)
    if runs is None and resolution is None:
        raise LevelwiseError("fractional_factorial needs 'runs', 'generators' or 'resolution'. Got none of them.")
    if runs is not None:
        runs = _check_runs(runs, k)
        if runs > 1 << k:
            raise LevelwiseError(
                f"The 'runs' parameter ({runs}) is more than the {1 << k} distinct runs of {k} factors; use "
                "full_factorial with replicates instead."
            )
        if runs > 128 and runs < (1 << k):
            raise LevelwiseError(f"The 'runs' parameter must be at most 128 for the search. Got {runs} instead.")
        m_values = [min(runs.bit_length() - 1, k)]
    else:
        m_values = [m for m in range(max(2, math.ceil(math.log2(k + 1))), 8) if m <= k]
        if not m_values:
            m_values = [k]
    for m in m_values:
        masks, _pattern, complete = minimum_aberration(k, m, resolution or 3)
        if masks is not None:
            break
    else:
        wanted = f"{runs} runs" if runs is not None else "up to 128 runs"
        raise LevelwiseError(
            f"No regular fraction of {k} factors in {wanted} reaches resolution {resolution}. Use more runs "
            "or a lower 'resolution'."
        )
    meta["search_complete"] = bool(complete)
    design = build_two_level(factors, m, masks, [1] * len(masks), center_points=center_points,
                             replicates=replicates, blocks=blocks, randomize=randomize, seed=seed,
                             kind="fractional factorial", metadata=meta)
    return maybe_split_plot(design, replicates, randomize, seed)


def _block_columns(design: Design):
    """Block contrasts of the factorial runs as +-1 columns (None with one block)."""
    factorial = design.table.point_type.to_numpy() == "factorial"
    blocks = design.table.block.to_numpy()[factorial]
    labels = np.unique(blocks)
    if len(labels) < 2:
        return None
    b = int(round(math.log2(len(labels))))
    if 1 << b != len(labels):
        return None
    index = np.searchsorted(labels, blocks)
    return np.column_stack([np.where(index >> i & 1, -1.0, 1.0) for i in range(b)])


def fold_over(design: Design, factor=None, *, as_block=False, randomize=True, seed=None) -> Design:
    """Add the fold-over of a two-level design: every sign reversed, or only one factor's.

    Parameters
    ----------
    design : Design
        A two-level design (centre points are carried over once, with the original runs).
    factor : str, optional
        Fold on this factor only (its column reversed); by default all signs are reversed.
    as_block : bool, default False
        Put the new runs in a new block (block numbers continue after the original ones).
    randomize, seed
        Randomisation of the combined design, within blocks.

    Returns
    -------
    Design
        The combined design, twice the factorial runs, with its new generators, resolution and alias structure
        when it is a regular fraction (confounding with the fold block is reported in ``block_confounded``).

    Examples
    --------
    >>> d = fractional_factorial(7, runs=8, randomize=False)
    >>> d.resolution, fold_over(d, randomize=False).resolution
    (3, 4)
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    names = design.factor_names
    coded = design.coded.to_numpy()
    ptype = design.table.point_type.to_numpy()
    block = design.table.block.to_numpy()
    std = design.table.std_order.to_numpy()
    corner = ptype == "factorial"
    if not corner.any() or not np.all(np.isin(coded[corner], (-1.0, 1.0))):
        raise LevelwiseError("fold_over needs a two-level design with factorial runs at -1/+1.")
    flip = np.full(len(names), -1.0)
    if factor is not None:
        if factor not in names:
            raise LevelwiseError(
                f"The 'factor' parameter must name a factor of the design {names}. Got {describe(factor)} instead."
            )
        flip = np.ones(len(names))
        flip[names.index(factor)] = -1.0
    order = np.argsort(std, kind="stable")
    coded, ptype, block, corner = coded[order], ptype[order], block[order], corner[order]
    folded = coded[corner] * flip
    new_block = block[corner] + (block.max() if as_block else 0)
    all_coded = np.vstack([coded, folded])
    all_ptype = np.concatenate([ptype, np.array(["factorial"] * len(folded), dtype=object)])
    all_block = np.concatenate([block, new_block])
    corners_all = np.vstack([coded[corner], folded])
    blocks_corner = np.concatenate([block[corner], new_block])
    labels = np.unique(blocks_corner)
    block_cols = None
    if len(labels) > 1 and (len(labels) & (len(labels) - 1)) == 0:
        index = np.searchsorted(labels, blocks_corner)
        block_cols = np.column_stack(
            [np.where(index >> i & 1, -1.0, 1.0) for i in range(int(math.log2(len(labels))))]
        )
    structure = structure_from_runs(corners_all, names, block_cols)
    what = "full fold-over" if factor is None else f"fold-over on {factor}"
    return Design(design.factors, all_coded, all_ptype, all_block, randomize=randomize, seed=seed,
                  kind=f"{design.kind} + {what}", structure=structure, metadata={"fold": what})


__all__ = ["fractional_factorial", "fold_over", "minimum_aberration", "parse_generators"]
