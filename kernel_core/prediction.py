"""The cached predictor used on the interactive path.

Everything that does not depend on the setting is computed once at fit time:
the exponent matrix, the coefficients, ``M = R^-1`` (any square root of
``(X'X)^-1``, so that ``x (X'X)^-1 x' = ||x M||^2``), s, and the t quantiles per
confidence level. A slider event is then a few small array products.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .formula import monomials


def encode(natural: np.ndarray, center: np.ndarray, scale: np.ndarray, contrasts: tuple = ()) -> np.ndarray:
    """Map natural settings (m, k) to the model's coded variables.

    Continuous factors become ``(x - center) / scale``. A categorical factor's column holds
    the index of its level, which becomes a row of its contrast matrix (``contrasts[j]``, an
    (L, L-1) array); ``contrasts`` is empty when every factor is continuous (the fast path).
    """
    natural = np.atleast_2d(np.asarray(natural, dtype=float))
    if not contrasts:
        return (natural - center) / scale
    parts = []
    for j, contrast in enumerate(contrasts):
        if contrast is None:
            parts.append(((natural[:, j] - center[j]) / scale[j])[:, None])
        else:
            parts.append(contrast[natural[:, j].astype(int)])
    return np.hstack(parts) if parts else np.empty((len(natural), 0))


@dataclass(frozen=True, eq=False)
class Predictor:
    """Compiled model: settings in natural units -> mean, CI and PI half-widths.

    Attributes
    ----------
    exponents : (p, k') int ndarray
        One row per model column over the coded variables.
    beta : (p,) ndarray
    rinv : (p, p) ndarray
        A square root of ``(X'X)^-1``.
    center, scale : (k,) ndarray
        Coding of each factor (categorical factors: 0 and 1).
    s : float
        Residual standard deviation.
    t_of_level : callable
        Cached two-sided t quantile for a confidence level.
    contrasts : tuple
        Per factor, None or the contrast matrix of a categorical factor; empty when all continuous.
    max_leverage : float
        Largest leverage among the runs of the fit (for the extrapolation flag).
    """

    exponents: np.ndarray
    beta: np.ndarray
    rinv: np.ndarray
    center: np.ndarray
    scale: np.ndarray
    s: float
    t_of_level: Callable[[float], float]
    contrasts: tuple = ()
    max_leverage: float = np.inf

    def __post_init__(self):
        # Compile the exponent matrix once. v = [1, x, x^2, ..., x^top] (each power for every coded
        # variable) and every term is the product of at most F entries of v, picked by index.
        exponents = np.asarray(self.exponents)
        p, k = exponents.shape
        top = int(exponents.max(initial=0))
        width = max(1, int((exponents > 0).sum(axis=1).max(initial=0)))
        picks = np.zeros((width, p), dtype=np.intp)
        for j, row in enumerate(exponents):
            for slot, i in enumerate(np.flatnonzero(row)):
                picks[slot, j] = 1 + (row[i] - 1) * k + i
        inv_scale = 1.0 / np.asarray(self.scale, dtype=float)
        object.__setattr__(self, "_plan", (k, top, picks, inv_scale))

    def rows(self, natural: np.ndarray) -> np.ndarray:
        """Model rows for an (m, k) array of natural settings."""
        k, top, picks, inv_scale = self._plan
        if self.contrasts:
            coded = encode(natural, self.center, self.scale, self.contrasts)
        else:
            natural = np.asarray(natural, dtype=float)
            coded = (natural.reshape(1, -1) if natural.ndim == 1 else natural) - self.center
            coded *= inv_scale
        m = coded.shape[0]
        if m * picks.size > 2_000_000 or coded.shape[1] == 0:
            return monomials(coded, self.exponents)
        parts = [np.ones((m, 1)), coded]
        for _ in range(2, top + 1):
            parts.append(parts[-1] * coded)
        v = np.concatenate(parts, axis=1)
        x = v[:, picks[0]]
        for slot in range(1, len(picks)):
            x *= v[:, picks[slot]]
        return x

    def mean_and_leverage(self, natural: np.ndarray):
        """Predicted mean and leverage ``x (X'X)^-1 x'`` at each row of *natural*."""
        x = self.rows(natural)
        xr = x @ self.rinv
        return x @ self.beta, np.einsum("ij,ij->i", xr, xr)

    def intervals(self, natural: np.ndarray, level: float):
        """Mean, CI half-width and PI half-width at each row of *natural*."""
        mean, h = self.mean_and_leverage(natural)
        qs = self.t_of_level(level) * self.s
        return mean, qs * np.sqrt(h), qs * np.sqrt(1.0 + h)


class InteractivePlan:
    """Per-fit constants of the interactive path for a polynomial model in continuous factors.

    With every factor but one (a trace) or two (a surface slice) held fixed, each model column
    is ``const_j * u^a`` (``* v^b``), so the mean is a polynomial in the free coded variable(s)
    and the variance factor ``h = x (X'X)^-1 x'`` a quadratic form in its monomials. Evaluating
    those on grids fixed per fit (Vandermonde matrices cached here) is exact, and much cheaper
    than building and multiplying a model row per grid point. One slider event then costs a few
    small array products, with no DataFrame, no formula and no validation through pandas.

    Build it with ``Fit.interactive_plan`` (cached per fit); use it through ``Fit.refresh``.
    """

    def __init__(self, exponents, beta, rinv, center, scale, low, high):
        E = np.asarray(exponents, dtype=np.intp)
        p, k = E.shape
        self.k, self.p = k, p
        self.Ef = E.astype(float)
        self.E = E
        self.D = int(E.max(initial=0))
        self.beta = np.asarray(beta, dtype=float)
        self.rinv = np.asarray(rinv, dtype=float)
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
        # spread[j, c, a*(p+1) + q] = onehot[j, c, a] * [R^-1 | beta][c, q]: one product with the held
        # factors' column constants gives, per factor and power, the row of R^-1 and the mean coefficient.
        spread = onehot[:, :, :, None] * self.rinv_beta[None, :, None, :]
        self._spread = np.ascontiguousarray(spread.reshape(k, p, (self.D + 1) * (p + 1)))
        self._inv_scale = 1.0 / self.scale
        self._ones = np.ones(k)
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
            # spread[c, i*(p+1) + q] = to_monomial[c, i] * [R^-1 | beta][c, q]: one product with the
            # fixed factors' column constants gives each monomial's row of R^-1 and its mean coefficient.
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

    def point(self, natural: np.ndarray, powers: np.ndarray, ts: float, max_leverage: float) -> dict:
        """Mean, CI, PI, leverage and extrapolation flag at one natural setting."""
        both = powers.prod(axis=1) @ self.rinv_beta  # the row times R^-1, then the mean
        xr = both[:-1]
        mean, h = float(both[-1]), float(xr @ xr)
        ci, pi = ts * math.sqrt(h), ts * math.sqrt(1.0 + h)
        outside = h > max_leverage * (1.0 + 1e-9) + 1e-12 or any(
            value < low or value > high for value, low, high in zip(natural.tolist(), self._lows, self._highs))
        return {"mean": mean, "ci_low": mean - ci, "ci_high": mean + ci, "pi_low": mean - pi,
                "pi_high": mean + pi, "leverage": h, "extrapolated": outside}

    def traces(self, powers: np.ndarray, ts: float, points: int):
        """Mean, CI and PI half-widths along every factor, (k, points) each, and the x grids."""
        xs, outer, vander = self.trace_grids(points)
        k, p, width = self.k, self.p, self.D + 1
        const = powers[:, self._held].prod(axis=2).T  # (k, p): each column's factor from the held factors
        z = np.matmul(const[:, None, :], self._spread).reshape(k, width, p + 1)
        rows = z[:, :, :p]
        gram = np.matmul(rows, rows.transpose(0, 2, 1))  # (k, D+1, D+1)
        gram *= ts * ts  # so that h below is already (t s)^2 x (X'X)^-1 x'
        h = np.matmul(outer, gram.reshape(k, width * width, 1)).reshape(k, -1)
        mean = np.matmul(vander, z[:, :, p:]).reshape(k, -1)
        np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
        ci = np.sqrt(h)
        h += ts * ts
        pi = np.sqrt(h, out=h)
        return xs, mean, ci, pi

    def slice(self, powers: np.ndarray, ts: float, ix: int, iy: int, shape) -> dict:
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
        h += ts * ts
        pi = np.sqrt(h, out=h)
        return {"x": plan["xs"], "y": plan["ys"], "mean": mean, "ci_half": ci, "pi_half": pi}
