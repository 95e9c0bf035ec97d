"""Minimum-aberration search for regular two-level fractional factorials.

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
says the search was not completed. The same holds when the ``progress`` callback asks to stop or Ctrl-C arrives
(``KeyboardInterrupt``): the best design so far is returned, flagged incomplete.
"""

from __future__ import annotations

import time

import numpy as np

from .._progress import Reporter
from ._twolevel import popcount

#: Search budget (nodes and seconds); keeps every search bounded.
NODE_BUDGET = 200_000
TIME_LIMIT = 3.0


def _wlp_key(counts, k):
    return tuple(int(c) for c in counts[1 : k + 1])


def _greedy(k, m, p, cand, min_resolution, tick=None, reporter=None):
    """A quick incumbent: add, one at a time, the column giving the smallest pattern so far.

    Stopped part way (*tick* returns False, or Ctrl-C with a *reporter* to tell), it returns the columns chosen
    so far completed by :func:`_complete`, with key None.
    """
    chosen = []
    try:
        return _greedy_steps(k, m, p, cand, min_resolution, tick, chosen)
    except KeyboardInterrupt:
        partial = _complete(chosen, cand, p, min_resolution)
        if reporter is None or partial is None:
            raise
        reporter.interrupted()
        return partial, None


def _greedy_steps(k, m, p, cand, min_resolution, tick, chosen):
    group = np.zeros(0, dtype=np.int64)
    counts = np.zeros(k + 1, dtype=np.int64)
    for j in range(p):
        best = None
        for c in cand:
            if tick is not None and not tick(f"first design: factor {m + j + 1} of {k}"):
                return _complete(chosen, cand, p, min_resolution), None
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


def _complete(chosen, cand, p, min_resolution):
    """The greedy design stopped part way, completed with the first unused columns (None unless that is safe).

    Distinct columns of weight >= 2 always give resolution III or more, so only then is the completion valid.
    """
    if min_resolution > 3:
        return None
    rest = [int(c) for c in cand if c not in chosen]
    if len(chosen) + len(rest) < p:
        return None
    return [*chosen, *rest[: p - len(chosen)]]


def minimum_aberration(k: int, m: int, min_resolution: int = 3, budget: int = NODE_BUDGET,
                       time_limit: float = TIME_LIMIT, progress=None):
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
    progress : callable or Reporter, optional
        ``progress(fraction_done, message)`` (silent when None); returning False stops the search (best design
        so far kept).
        The fraction is the larger of the node budget and the time limit used, a bound on the time left.

    Returns
    -------
    masks : list of int or None
        One mask over the basic factors per added factor (None when no design reaches *min_resolution*).
    pattern : tuple
        (A1, ..., Ak) of the design found.
    complete : bool
        False when the budget ran out, the callback asked to stop or Ctrl-C arrived before the search finished.
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
    started = time.perf_counter()
    deadline = started + time_limit
    reporter = progress if isinstance(progress, Reporter) else Reporter(False if progress is None else progress)

    def tick(message=None):
        """Report progress; False when the callback asked to stop."""
        if reporter.stopped:
            return False
        used = max(nodes[0] / budget, (time.perf_counter() - started) / time_limit)
        if not reporter.report(min(used, 0.99), message or f"{nodes[0]} partial designs examined"):
            complete[0] = False
            return False
        return True

    # Incumbents: greedy over all columns, and over odd-weight columns (all words then have even length,
    # so the design has resolution >= IV whenever there are enough such columns).
    odd = [c for c in cand if popcount(c) % 2 == 1 and popcount(c) >= 3]
    try:
        _search(k, m, p, cand, odd, cand_arr, cand_w, min_w, min_resolution, best, nodes, complete, budget,
                deadline, tick, reporter)
    except KeyboardInterrupt:
        if best["masks"] is None:
            raise
        complete[0] = False
        reporter.interrupted()
    if best["masks"] is None:
        return None, None, complete[0]
    return best["masks"], best["key"], complete[0]


def _search(k, m, p, cand, odd, cand_arr, cand_w, min_w, min_resolution, best, nodes, complete, budget, deadline,
            tick, reporter):
    """The greedy incumbents, then the branch and bound (updates *best*, *nodes* and *complete* in place)."""
    for pool in (cand, odd):
        if len(pool) >= p:
            masks, key = _greedy(k, m, p, pool, min_resolution, tick, reporter)
            if masks is not None and key is None:  # stopped part way: a completed partial design
                complete[0] = False
                if best["masks"] is None:
                    best["masks"] = masks
            elif masks is not None and (best["key"] is None or key < best["key"]):
                best["key"], best["masks"] = key, masks
        if not complete[0]:
            return

    def words_of(c, j):
        return int(c) | (1 << (m + j))

    def recurse(chosen, group, counts, start, allowed):
        # group: int64 array of words so far (without identity); counts: histogram over lengths 0..k.
        nodes[0] += 1
        if nodes[0] > budget or (nodes[0] % 64 == 0 and (time.perf_counter() > deadline or not tick())):
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
