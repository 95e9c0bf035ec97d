"""Cox-direction traces as exact polynomials: the slider-event path of the mixture engine.

Along component i's Cox line the blend is affine in the line's unit parameter s (``t = lo + (hi - lo) s``,
``x(t) = A + t B``), the model variables (proportions or pseudo-components, process factors held) are affine in s,
and every model column is a polynomial in s of degree at most d, the model's largest degree in the components.
So is every column of ``row [F | beta]``. The engine evaluates ``[F | beta]`` rows at d + 1 nodes per line (and
at the current blend) and, with the Lagrange basis l_0..l_d of the nodes, gets on the unit grid

* the blend, t, the change and the mean: ``sum_a l_a(s) value_a`` (exact: all have degree <= d);
* h = ||x F||^2: ``sum_ab l_a(s) l_b(s) <x_a F, x_b F>`` (exact: x(s) F = sum_a l_a(s) x_a F), so the Gram of
  the node rows replaces squaring every grid row;

the quantities of :meth:`PredictionEngine.mean_and_leverage` (up to rounding). Per event this is a handful of
small array operations for every line at once; what does not depend on the blend is built once per fit
(:class:`CoxPlan`).

Node rows: along line i the blend is ``X = T e_i + w D_i`` with ``w = T - t`` and ``D_i = s_i - e_i``
(``s_ij = x_j / (T - x_i)``, the others' shares; equal shares from a pure blend), so every column of a node row
``[X | t | change | (X - offset) / divisor | process | 1]`` is ``w P_i + Q_i``:
``P_i = [D_i | -1 | -1 / T | D_i / divisor | 0 | 0]``, ``Q_i = [T e_i | T | (T - x_i) / T |
(T e_i - offset) / divisor | process | 1]``. Line 0 is the current blend itself (``P = [x | 0 | 0 |
x / divisor | 0 | 0] / T``, ``w = T``), lines 1..q the components. The rows are kept column by column:
``(width, q + 1, d + 1)``.
"""

from __future__ import annotations

import numpy as np


class CoxPlan:
    """Per fit: the degree d along a Cox line, the d + 1 interpolation nodes, the constant part of the node rows,
    the gather of the model columns, the Gram entries each line needs, and per number of points the Lagrange
    matrices of the unit grid."""

    def __init__(self, engine):
        m = engine.info.mixture
        q, k, T = m.q, engine.k, float(m.total)
        offset, divisor = engine._fast[-2:]
        degree = int(np.asarray(engine.exponents)[:, :q].sum(axis=1).max(initial=0))
        self.q, self.k, self.total = q, k, T
        self.degree = d = max(degree, 1)
        self.nodes = np.linspace(0.0, 1.0, d + 1)
        self.node_list = self.nodes.tolist()
        self._to_coefficients = np.linalg.inv(np.vander(self.nodes, d + 1, increasing=True))
        self.tail = k - q  # process factors
        W = self.width = q + 2 + k + 1
        self.divisor = float(divisor)
        offsets = np.broadcast_to(np.asarray(offset, dtype=float), (q,))
        Q = np.zeros((W, q + 1, 1))  # Q of every line but its change and process columns
        Q[q + 2:2 * q + 2, :, 0] = (-offsets / divisor)[:, None]
        Q[W - 1] = 1.0
        for i in range(q):
            Q[i, i + 1] = T
            Q[q, i + 1] = T
            Q[q + 2 + i, i + 1] += T / divisor
        Q.flags.writeable = False
        self.q_const = Q
        self.p_pad = ([-1.0, -1.0 / T], [0.0] * (self.tail + 1))
        n, M = d + 1, (q + 1) * (d + 1)
        idx = [[(j * n + a) * M + j * n + b for a in range(n) for b in range(a, n)] for j in range(1, q + 1)]
        self.gram_index = np.array(idx, dtype=np.intp)  # the upper triangle of each line's node Gram, flat
        self.picks = _picks(engine, q + 2, W - 1)
        self._grids: dict = {}
        self._bands: dict = {}

    def lagrange(self, points: int) -> np.ndarray:
        """(d + 1, points): values at the nodes -> values on ``linspace(0, 1, points)`` (exact for degree <= d)."""
        cached = self._grids.get(points)
        if cached is None:
            unit = np.linspace(0.0, 1.0, points)
            cached = np.ascontiguousarray((np.vander(unit, self.degree + 1, increasing=True)
                                           @ self._to_coefficients).T)
            cached.flags.writeable = False
            self._grids[points] = cached
        return cached

    def bands(self, points: int, c: float) -> np.ndarray:
        """(pairs, points): the upper triangle of a line's node Gram -> c^2 h on the unit grid (l_a l_b, doubled
        off the diagonal, times c^2)."""
        key = (points, c)
        cached = self._bands.get(key)
        if cached is None:
            L = self.lagrange(points)
            n = self.degree + 1
            cached = np.array([L[a] * L[b] * (c * c * (1.0 if a == b else 2.0))
                               for a in range(n) for b in range(a, n)])
            cached.flags.writeable = False
            if len(self._bands) > 16:
                self._bands.clear()
            self._bands[key] = cached
        return cached


def _picks(engine, first, one):
    """(width, p): model column j is the product of the node-row columns ``picks[:, j]`` (variable i at column
    first + i, repeated by its exponent; the column of ones pads), or None when the coding is not the identity
    (then ``engine.rows``)."""
    identity = bool(not engine.contrasts and len(engine.exponents) and not engine.center.any()
                    and (engine.scale == 1).all())
    if not identity:
        return None
    E = np.asarray(engine.exponents)
    width = max(1, int(E.sum(axis=1).max(initial=0)))
    picks = np.full((width, E.shape[0]), one, dtype=np.intp)
    for j, row in enumerate(E):
        cols = [first + i for i in np.flatnonzero(row) for _ in range(int(row[i]))]
        picks[:len(cols), j] = cols
    return picks


def cox_line_range(i: int, xs: list, T: float, lows: list, highs: list):
    """Cox line i from the blend *xs* (plain floats) in a region of bounds only: the others' shares s_j (0 for i) and
    the range [a, b] of component i's amount t. Along the line x_j = s_j (T - t), s_j = x_j / (T - x_i) (equal
    shares from a pure blend); L_j <= x_j <= U_j gives T - U_j / s_j <= t <= T - L_j / s_j for s_j > 0, and
    L_i <= t <= U_i."""
    q = len(xs)
    rest = T - xs[i]
    share = [v / rest for v in xs] if rest > 1e-12 * T else [1.0 / (q - 1)] * q
    share[i] = 0.0
    a, b = lows[i], highs[i]
    for j in range(q):
        sj = share[j]
        if sj > 0.0:
            top = T - lows[j] / sj
            bottom = T - highs[j] / sj
            if top < b:
                b = top
            if bottom > a:
                a = bottom
    return share, a, b


def _line_numbers(xs, T, lows, highs, plan):
    """One event's numbers in a region of bounds only (plain Python: a few components), flat: the rows P
    (q + 1, width), w at the nodes (q + 1, d + 1) and (T - x_i) / T (q + 1; 0 for the blend itself).

    The range of t is that of :func:`cox_line_range`, ``T - (T - x_i) min_j U_j / x_j <= t <=
    T - (T - x_i) max_j L_j / x_j`` over the others with x_j > 0 (the best two of each serve every line)."""
    q = len(xs)
    inf = float("inf")
    u1 = u2 = inf
    d1 = d2 = -inf
    iu = idn = -1
    for j in range(q):
        v = xs[j]
        if v > 0.0:
            u = highs[j] / v
            if u < u1:
                u1, u2, iu = u, u1, j
            elif u < u2:
                u2 = u
            d = lows[j] / v
            if d > d1:
                d1, d2, idn = d, d1, j
            elif d > d2:
                d2 = d
    inv = 1.0 / plan.divisor
    head, pad = plan.p_pad
    f = 1.0 / T
    numbers = [v * f for v in xs]
    numbers += [0.0, 0.0]
    numbers += [v * inv * f for v in xs]
    numbers += pad
    nodes = plan.node_list
    ws = [T] * len(nodes)
    changes = [0.0]
    for i in range(q):
        xi = xs[i]
        rest = T - xi
        if rest > 1e-12 * T:
            f = 1.0 / rest
            share = [v * f for v in xs]
            a = T - rest * (u2 if i == iu else u1)
            b = T - rest * (d2 if i == idn else d1)
            if a < lows[i]:
                a = lows[i]
            if b > highs[i]:
                b = highs[i]
        else:
            share, a, b = cox_line_range(i, xs, T, lows, highs)
        share[i] = -1.0
        numbers += share
        numbers += head
        numbers += [v * inv for v in share]
        numbers += pad
        wa = T - a
        step = a - b
        ws += [wa + step * s for s in nodes]
        changes.append(rest / T)
    return numbers + ws + changes


def _lines_numbers(mixture, xs, plan):
    """:func:`_line_numbers` for any region (bounds and constraints), from the lines of ``_cox_lines``."""
    from ._mixture_engine import _cox_lines

    x = np.array(xs, dtype=float)
    A, B, lo, hi = _cox_lines(mixture, x)
    q, T, W = mixture.q, mixture.total, plan.width
    P = np.zeros((q + 1, W))
    P[0, :q] = x / T
    P[1:, :q] = -B
    P[1:, q], P[1:, q + 1] = -1.0, -1.0 / T
    P[:, q + 2:2 * q + 2] = P[:, :q] / plan.divisor
    ws = np.vstack([np.full(plan.degree + 1, T), (T - lo)[:, None] + (lo - hi)[:, None] * plan.nodes])
    return P.ravel().tolist() + ws.ravel().tolist() + [0.0] + ((T - x) / T).tolist()


def cox_polynomial_traces(engine, plan: CoxPlan, xs: list, variables: list, points: int, c: float):
    """Every Cox line from the blend *xs* (amounts, plain floats; model *variables* likewise) on the unit grid.

    Returns (across, ci, pi, mean0, h0): across (width, q, points) the node-row columns along each line (blend,
    t, change; the last column the mean), ci and pi (q, points) the half-widths ``c sqrt(h)`` and
    ``c sqrt(h + extra)``, and the mean and h at the blend itself.
    """
    mixture = engine.info.mixture
    q, W, n = plan.q, plan.width, plan.degree + 1
    if not len(mixture.G) and q <= 8:
        lows, highs = mixture.__dict__.get("_bounds_lists") or mixture.__dict__.setdefault(
            "_bounds_lists", (mixture.declared_lows.tolist(), mixture.declared_highs.tolist()))
        numbers = np.array(_line_numbers(xs, plan.total, lows, highs, plan))
    else:
        numbers = np.array(_lines_numbers(mixture, xs, plan))
    size, m = (q + 1) * W, (q + 1) * n
    nodes = np.empty((W, q + 1, n))
    np.multiply(numbers[:size].reshape(q + 1, W).T[:, :, None], numbers[size:size + m].reshape(q + 1, n), out=nodes)
    nodes += plan.q_const
    nodes[q + 1] += numbers[size + m:, None]
    if plan.tail:
        nodes[2 * q + 2:W - 1] += np.array(variables[q:])[:, None, None]
    columns = nodes.reshape(W, m)
    if plan.picks is not None:
        rows_t = np.multiply.reduce(columns[plan.picks], axis=0)
    else:
        rows_t = engine.rows(columns[q + 2:q + 2 + plan.k].T).T
    both = engine._fb_t @ rows_t  # [x F | mean]^T at every node
    xf = both[:-1]
    gram = xf.T @ xf
    half = gram.take(plan.gram_index) @ plan.bands(points, c)  # c^2 h on the grid
    ci = np.sqrt(half)
    half += c * c * engine.extra
    pi = np.sqrt(half, out=half)
    nodes[W - 1] = both[-1].reshape(q + 1, n)
    across = (columns.reshape(W * (q + 1), n) @ plan.lagrange(points)).reshape(W, q + 1, points)[:, 1:]
    return across, ci, pi, float(both[-1, 0]), float(gram[0, 0])


__all__ = ["CoxPlan", "cox_line_range", "cox_polynomial_traces"]
