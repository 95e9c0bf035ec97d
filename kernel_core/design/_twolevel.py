"""GF(2) bookkeeping for regular two-level designs.

An effect (a product of factor columns) is a bit mask over the factors: bit j set means factor j takes part.
In a regular two-level fraction the runs, read as bit vectors (bit j set where factor j is at -1), form an
affine subspace of GF(2)^k; the words of the defining relation are the masks whose product column is constant
over the runs, which is the orthogonal complement of the run differences. Everything here is integer bit
arithmetic, so word-length patterns and alias chains cost microseconds.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


def popcount(values) -> np.ndarray:
    """Number of set bits of each integer in *values*."""
    return np.bitwise_count(np.asarray(values, dtype=np.int64)).astype(np.int64)


def reduce_basis(vectors) -> list[int]:
    """Reduced row-echelon basis of the GF(2) span of integer bit vectors, pivots on the highest bit.

    Each basis vector has a distinct highest bit (its pivot), and no other basis vector has that bit set.
    """
    basis: dict[int, int] = {}  # pivot bit -> vector
    for v in vectors:
        v = int(v)
        for pivot in sorted(basis, reverse=True):
            if v >> pivot & 1:
                v ^= basis[pivot]
        if v:
            pivot = v.bit_length() - 1
            for other in list(basis):
                if basis[other] >> pivot & 1:
                    basis[other] ^= v
            basis[pivot] = v
    return [basis[p] for p in sorted(basis)]


def span(basis) -> np.ndarray:
    """All 2^r elements of the span of *basis* (including 0), as an int64 array."""
    out = np.zeros(1, dtype=np.int64)
    for v in basis:
        out = np.concatenate([out, out ^ int(v)])
    return out


def orthogonal_complement(basis, nbits: int) -> list[int]:
    """Basis of {s : popcount(s & d) is even for every d in *basis*} over *nbits* bits."""
    rows = reduce_basis(basis)
    pivots = {v.bit_length() - 1: v for v in rows}
    free = [j for j in range(nbits) if j not in pivots]
    out = []
    for j in free:
        s = 1 << j
        for pivot, v in pivots.items():
            if v >> j & 1:
                s |= 1 << pivot
        out.append(s)
    return out


def effect_name(mask: int, names, sign: int = 1) -> str:
    """Display name of an effect: ``ABD`` for one-letter factor names, ``Oven:Dwell`` otherwise."""
    parts = [names[j] for j in range(len(names)) if mask >> j & 1]
    joiner = "" if all(len(n) == 1 for n in names) else ":"
    text = joiner.join(parts) if parts else "I"
    return ("-" if sign < 0 else "") + text


def effects_up_to(k: int, max_order: int) -> list[int]:
    """Masks of all effects of order 1..max_order over k factors, by order then factor position."""
    import itertools

    out = []
    for order in range(1, min(max_order, k) + 1):
        for combo in itertools.combinations(range(k), order):
            out.append(sum(1 << j for j in combo))
    return out


@dataclass(frozen=True, eq=False)
class TwoLevelStructure:
    """Defining relation and block confounding of a regular two-level design.

    Attributes
    ----------
    names : tuple of str
        Factor names; bit j of a mask is ``names[j]``.
    words : numpy.ndarray
        Masks of the words of the defining relation (identity excluded).
    signs : numpy.ndarray
        +1 or -1 per word: the constant value of the word's product column.
    block_effects : numpy.ndarray
        Masks of every effect confounded with blocks (whole alias classes).
    generators : tuple of str
        Generators such as ``"E=ABCD"``.
    """

    names: tuple
    words: np.ndarray
    signs: np.ndarray
    block_effects: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    generators: tuple = ()

    @property
    def k(self) -> int:
        return len(self.names)

    def word_length_pattern(self) -> tuple:
        """(A3, A4, ..., Ak): the number of words of each length from 3 to k."""
        counts = np.bincount(popcount(self.words), minlength=self.k + 1) if len(self.words) else np.zeros(self.k + 1)
        return tuple(int(c) for c in counts[3 : self.k + 1])

    def resolution(self):
        """Length of the shortest word, or None when there is none (a full factorial)."""
        return int(popcount(self.words).min()) if len(self.words) else None

    def defining_relation(self) -> tuple:
        order = np.lexsort((self.words, popcount(self.words)))
        return tuple(effect_name(int(self.words[i]), self.names, int(self.signs[i])) for i in order)

    def aliases(self, max_order: int = 3) -> dict:
        group = np.concatenate([[0], self.words]).astype(np.int64)
        signs = np.concatenate([[1], self.signs]).astype(np.int64)
        block = set(int(b) for b in self.block_effects)
        out = {}
        for s in effects_up_to(self.k, max_order):
            partners = group ^ s
            lengths = popcount(partners)
            keep = np.flatnonzero((lengths <= max_order) & (partners != s))
            keep = keep[np.lexsort((partners[keep], lengths[keep]))]
            chain = [effect_name(int(partners[i]), self.names, int(signs[i])) for i in keep]
            if s in block:
                chain.append("Block")
            out[effect_name(s, self.names)] = chain
        return out

    def block_confounded(self) -> list:
        """Lowest-order effects of each alias class confounded with blocks."""
        if not len(self.block_effects):
            return []
        group = np.concatenate([[0], self.words]).astype(np.int64)
        seen, out = set(), []
        for b in sorted(int(x) for x in self.block_effects):
            if b in seen:
                continue
            cls = group ^ b
            seen.update(int(x) for x in cls)
            lengths = popcount(cls)
            low = np.sort(cls[lengths == lengths.min()])
            out.append(" = ".join(effect_name(int(x), self.names) for x in low))
        return sorted(out, key=lambda t: (len(t.split(" = ")[0]), t))


def block_contrasts(blocks):
    """Block labels as -1/+1 contrast columns (n x b) when there are 2^b >= 2 blocks, else None.

    Label i (in sorted order) gets the bits of i: column j is -1 where bit j of i is set.
    """
    blocks = np.asarray(blocks)
    labels = np.unique(blocks)
    if len(labels) < 2 or len(labels) & (len(labels) - 1):
        return None
    index = np.searchsorted(labels, blocks)
    return np.column_stack([np.where(index >> j & 1, -1.0, 1.0) for j in range(len(labels).bit_length() - 1)])


def structure_from_runs(coded: np.ndarray, names, block_columns=None, generators=None):
    """The regular structure of two-level runs (entries -1/+1), or None when they are not a regular fraction.

    *block_columns* (n x b, entries -1/+1) are treated as extra pseudo-factors: words that involve them give the
    effects confounded with blocks. Runs must all be at +-1 and every distinct run must occur equally often.
    """
    coded = np.asarray(coded, dtype=float)
    k = coded.shape[1]
    if coded.size == 0 or not np.all(np.isin(coded, (-1.0, 1.0))):
        return None
    full = coded if block_columns is None else np.column_stack([coded, block_columns])
    nbits = full.shape[1]
    if nbits > 62:
        return None
    weights = (1 << np.arange(nbits, dtype=np.int64))
    vectors = ((full < 0).astype(np.int64) * weights).sum(axis=1)
    unique, counts = np.unique(vectors, return_counts=True)
    if counts.min() != counts.max():
        return None
    diffs = reduce_basis(unique ^ unique[0])
    if len(unique) != 1 << len(diffs):
        return None  # not an affine subspace: a non-regular design
    word_basis = orthogonal_complement(diffs, nbits)
    group = span(word_basis)[1:]
    factor_mask = (1 << k) - 1
    pure = group[(group & ~factor_mask) == 0]
    mixed = group[(group & ~factor_mask) != 0]
    signs = np.where(popcount(pure & int(unique[0])) % 2 == 1, -1, 1)
    block_effects = np.unique(mixed & factor_mask)
    block_effects = block_effects[block_effects != 0]
    if generators is None:
        gens = []
        # The reduced basis of the whole group, pivots on the highest bit: its members below the block bits are
        # the reduced basis of the pure words (never the 2^p group elements one by one).
        for w in (v for v in reduce_basis(word_basis) if v.bit_length() <= k):
            pivot = w.bit_length() - 1
            rest = w ^ (1 << pivot)
            sign = -1 if bin(w & int(unique[0])).count("1") % 2 else 1
            gens.append(f"{names[pivot]}={effect_name(rest, names, sign)}")
        generators = tuple(gens)
    return TwoLevelStructure(tuple(names), pure.astype(np.int64), signs.astype(np.int64),
                             block_effects.astype(np.int64), tuple(generators))
