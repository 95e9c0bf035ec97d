"""Brute-force checks used by the design tests, written independently of levelwise's GF(2) code."""

import numpy as np


def brute_force_wlp(coded):
    """(A1, ..., Ak) by trying every subset of factors: a word is a product column that is constant (+1 or -1)."""
    x = np.asarray(coded, dtype=float)
    n, k = x.shape
    rows = ((x < 0).astype(np.int64) * (1 << np.arange(k, dtype=np.int64))).sum(axis=1)
    subsets = np.arange(1, 1 << k, dtype=np.int64)
    counts = np.zeros(k + 1, dtype=int)
    for chunk in np.array_split(subsets, max(1, len(subsets) // 8192)):
        parity = np.bitwise_count(chunk[:, None] & rows[None, :]) % 2
        constant = (parity == parity[:, :1]).all(axis=1)
        np.add.at(counts, np.bitwise_count(chunk[constant]), 1)
    return tuple(int(c) for c in counts[1:])


def factorial_part(design):
    """Coded runs of the factorial points, in standard order."""
    table = design.table
    keep = (table.role == "corner").to_numpy()
    order = np.argsort(table.standard_order.to_numpy()[keep])
    return design.coded.to_numpy()[keep][order]
