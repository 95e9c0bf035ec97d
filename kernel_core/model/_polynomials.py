"""Traces and surface slices of a polynomial model as exact polynomials on cached grids.

The engine (:mod:`levelwise.model._engine`) uses this for models in continuous factors only:
with every factor but one (a trace) or two (a slice) held, each model column is a constant times
powers of the free coded variable(s), so the mean is a polynomial and ``h = ||x F||^2`` a quadratic
form in its monomials.
"""

from __future__ import annotations

import numpy as np


class PolynomialPlan:
    """Per-fit constants of the interactive path for a polynomial model in continuous factors.

    With every factor but one (a trace) or two (a surface slice) held fixed, each model column
    is ``const_j * u^a`` (``* v^b``), so the mean is a polynomial in the free coded variable(s)
    and the variance factor ``h = x (X'X)^-1 x'`` a quadratic form in its monomials. Evaluating
    those on grids fixed per fit (Vandermonde matrices cached here) is exact, and much cheaper
    than building and multiplying a model row per grid point. One slider event then costs a few
    small array products, with no DataFrame, no formula and no validation through pandas.

    Built and owned by :class:`~levelwise.model._engine.PredictionEngine` (one per fit). The
    interval half-widths are ``c sqrt(h)`` (CI) and ``c sqrt(h + r)`` (PI), with ``h = ||x F||^2``
    for the covariance factor F, ``c`` the quantile times the square root of the dispersion and
    ``r`` the variance of a new run relative to the dispersion (1 for least squares).
    """

    def __init__(self, exponents, beta, cov_factor, center, scale, low, high):
        E = np.asarray(exponents, dtype=np.intp)
        p, k = E.shape
        self.k, self.p = k, p
        self.Ef = E.astype(float)
        self.E = E
        self.D = int(E.max(initial=0))
        self.beta = np.asarray(beta, dtype=float)
        self.rinv = np.asarray(cov_factor, dtype=float)
        self.center = np.asarray(center, dtype=float)
        self.scale = np.asarray(scale, dtype=float)
        self.low = np.asarray(low, dtype=float)
        self.high = np.asarray(high, dtype=float)
        tol = 1e-9 * self.scale
        self._lows, self._highs = (self.low - tol).tolist(), (self.high + tol).tolist()
        self.rinv_beta = np.ascontiguousarray(np.column_stack([self.rinv, self.beta]))  # (p, p+1)
        # onehot[j, c, a] = 1 when model column c holds factor j to the power a.
        onehot = np.zeros((k, p, self.D + 1))
        onehot[np.arange(k)[:, None], np.arange(p)[None, :], E.T] = 1.0
        self.onehot = onehot
        # Row j: every factor but j (the held ones for factor j's trace).
        self._held = np.array([[i for i in range(k) if i != j] for j in range(k)], dtype=np.intp).reshape(k, k - 1)
        # The same as flat positions in the (p, k) table of powers, (k - 1, k * p): one take and one product give
        # every column's constant from the held factors, for every trace at once.
        self._held_flat = (np.arange(p)[None, None, :] * k + self._held.T[:, :, None]).reshape(k - 1, k * p)
        # spread[j, c, a*(p+1) + q] = onehot[j, c, a] * [F | beta][c, q]: one product with the held
        # factors' column constants gives, per factor and power, the row of F and the mean coefficient.
        spread = onehot[:, :, :, None] * self.rinv_beta[None, :, None, :]
        self._spread = np.ascontiguousarray(spread.reshape(k, p, (self.D + 1) * (p + 1)))
        self._inv_scale = 1.0 / self.scale
        self._ones = np.ones(k)
        self._build_event()
        self._flat = (E * k + np.arange(k)).ravel()  # (power, factor) -> place in the table of powers
        self._traces = {}
        self._slices = {}

    # ----- per-fit grids (built once per points / slice axes and shape) -------------------------
    def trace_grids(self, points: int):
        """Natural x values per factor and the Vandermonde matrices (k, points, D+1) of their coded values."""
        if points not in self._traces:
            xs = [np.linspace(self.low[j], self.high[j], points) for j in range(self.k)]
            for x in xs:
                x.flags.writeable = False
            coded = (np.array(xs) - self.center[:, None]) / self.scale[:, None]
            vander = coded[:, :, None] ** np.arange(self.D + 1)  # (k, points, D+1)
            # Basis of [h | mean]: the products of two powers (for the gram matrix), then the powers.
            outer = np.ascontiguousarray((vander[:, :, :, None] * vander[:, :, None, :]).reshape(self.k, points, -1))
            self._traces[points] = (xs, outer, np.ascontiguousarray(vander))
        return self._traces[points]

    def slice_plan(self, ix: int, iy: int, shape):
        """Cached per (axes, shape): grids, one-hot maps from columns to monomials, Vandermonde matrices."""
        key = (ix, iy, shape)
        if key not in self._slices:
            nx, ny = shape
            a, b = self.E[:, ix], self.E[:, iy]
            dx, dy = int(a.max(initial=0)), int(b.max(initial=0))
            m = (dx + 1) * (dy + 1)
            to_monomial = np.zeros((self.p, m))  # column c -> monomial u^a v^b
            to_monomial[np.arange(self.p), a * (dy + 1) + b] = 1.0
            pa, pb = np.divmod(np.arange(m), dy + 1)
            width = 2 * dy + 1
            target = ((pa[:, None] + pa[None, :]) * width + pb[:, None] + pb[None, :]).ravel()
            to_variance = np.zeros((m * m, (2 * dx + 1) * width))  # gram entries -> monomials of h
            to_variance[np.arange(m * m), target] = 1.0
            xs = np.linspace(self.low[ix], self.high[ix], nx)
            ys = np.linspace(self.low[iy], self.high[iy], ny)
            for grid in (xs, ys):
                grid.flags.writeable = False
            u = (xs - self.center[ix]) / self.scale[ix]
            v = (ys - self.center[iy]) / self.scale[iy]
            others = np.ones(self.k, dtype=bool)
            others[[ix, iy]] = False
            # spread[c, i*(p+1) + q] = to_monomial[c, i] * [F | beta][c, q]: one product with the
            # fixed factors' column constants gives each monomial's row of F and its mean coefficient.
            spread = (to_monomial[:, :, None] * self.rinv_beta[:, None, :]).reshape(self.p, m * (self.p + 1))
            self._slices[key] = {
                "xs": xs, "ys": ys, "dx": dx, "dy": dy, "m": m, "others": others, "spread": spread,
                "to_variance": to_variance,
                "vu1": np.vander(u, dx + 1, increasing=True).T.copy(),
                "vv1": np.vander(v, dy + 1, increasing=True),
                "vu2": np.vander(u, 2 * dx + 1, increasing=True).T.copy(),
                "vv2": np.vander(v, 2 * dy + 1, increasing=True),
            }
        return self._slices[key]

    # ----- per event ----------------------------------------------------------------------------
    def powers(self, natural: np.ndarray) -> np.ndarray:
        """(p, k) coded setting of each factor raised to its exponent in each column."""
        coded = (natural - self.center) * self._inv_scale
        table = [self._ones, coded]  # every power of every coded factor, by repeated products
        for _ in range(2, self.D + 1):
            table.append(table[-1] * coded)
        return np.concatenate(table[: self.D + 1]).take(self._flat).reshape(self.p, self.k)

    def mean_and_leverage(self, powers: np.ndarray):
        """Mean and ``h = ||x F||^2`` at one setting given its :meth:`powers`."""
        both = powers.prod(axis=1) @ self.rinv_beta  # the row times F, then the mean
        xr = both[:-1]
        return float(both[-1]), float(xr @ xr)

    def traces(self, powers: np.ndarray, ts: float, points: int, extra: float = 1.0, pi: bool = True):
        """Mean, CI and PI half-widths along every factor, (k, points) each, and the x grids (``pi=False``: no
        PI half-widths, None in their place)."""
        xs, outer, vander = self.trace_grids(points)
        k, p, width = self.k, self.p, self.D + 1
        # (k, p): each column's factor from the held factors
        const = np.multiply.reduce(powers.take(self._held_flat), axis=0).reshape(k, p)
        z = np.matmul(const[:, None, :], self._spread).reshape(k, width, p + 1)
        rows = z[:, :, :p]
        gram = np.matmul(rows, rows.transpose(0, 2, 1))  # (k, D+1, D+1)
        gram *= ts * ts  # so that h below is already (t s)^2 x (X'X)^-1 x'
        h = np.matmul(outer, gram.reshape(k, width * width, 1)).reshape(k, -1)
        mean = np.matmul(vander, z[:, :, p:]).reshape(k, -1)
        np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
        ci = np.sqrt(h)
        if not pi:
            return xs, mean, ci, None
        h += ts * ts * extra
        return xs, mean, ci, np.sqrt(h, out=h)

    def _build_event(self):
        """The constants of :meth:`event` (see there): the take that makes the rows W, and Q."""
        E, k, p, w = self.E, self.k, self.p, self.D + 1
        slots = max(w, 2)  # rows per factor j: the coefficients of u^0 .. u^D; the setting's row, then the selector
        depth = max(1, int(E.sum(axis=1).max(initial=0)))  # a column is a product of at most this many coded values
        zero, one = k, k + 1  # places of 0 and 1 after the k coded values
        self._coding = np.vstack([np.diag(self._inv_scale), np.zeros((2, k))])  # natural -> coded, 0, 1
        self._offset = np.concatenate([-self.center * self._inv_scale, [0.0, 1.0]])
        # index[d, row, column]: the d-th factor of W[row, column] among the coded values, 0 and 1.
        index = np.full((depth, (k + 1) * slots, p + 1), one, dtype=np.intp)
        index[0] = zero
        for c, exps in enumerate(E):
            factors = [i for i in range(k) for _ in range(exps[i])]  # with multiplicity
            for j in range(k + 1):
                held = [i for i in factors if i != j]  # row j < k: trace j, factor j free (its power in the basis)
                row = j * slots + (exps[j] if j < k else 0)  # ... in the slot of its power; j == k: the setting
                index[:, row, c] = one
                index[: len(held), row, c] = held
        index[:, k * slots + 1, p] = one  # the selector e_p
        self._w_index = index
        # Q = [[F F', 0], [b', 0]]: (W Q W')[i, j] = x_i F F' x_j' on the model rows and x_j b on the selector row.
        q = np.zeros((p + 1, p + 1))
        q[:p, :p] = self.rinv @ self.rinv.T
        q[p, :p] = self.beta
        self._q = q
        # Flat places in Y = W Q W' (m, m) of the coefficients: the mean's (selector row, trace columns) and the
        # setting's mean, then those of h (the block of trace j's rows and columns, each pair a <= b once: the
        # basis doubles a < b) and the setting's h.
        m = (k + 1) * slots
        own, plus = k * slots, k * slots + 1
        self._pairs = [(a, b) for a in range(w) for b in range(a, w)]
        mean = [plus * m + j * slots + a for j in range(k) for a in range(w)] + [plus * m + own]
        h = [(j * slots + a) * m + j * slots + b for j in range(k) for a, b in self._pairs] + [own * m + own]
        self._y_places = np.array(mean + h, dtype=np.intp)
        self._y_split = len(mean)
        self._event_grids = {}

    #: Largest block-diagonal basis (elements, both together) :meth:`event` keeps; beyond it (many points, many
    #: factors) each trace is one product with its own grid's basis, k times less memory.
    block_limit = 1_000_000

    def _event_basis(self, points: int):
        """The x grids and the bases of :meth:`event` (terms, k * points + 1), every trace's grid one after another
        then the setting itself: of the mean, the powers u^a of each trace's free coded value u, and of h, the
        products u^a u^b (a <= b, twice for a < b); the last row picks the setting. Beyond :attr:`block_limit`,
        each trace's own (k, points, terms) instead."""
        if points not in self._event_grids:
            xs, _, vander = self.trace_grids(points)
            k, w, per = self.k, self.D + 1, len(self._pairs)
            pairs = np.stack([(1.0 if a == b else 2.0) * vander[:, :, a] * vander[:, :, b] for a, b in self._pairs],
                             axis=2)  # (k, points, per)
            if (k * (w + per) + 2) * (k * points + 1) > self.block_limit:
                self._event_grids[points] = (xs, vander, pairs)
                return self._event_grids[points]
            mean = np.zeros((k * w + 1, k * points + 1))
            h = np.zeros((k * per + 1, k * points + 1))
            for j in range(k):
                cols = slice(j * points, (j + 1) * points)
                mean[j * w: (j + 1) * w, cols] = vander[j].T
                h[j * per: (j + 1) * per, cols] = pairs[j].T
            mean[-1, -1] = h[-1, -1] = 1.0
            self._event_grids[points] = (xs, mean, h)
        return self._event_grids[points]

    def event(self, natural: np.ndarray, points: int):
        """One slider event's numbers from one chain of small products: the x grids, and the mean and h (not
        scaled, not clipped at 0) along every factor's trace, one after another, then at the setting itself, as
        two (k * points + 1) arrays: ``values[:-1].reshape(k, points)`` are the traces.

        With every factor but j held, each model column is a constant times u^a (u the free coded value of
        factor j), so trace j's model row is ``x = sum_a u^a W[(j, a)]``: its mean ``sum_a u^a W[(j, a)] b``
        and ``h = x F F' x' = sum_ab u^a u^b W[(j, a)] F F' W[(j, b)]'`` are polynomials in u. One take of the
        coded setting and a product per degree give the rows W (with the setting's own row and a selector of
        b); ``Y = W Q W'`` holds every coefficient, and one take of Y and a product with each of the grids'
        cached bases give every value. No model row is built per grid point.
        """
        xs, mean_basis, h_basis = self._event_grids.get(points) or self._event_basis(points)
        coded = self._coding.dot(natural)  # the coded setting, then 0 and 1
        coded += self._offset
        factors = coded.take(self._w_index)  # (depth, rows, columns); indexed, not iterated (an ndarray's
        first = factors[0]                     # iteration ends on a raised and formatted IndexError)
        for d in range(1, len(factors)):
            first *= factors[d]
        coefs = first.dot(self._q).dot(first.T).take(self._y_places)
        split = self._y_split
        if mean_basis.ndim == 2:
            return xs, coefs[:split].dot(mean_basis), coefs[split:].dot(h_basis)
        k, n = self.k, self.k * points
        values = np.empty((2, n + 1))  # many points: one product per trace with its grid's basis
        for row, basis, part in ((values[0], mean_basis, coefs[:split]), (values[1], h_basis, coefs[split:])):
            np.matmul(basis, part[:-1].reshape(k, -1, 1), out=row[:n].reshape(k, points, 1))
            row[n] = part[-1]
        return xs, values[0], values[1]

    def slice(self, powers: np.ndarray, ts: float, ix: int, iy: int, shape, extra: float = 1.0) -> dict:
        """Mean and CI/PI half-width grids (ny, nx) over factors ix (across) and iy (up)."""
        plan = self.slice_plan(ix, iy, shape)
        const = powers[:, plan["others"]].prod(axis=1)
        p = self.p
        both = (const @ plan["spread"]).reshape(plan["m"], p + 1)
        mean_coef = both[:, p].reshape(plan["dx"] + 1, plan["dy"] + 1)
        z = both[:, :p]
        var_coef = ((z @ z.T).ravel() @ plan["to_variance"]).reshape(2 * plan["dx"] + 1, 2 * plan["dy"] + 1)
        var_coef *= ts * ts  # so that h below is already (t s)^2 x (X'X)^-1 x'
        mean = plan["vv1"] @ (mean_coef.T @ plan["vu1"])
        h = plan["vv2"] @ (var_coef.T @ plan["vu2"])
        np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
        ci = np.sqrt(h)
        h += ts * ts * extra
        pi = np.sqrt(h, out=h)
        return {"x": plan["xs"], "y": plan["ys"], "mean": mean, "ci_half": ci, "pi_half": pi}
