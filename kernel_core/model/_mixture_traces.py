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
All lines' node rows come from one product ``[P_0 Q_0 P_1 Q_1 ...] [w_0; 1; w_1; 1; ...]`` (block rows), kept
column by column, lines 1..q side by side and the blend (one node) last: ``(width, q (d + 1) + 1)``.

Away from a pure blend the slider path uses the same rows in u = w / (T - x_i) = (T - t) / (T - x_i): the blend is
``T e_i + u (x - T e_i)``, so ``P_i = [x - T e_i | x_i - T | (x_i - T) / T | ...]`` and ``Q_i = [T e_i | T |
(T - x_i) / T | ...]`` are affine in x, and u at the nodes is affine in u at the ends of the line. Both factors of
the product are then one per-fit affine map of ``z = [x, u at s = 0, u at s = 1, process settings]`` (12 numbers
for four components): one matrix-vector product per event instead of building them number by number.
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
        # [P_0 Q_0 P_1 Q_1 ...] (width, 2 (q + 1)) and the block rows [w_l; 1] (2 (q + 1), q (d + 1) + 1):
        # their parts that do not depend on the blend (see _node_rows), and where the rest goes (flat)
        n, L = d + 1, q + 1
        PQ = np.zeros((W, 2 * L))
        PQ[q, 2::2], PQ[q + 1, 2::2] = -1.0, -1.0 / T
        PQ[:q, 2::2] -= np.eye(q)
        PQ[:q, 3::2] = T * np.eye(q)
        PQ[q, 3::2] = T
        if self.shifted:
            PQ[q + 2:2 * q + 2, 1::2] = (PQ[:q, 1::2] - offsets[:, None]) / divisor
        PQ[W - 1, 1::2] = 1.0
        # node columns: line i >= 1 at (i - 1) (d + 1) .. i (d + 1) - 1, line 0 (the blend: one node) last
        N = q * n + 1
        Wb = np.zeros((2 * L, N))
        Wb[0, N - 1], Wb[1, N - 1] = T, 1.0
        for line in range(1, L):
            Wb[2 * line, (line - 1) * n:line * n] = T
            Wb[2 * line + 1, (line - 1) * n:line * n] = 1.0
        self.pq_fixed, self.w_fixed, self.first_process = PQ, Wb, v
        self.put_w = np.array([2 * line * N + (line - 1) * n + a for line in range(1, L) for a in range(n)])
        a = np.arange(n)
        self.blocks = np.array([((i * n + a)[:, None] * N + i * n + a[None, :]).ravel()
                                for i in range(q)])  # line i + 1's node Gram in the (N, N) Gram, flat
        self.room_lo = [T - v for v in np.broadcast_to(m.declared_lows, (q,)).tolist()]
        self.room_hi = [T - v for v in np.broadcast_to(m.declared_highs, (q,)).tolist()]
        # a region of bounds only (no other constraints): the slider path's u-form (see _bounds_nodes)
        self.bounds_only = bound_lists(m) if not len(m.G) and q <= 8 else None
        # the u-form of the lines (see _u_parts) is affine in z = [x, u at s = 0, u at s = 1, process settings]:
        # [P | Q], [u; 1] flat = z K (K's last row the constant part)
        self.offsets = offsets
        size = 3 * q + self.tail
        base = np.concatenate([part.ravel() for part in _u_parts(self, np.zeros(size))])
        self.u_map = np.vstack([np.concatenate([part.ravel() for part in _u_parts(self, e)]) - base
                                for e in np.eye(size)] + [base])  # z ends with a 1 for the constant part
        self.u_split = W * 2 * L
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


def bound_lists(mixture) -> tuple:
    """The declared lower and upper bounds of every component as two lists of floats (kept on the mixture: the
    plain-Python range rule reads them on every event)."""
    cached = mixture.__dict__.get("_bounds_lists")
    if cached is None:
        q = mixture.q
        cached = mixture.__dict__["_bounds_lists"] = (
            np.broadcast_to(mixture.declared_lows, (q,)).astype(float).tolist(),
            np.broadcast_to(mixture.declared_highs, (q,)).astype(float).tolist())
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


def _best_two_ratios(xs: list, lows: list, highs: list):
    """The two smallest U_j / x_j and the two largest L_j / x_j over the x_j > 0, with the place of the best of each:
    ``(u1, u2, iu, d1, d2, idn)`` (the rule of :func:`cox_ranges`)."""
    inf = float("inf")
    u1 = u2 = inf
    d1 = d2 = -inf
    iu = idn = -1
    for j in range(len(xs)):
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
    return u1, u2, iu, d1, d2, idn


def cox_ranges(xs: list, T: float, lows: list, highs: list):
    """The range [lo_i, hi_i] of component i's amount t along every Cox line from the blend *xs* in a region of
    bounds only (plain floats; the one rule for every caller).

    Along line i the others are x_j = s_j (T - t) with s_j = x_j / (T - x_i) (equal shares 1 / (q - 1) from a pure
    blend, T - x_i <= 1e-12 T); L_j <= x_j <= U_j gives T - U_j / s_j <= t <= T - L_j / s_j for every s_j > 0, and
    L_i <= t <= U_i. With s_j = x_j / (T - x_i) the tightest are ``T - (T - x_i) min_j U_j / x_j`` and
    ``T - (T - x_i) max_j L_j / x_j`` over the others with x_j > 0, so the best two ratios serve every line."""
    q = len(xs)
    u1, u2, iu, d1, d2, idn = _best_two_ratios(xs, lows, highs)
    los, his = [], []
    for i in range(q):
        rest = T - xs[i]
        if rest > 1e-12 * T:
            a = T - rest * (u2 if i == iu else u1)
            b = T - rest * (d2 if i == idn else d1)
        else:  # a pure blend: the others share equally, s_j = 1 / (q - 1)
            others = [j for j in range(q) if j != i]
            a = T - (q - 1) * min(highs[j] for j in others)
            b = T - (q - 1) * max(lows[j] for j in others)
        los.append(a if a > lows[i] else lows[i])
        his.append(b if b < highs[i] else highs[i])
    return los, his


def cox_shares(xs: list, T: float) -> np.ndarray:
    """(q, q): row i the others' shares s_j along component i's Cox line from the blend *xs* (0 at i; equal shares
    from a pure blend)."""
    x = np.asarray(xs, dtype=float)
    q = len(x)
    rest = T - x
    pure = rest <= 1e-12 * T
    share = x[None, :] / np.where(pure, 1.0, rest)[:, None]
    share[pure] = 1.0 / (q - 1)
    np.fill_diagonal(share, 0.0)
    return share


def _node_rows(plan, PQ, Wb, tail):
    """The node rows of every line, (width, q (d + 1) + 1): ``w P + Q`` (see the module notes) as one product
    of ``[P_0 Q_0 P_1 Q_1 ...]`` and the block rows ``[w_l; 1]``, once the parts that depend on the blend are in
    (P's shares, Q's change; here the model variables of pseudo-components and the process settings)."""
    q = plan.q
    if plan.shifted:
        np.multiply(PQ[:q, 0::2], 1.0 / plan.divisor, out=PQ[q + 2:2 * q + 2, 0::2])
    if plan.tail:
        PQ[plan.first_process:-1, 1::2] = np.array(tail)[:, None]
    return PQ.dot(Wb)


def _u_parts(plan, z):
    """[P_0 Q_0 P_1 Q_1 ...] and the block rows [u_l; 1] of the u-form of the lines at z = [x, u at s = 0,
    u at s = 1, process settings] (arrays; per fit, to build the map of :func:`_u_nodes`). Line i: the blend
    ``T e_i + u (x - T e_i)`` (u = (T - t) / (T - x_i)), so P_i = [x - T e_i | x_i - T | (x_i - T) / T |
    (x - T e_i) / divisor | 0 | 0], Q_i = [T e_i | T | (T - x_i) / T | (T e_i - offset) / divisor | process | 1];
    line 0 the blend itself (P_0 = 0)."""
    q, T, W, n = plan.q, plan.total, plan.width, plan.degree + 1
    L = q + 1
    x, lo, hi, tail = z[:q], z[q:2 * q], z[2 * q:3 * q], z[3 * q:]
    PQ = np.zeros((W, 2 * L))
    Q0 = PQ[:, 1]
    Q0[:q] = x
    if plan.shifted:
        Q0[q + 2:2 * q + 2] = (x - plan.offsets) / plan.divisor
    for i in range(q):
        P, Q = PQ[:, 2 * i + 2], PQ[:, 2 * i + 3]
        e = T * np.eye(q)[i]
        P[:q], P[q], P[q + 1] = x - e, x[i] - T, (x[i] - T) / T
        Q[:q], Q[q], Q[q + 1] = e, T, (T - x[i]) / T
        if plan.shifted:
            P[q + 2:2 * q + 2] = (x - e) / plan.divisor
            Q[q + 2:2 * q + 2] = (e - plan.offsets) / plan.divisor
    PQ[plan.first_process:W - 1, 1::2] = np.asarray(tail)[:, None]
    PQ[W - 1, 1::2] = 1.0
    Wb = np.zeros((2 * L, q * n + 1))
    Wb[1, q * n] = 1.0
    for i in range(q):
        Wb[2 * i + 2, i * n:(i + 1) * n] = lo[i] + (hi[i] - lo[i]) * plan.nodes
        Wb[2 * i + 3, i * n:(i + 1) * n] = 1.0
    return PQ, Wb


def _u_nodes(plan, z):
    """The node rows of every line, (width, q (d + 1) + 1), from z = [x, u at s = 0, u at s = 1, process
    settings, 1] (no pure blend): the u-form parts by one product with the per-fit map, then ``[P | Q] [u; 1]``."""
    flat = z.dot(plan.u_map)  # (the map stored (len(z), parts): the cheaper orientation of the product)
    k = plan.u_split
    return flat[:k].reshape(plan.width, -1).dot(flat[k:].reshape(2 * plan.q + 2, -1))


def _bounds_nodes(xs, T, lows, highs, tail, plan):
    """The node rows in a region of bounds only: u = (T - t) / (T - x_i) at the ends of the ranges of
    :func:`cox_ranges` in the same pass (plain Python), then :func:`_u_nodes`; None from a pure blend."""
    u1, u2, iu, d1, d2, idn = _best_two_ratios(xs, lows, highs)
    tiny = 1e-12 * T
    z = xs.copy()  # then u at t = lo, u at t = hi, the process settings and 1
    uhi = []
    room_hi = plan.room_hi
    for i, (x, room) in enumerate(zip(xs, plan.room_lo)):
        # u at t = lo: min(ratio, (T - low_i) / rest); at t = hi: max(ratio, (T - high_i) / rest)
        rest = T - x
        if rest <= tiny:
            return None
        a = u2 if i == iu else u1
        b = room / rest
        z.append(a if a < b else b)
        a = d2 if i == idn else d1
        b = room_hi[i] / rest
        uhi.append(a if a > b else b)
    z += uhi
    z += tail
    z.append(1.0)
    return _u_nodes(plan, np.array(z))


def _lines_nodes(mixture, xs, tail, plan):
    """:func:`_node_rows` for any region (bounds and constraints), from the lines of ``_cox_lines``."""
    from ._mixture_engine import _cox_lines

    x = np.array(xs, dtype=float)
    A, B, lo, hi = _cox_lines(mixture, x)
    q, T = plan.q, plan.total
    PQ = plan.pq_fixed.copy()
    PQ[:q, 0] = x / T
    PQ[:q, 2::2] = -B.T
    PQ[q + 1, 3::2] = (T - x) / T
    Wb = plan.w_fixed.copy()
    Wb.put(plan.put_w, ((T - lo)[:, None] + (lo - hi)[:, None] * plan.nodes).ravel())
    return _node_rows(plan, PQ, Wb, tail)


def cox_polynomial_traces(engine, plan: CoxPlan, xs: list, variables: list, points: int, c: float):
    """Every Cox line from the blend *xs* (amounts, plain floats; model *variables* likewise) on the unit grid.

    Returns (across, ci, pi, mean0, h0): across (width, q, points) the node-row columns along each line (blend,
    t, change; the last column the mean), ci and pi (q, points) the half-widths ``c sqrt(h)`` and
    ``c sqrt(h + extra)``, and the mean and h at the blend itself.
    """
    q, W, n = plan.q, plan.width, plan.degree + 1
    tail = variables[q:]
    bounds = plan.bounds_only
    nodes = None if bounds is None else _bounds_nodes(xs, plan.total, bounds[0], bounds[1], tail, plan)
    if nodes is None:
        nodes = _lines_nodes(engine.info.mixture, xs, tail, plan)
    flat = nodes  # (width, q (d + 1) + 1): lines 1..q, the blend last
    if plan.picks is not None:
        both = plan.fb_t.dot(np.multiply.reduce(flat.take(plan.picks, axis=0), axis=0))  # [x F | mean]^T
    else:
        both = engine.rows(flat[q + 2:q + 2 + plan.k].T).dot(engine._fb).T
    xf = both[:-1]
    gram = xf.T.dot(xf)  # every pair of nodes; each line's (d + 1) x (d + 1) block on the diagonal
    half = gram.take(plan.blocks).dot(plan.bands(points, c))  # c^2 h on the grid, (q, points)
    ci = np.sqrt(half)
    half += c * c * engine.extra
    pi = np.sqrt(half, out=half)
    flat[W - 1] = both[-1]
    across = nodes[:, :-1].reshape(-1, n).dot(plan.lagrange(points)).reshape(W, q, points)
    return across, ci, pi, both.item(-1), gram.item(-1)


__all__ = ["CoxPlan", "cox_polynomial_traces", "cox_ranges", "cox_shares"]
