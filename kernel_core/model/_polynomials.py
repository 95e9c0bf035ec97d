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
        self._exps = np.arange(self.D + 1, dtype=float)[:, None]  # (D+1, 1): every power of every factor at once
        # The slider event's stack: the k traces' spreads, then the setting's own row as a constant polynomial
        # (its row of F and mean in the power-0 slot, zero above).
        point = np.zeros((p, (self.D + 1) * (p + 1)))
        point[:, : p + 1] = self.rinv_beta
        self._event_spread = np.ascontiguousarray(np.concatenate([self._spread, point[None]]))
        # Where, in the table of powers (D+1, k) flattened, each factor's part of each row of the event's stack
        # is: row j < k holds factor j's trace constants (factor j itself contributes its power 0, a 1), row k is
        # the setting's own model row. One take and one product over the factors give the whole stack.
        stack = np.tile(E.T * k + np.arange(k)[:, None], (1, k + 1)).reshape(k, k + 1, p)  # (factor, row, column)
        stack[np.arange(k), np.arange(k), :] = np.arange(k)[:, None]  # power 0 of factor j in row j
        self._event_index = np.ascontiguousarray(stack.reshape(k, (k + 1) * p))
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

    def powers_of(self, table: np.ndarray) -> np.ndarray:
        """:meth:`powers` from the (D+1, k) table of every power of every coded factor that :meth:`event` gives."""
        return table.take(self._flat).reshape(self.p, self.k)

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

    def event(self, natural: np.ndarray, points: int):
        """One slider event's numbers from one chain of small products: the setting's mean and h, and the mean
        and h along every factor's trace, (k, points) each, with the x grids and the setting's table of powers.

        The rows of the k held-factor constants and the setting's own row go through one batched product with
        the spreads, which gives every trace's polynomial coefficients of ``[x F | x b]`` (and the setting's row
        of F and mean); one batched product with the grids' Vandermonde matrices gives ``[x F | x b]`` at every
        grid point, and h = ``||x F||^2`` (not scaled) is its sum of squares. The last item, the setting's (D+1, k)
        table of powers, gives :meth:`powers` with :meth:`powers_of`.
        """
        xs, _, vander = self.trace_grids(points)
        k, p = self.k, self.p
        table = np.power((natural - self.center) * self._inv_scale, self._exps)  # (D+1, k) every power
        rows = np.multiply.reduce(table.take(self._event_index), axis=0).reshape(k + 1, 1, p)
        z = np.matmul(rows, self._event_spread).reshape(k + 1, self.D + 1, p + 1)
        grid = np.matmul(vander, z[:k])  # (k, points, p + 1): [x F | x b] along every trace
        xf = grid[:, :, :p]
        own = z[k, 0]
        return (xs, float(own[p]), float(own[:p] @ own[:p]), grid[:, :, p], np.einsum("kti,kti->kt", xf, xf),
                table)

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
