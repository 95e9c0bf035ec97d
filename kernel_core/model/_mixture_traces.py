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
x / divisor | 0 | 0] / T``, ``w = T``), lines 1..q the components. With proportions (offset 0) the block of model
variables is left out: they are the blend over the divisor, and the powers of the divisor go into ``[F | beta]``.
The rows of a line are kept column by column: ``(q + 1, width, d + 1)``.
"""

from __future__ import annotations

import numpy as np


class CoxPlan:
    """Per fit: the degree d along a Cox line, the d + 1 interpolation nodes, the constant part of the node rows,
    the gather of the model columns, and per number of points the Lagrange matrices of the unit grid."""

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
        self.divisor = float(divisor)
        offsets = np.broadcast_to(np.asarray(offset, dtype=float), (q,))
        identity = bool(not engine.contrasts and len(engine.exponents) and not engine.center.any()
                        and (engine.scale == 1).all())
        # pseudo-components (or a coding engine.rows must apply): the model variables get their own block
        self.shifted = bool(offsets.any()) or not identity
        v = q + 2 + (q if self.shifted else 0)  # first process column
        W = self.width = v + self.tail + 1
        # Q of every line but its change and process columns, as lists: before and after the change column
        heads, tails = [], []
        for i in range(q):
            e = [T if j == i else 0.0 for j in range(q)]
            heads.append(e + [T])
            tails.append([(e[j] - offsets[j]) / divisor for j in range(q)] if self.shifted else [])
        self.q_heads, self.q_tails = heads, tails
        # without process factors the rest of a Q row is fixed: its tail and the column of ones
        self.q_ends = [row + [1.0] for row in tails] if not self.tail else None
        self.q_point = [0.0] * (q + 2) + ((-offsets / divisor).tolist() if self.shifted else [])
        self.p_pad = ([-1.0, -1.0 / T], [0.0] * (self.tail + 1))
        columns = list(range(q + 2, 2 * q + 2) if self.shifted else range(q)) + list(range(v, v + self.tail))
        self.picks = _picks(engine, columns, W - 1) if identity else None
        fb_t = engine._fb_t
        if self.picks is not None and not self.shifted:  # variable = blend / divisor: divisor^-degree per column
            power = np.asarray(engine.exponents)[:, :q].sum(axis=1)
            fb_t = fb_t * (1.0 / self.divisor) ** power
        self.fb_t = fb_t
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
        """((d + 1)^2, points): a line's node Gram, flat -> c^2 h on the unit grid (c^2 l_a l_b)."""
        key = (points, c)
        cached = self._bands.get(key)
        if cached is None:
            L = self.lagrange(points)
            n = self.degree + 1
            cached = np.array([L[a] * L[b] * (c * c) for a in range(n) for b in range(n)])
            cached.flags.writeable = False
            if len(self._bands) > 16:
                self._bands.clear()
            self._bands[key] = cached
        return cached


def _picks(engine, columns, one):
    """(width, p): model column j is the product of the node-row columns ``picks[:, j]`` (variable i at column
    ``columns[i]``, repeated by its exponent; the column of ones pads). For the identity coding only (otherwise
    ``engine.rows``)."""
    E = np.asarray(engine.exponents)
    width = max(1, int(E.sum(axis=1).max(initial=0)))
    picks = np.full((width, E.shape[0]), one, dtype=np.intp)
    for j, row in enumerate(E):
        cols = [columns[i] for i in np.flatnonzero(row) for _ in range(int(row[i]))]
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


def _line_numbers(xs, T, lows, highs, tail, plan):
    """One event's numbers in a region of bounds only (plain Python: a few components), flat: the rows P
    (q + 1, width), the rows Q (q + 1, width), and per line w at the nodes then d + 1 ones (q + 1, 2, d + 1).

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
    shifted = plan.shifted
    inv = 1.0 / plan.divisor
    head, pad = plan.p_pad
    f = 1.0 / T
    p_rows = [v * f for v in xs]
    p_rows += [0.0, 0.0]
    if shifted:
        p_rows += [v * inv * f for v in xs]
    p_rows += pad
    q_rows = plan.q_point + tail
    q_rows.append(1.0)
    nodes = plan.node_list
    ones = [1.0] * len(nodes)
    ws = [T] * len(nodes)
    ws += ones
    heads, tails, ends = plan.q_heads, plan.q_tails, plan.q_ends
    if not shifted:
        head = head + pad  # the P row after the shares
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
        p_rows += share
        p_rows += head
        if shifted:
            p_rows += [v * inv for v in share]
            p_rows += pad
        q_rows += heads[i]
        q_rows.append(rest / T)
        if ends is None:
            q_rows += tails[i]
            q_rows += tail
            q_rows.append(1.0)
        else:
            q_rows += ends[i]
        wa = T - a
        step = a - b
        ws += [wa + step * s for s in nodes]
        ws += ones
    return p_rows + q_rows + ws


def _lines_numbers(mixture, xs, tail, plan):
    """:func:`_line_numbers` for any region (bounds and constraints), from the lines of ``_cox_lines``."""
    from ._mixture_engine import _cox_lines

    x = np.array(xs, dtype=float)
    A, B, lo, hi = _cox_lines(mixture, x)
    q, T, W, n = mixture.q, mixture.total, plan.width, plan.degree + 1
    P = np.zeros((q + 1, W))
    P[0, :q] = x / T
    P[1:, :q] = -B
    P[1:, q], P[1:, q + 1] = -1.0, -1.0 / T
    if plan.shifted:
        P[:, q + 2:2 * q + 2] = P[:, :q] / plan.divisor
    Q = [plan.q_point + tail + [1.0]]
    Q += [plan.q_heads[i] + [(T - x[i]) / T] + plan.q_tails[i] + tail + [1.0] for i in range(q)]
    ws = np.ones((q + 1, 2, n))
    ws[0, 0] = T
    ws[1:, 0] = (T - lo)[:, None] + (lo - hi)[:, None] * plan.nodes
    return P.ravel().tolist() + [v for row in Q for v in row] + ws.ravel().tolist()


def cox_polynomial_traces(engine, plan: CoxPlan, xs: list, variables: list, points: int, c: float):
    """Every Cox line from the blend *xs* (amounts, plain floats; model *variables* likewise) on the unit grid.

    Returns (across, ci, pi, mean0, h0): across (width, q, points) the node-row columns along each line (blend,
    t, change; the last column the mean), ci and pi (q, points) the half-widths ``c sqrt(h)`` and
    ``c sqrt(h + extra)``, and the mean and h at the blend itself.
    """
    mixture = engine.info.mixture
    q, W, n = plan.q, plan.width, plan.degree + 1
    tail = variables[q:]
    if not len(mixture.G) and q <= 8:
        lows, highs = mixture.__dict__.get("_bounds_lists") or mixture.__dict__.setdefault(
            "_bounds_lists", (mixture.declared_lows.tolist(), mixture.declared_highs.tolist()))
        numbers = np.array(_line_numbers(xs, plan.total, lows, highs, tail, plan))
    else:
        numbers = np.array(_lines_numbers(mixture, xs, tail, plan))
    size = (q + 1) * W
    # node rows w P + Q: (q + 1, width, 2) [P | Q] times (q + 1, 2, d + 1) [w; 1]
    nodes = numbers[:2 * size].reshape(2, q + 1, W).transpose(1, 2, 0) @ numbers[2 * size:].reshape(q + 1, 2, n)
    if plan.picks is not None:
        rows = np.multiply.reduce(nodes.take(plan.picks, axis=1), axis=1)  # (q + 1, p, d + 1)
        both = plan.fb_t @ rows  # [x F | mean]^T at every node
    else:
        both = (engine.rows(nodes.transpose(0, 2, 1).reshape(-1, W)[:, q + 2:q + 2 + plan.k]) @ engine._fb).reshape(
            q + 1, n, -1).transpose(0, 2, 1)
    xf = both[:, :-1]
    gram = xf.transpose(0, 2, 1) @ xf  # (q + 1, d + 1, d + 1) per line
    half = gram[1:].reshape(q, n * n) @ plan.bands(points, c)  # c^2 h on the grid
    ci = np.sqrt(half)
    half += c * c * engine.extra
    pi = np.sqrt(half, out=half)
    nodes[:, W - 1] = both[:, -1]
    across = (nodes[1:].reshape(q * W, n) @ plan.lagrange(points)).reshape(q, W, points).transpose(1, 0, 2)
    return across, ci, pi, float(both[0, -1, 0]), float(gram[0, 0, 0])


__all__ = ["CoxPlan", "cox_line_range", "cox_polynomial_traces"]
