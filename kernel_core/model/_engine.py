"""The prediction engine: one object per fit that turns factor settings into predictions.

Everything that predicts goes through :class:`PredictionEngine`: ``Fit.predict``, ``refresh``,
``trace``, ``traces``, ``slice`` (and :func:`levelwise.slice_grid`), every view, and the payload
the offline page evaluates in JavaScript. It owns, per fit,

- the **coding** (natural -> coded, categorical levels -> contrast rows),
- the **settings check** (one rule everywhere, below),
- the **model rows** (a compiled exponent matrix) or, for models in continuous factors only, the
  exact **polynomials** of traces and slices (:mod:`levelwise.model._polynomials`),
- the **mean** ``x b``, and the **CI and PI half-widths** from a factor F of the coefficients'
  covariance, ``Cov(b) = dispersion * F F'``: ``h = ||x F||^2``,
  ``CI = q sqrt(dispersion h)``, ``PI = q sqrt(dispersion h + new_run_variance)``, with ``q`` the
  two-sided t quantile on ``df`` degrees of freedom (the normal quantile when ``df`` is None),
- the **extrapolation rule**: a setting is an extrapolation when a factor the model uses lies
  outside its range, or when ``h`` exceeds the largest ``h`` among the runs of the fit.

For least squares F is ``R^-1`` of the pivoted QR, the dispersion is ``s^2`` and a new run's
variance is ``s^2``. Weighted, mixed-model and generalised-linear fits pass their own coefficient
covariance factor, dispersion and new-run variance (or none, for no prediction interval).

The settings check
------------------
A setting is a dict ``{factor: value}`` (natural units; a level for a categorical factor) or a
table (a DataFrame, or a dict of equal-length lists). Every factor the model uses must be given,
except the factor(s) a trace or slice sweeps; a factor the fit knows but the model does not use may
be left out (it changes nothing). A dict naming something that is not a factor of the fit is
refused; a DataFrame may carry other columns (a data table usually does). Values must be finite
numbers or known levels. ``points`` is an integer from 2 to 100000 everywhere. Every refusal is a
:class:`~levelwise.LevelwiseError` naming the factor, parameter or row.
"""

from __future__ import annotations

import math
import operator
import threading

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._stats import norm_ppf, t_ppf
from ._coding import encode
from ._formula import monomials
from ._inputs import _check_level
from ._polynomials import PolynomialPlan
from ._settings import SettingsCheck, check_points, check_shape

_PREDICTION_COLUMNS = ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "leverage")
#: Settings per block when predicting many at once (the model rows of a block stay in cache).
_BLOCK = 2048
#: Settings per block of the triangle path (:meth:`PredictionEngine._triangle_columns`).
_TRIANGLE_BLOCK = 8192
_FRAME_COLUMNS = pd.Index(list(_PREDICTION_COLUMNS))


class _Workspace:
    """Scratch memory of the triangle path, kept between calls and shared by every engine.

    Fresh memory costs a page fault per 4 KiB page on first touch (microseconds each on a virtual
    machine), which dominated a 10,000-row prediction; reused memory does not. It grows to the
    largest block asked for (at most (n + p + 1) * _TRIANGLE_BLOCK floats). One caller at a time
    holds it (a non-blocking lock); a caller that finds it busy (another thread) takes fresh memory.
    """

    def __init__(self):
        self.lock = threading.Lock()
        self.flat = np.empty(0)

    def get(self, size: int) -> np.ndarray:
        if self.flat.size < size:
            self.flat = np.empty(size)
        return self.flat


_WORK = _Workspace()


class PredictionEngine(SettingsCheck):
    """Predictions of one fit: settings check, coding, model rows, mean, CI/PI, extrapolation.

    Parameters
    ----------
    factor_names : sequence of str
        The fit's factors (the columns of a natural setting), in order.
    exponents : (p, k') int array
        One row per model column over the coded variables (k' = k with no categorical factor;
        a categorical factor of L levels gives L-1 contrast variables).
    beta : (p,) array
        Coefficients in coded units.
    cov_factor : (p, r) array
        A factor F of the coefficients' covariance: ``Cov(beta) = dispersion * F F'``.
    center, scale, low, high : (k,) arrays
        Coding (coded = (natural - center) / scale) and the range of each factor.
    dispersion : float
        Scale of the covariance (``s^2`` for least squares; NaN when unknown, e.g. a saturated fit).
    df : int or None
        Degrees of freedom of the t quantile; None uses the normal quantile.
    new_run_variance : float or None
        Variance of one new run (the prediction interval); the dispersion when None.
    categories : dict, optional
        ``{factor: levels}`` of categorical factors; ``contrasts`` gives each factor's contrast
        matrix (None for a continuous one; empty when every factor is continuous).
    used : (k,) bool array, optional
        Factors the model uses (default: from *exponents* when every factor is continuous).
    max_leverage : float
        Largest ``h`` among the runs of the fit (the leverage part of the extrapolation rule).
    level : float
        Default confidence level.
    """

    def __init__(self, *, factor_names, exponents, beta, cov_factor, center, scale, low, high, dispersion=1.0,
                 df=None, new_run_variance=None, categories=None, contrasts=(), used=None, max_leverage=np.inf,
                 level=0.95):
        self.factor_names = tuple(factor_names)
        self.k = len(self.factor_names)
        self.exponents = np.asarray(exponents, dtype=int)
        self.beta = np.asarray(beta, dtype=float)
        self.cov_factor = np.asarray(cov_factor, dtype=float)
        self.center = np.asarray(center, dtype=float)
        self.scale = np.asarray(scale, dtype=float)
        self.low = np.asarray(low, dtype=float)
        self.high = np.asarray(high, dtype=float)
        self.dispersion = float(dispersion)
        self.sigma = math.sqrt(self.dispersion) if self.dispersion >= 0 else float("nan")
        self.new_run_variance = self.dispersion if new_run_variance is None else float(new_run_variance)
        # PI half-width = q sigma sqrt(h + extra), so CI and PI share one scale.
        self.extra = self.new_run_variance / self.dispersion if self.dispersion > 0 else 1.0
        self.df = df
        self.categories = dict(categories or {})
        self.contrasts = tuple(contrasts)
        self.level = float(level)
        if used is None:
            used = self.exponents.any(axis=0) if not self.contrasts else np.ones(self.k, dtype=bool)
        self.used = np.asarray(used, dtype=bool)
        self.max_leverage = float(max_leverage)
        self._index = {name: j for j, name in enumerate(self.factor_names)}
        self._required = tuple(name for name, u in zip(self.factor_names, self.used) if u)
        self._continuous_used = np.array([u and name not in self.categories
                                          for name, u in zip(self.factor_names, self.used)], dtype=bool)
        self._defaults = [float(c) for c in self.center]
        tol = 1e-9 * self.scale
        self._lows, self._highs = (self.low - tol), (self.high + tol)
        self._lows_list = [lo if u else -math.inf for lo, u in zip(self._lows.tolist(), self._continuous_used)]
        self._highs_list = [hi if u else math.inf for hi, u in zip(self._highs.tolist(), self._continuous_used)]
        self._limit = self.max_leverage * (1.0 + 1e-9) + 1e-12
        self._fb = np.ascontiguousarray(np.column_stack([self.cov_factor, self.beta]))
        self._fb_t = np.ascontiguousarray(self._fb.T)
        self._quantiles = {}
        self._grids = {}
        self._compile()

    # ----- model rows ---------------------------------------------------------------------------
    def _compile(self):
        # v = [1, x, x^2, ..., x^top] (each power of every coded variable); every model column is a
        # product of at most `width` entries of v, picked by index.
        E = self.exponents
        p, k = E.shape
        top = int(E.max(initial=0))
        width = max(1, int((E > 0).sum(axis=1).max(initial=0)))
        picks = np.zeros((width, p), dtype=np.intp)
        for j, row in enumerate(E):
            for slot, i in enumerate(np.flatnonzero(row)):
                picks[slot, j] = 1 + (row[i] - 1) * k + i
        self._picks, self._top, self._inv_scale = picks, top, 1.0 / self.scale
        # A model of total degree <= 2 in continuous factors (main effects, two-factor interactions,
        # full second order): every column is w_a w_b (a <= b) with w = [1, coded]. Many settings then
        # need no gathers: k + 1 slab products write every such product (the upper triangle of w w',
        # row by row) and one matrix product with [F | beta] placed on them gives x F and x b.
        self._triangle = None
        if not self.contrasts and p and E.sum(axis=1).max(initial=0) <= 2:
            degree = int(E.sum(axis=1).max(initial=0))
            n = k + 1 if degree <= 1 else (k + 1) * (k + 2) // 2
            start = np.concatenate([[0], np.cumsum(np.arange(k + 1, 0, -1))])  # where row a of the triangle begins
            placed = np.zeros((p + 1, n))
            for j, row in enumerate(E):
                factors = [1 + i for i in np.flatnonzero(row) for _ in range(row[i])]  # with multiplicity
                a, b = ([0, 0] + factors)[-2:]  # the column is w_a w_b, a <= b
                placed[:, b if degree <= 1 else start[a] + b - a] += self._fb[j]
            self._triangle = (degree, np.ascontiguousarray(placed))

    def rows(self, natural: np.ndarray) -> np.ndarray:
        """Model rows (m, p) for an (m, k) array of natural settings (level indices for categorical)."""
        natural = np.asarray(natural, dtype=float)
        if natural.ndim == 1:
            natural = natural.reshape(1, -1)
        if self.contrasts:
            coded = encode(natural, self.center, self.scale, self.contrasts)
        else:
            coded = (natural - self.center) * self._inv_scale
        m, picks = coded.shape[0], self._picks
        if m * picks.size > 2_000_000 or coded.shape[1] == 0:
            return monomials(coded, self.exponents)
        parts = [np.ones((m, 1)), coded]
        for _ in range(2, self._top + 1):
            parts.append(parts[-1] * coded)
        v = np.concatenate(parts, axis=1)
        x = v[:, picks[0]]
        for slot in range(1, len(picks)):
            x *= v[:, picks[slot]]
        return x

    def _mean_and_leverage_columns(self, natural_t: np.ndarray):
        """Mean and h for a (k, m) array of settings (one row per factor): the layout for many settings.

        Every power of a coded factor is a contiguous row, so a model column is a product of whole
        rows (no strided gathers), and one (p+1, p) x (p, m) product gives the mean and x F.
        """
        if self.contrasts:
            return self.mean_and_leverage(natural_t.T)
        m = natural_t.shape[1]
        if self._triangle is not None:  # the triangle path (its own blocks and scratch memory)
            mean, h = np.empty(m), np.empty(m)
            if m:
                self._triangle_columns(natural_t, mean, h)
            return mean, h
        if m > _BLOCK:  # blocks of rows small enough to stay in cache (one Python step per block)
            mean, h = np.empty(m), np.empty(m)
            for start in range(0, m, _BLOCK):
                part = slice(start, start + _BLOCK)
                mean[part], h[part] = self._mean_and_leverage_columns(natural_t[:, part])
            return mean, h
        coded = natural_t - self.center[:, None]
        coded *= self._inv_scale[:, None]
        m, picks = coded.shape[1], self._picks
        parts = [np.ones((1, m)), coded]
        for _ in range(2, self._top + 1):
            parts.append(parts[-1] * coded)
        v = np.concatenate(parts, axis=0)
        x = v[picks[0]]
        for slot in range(1, len(picks)):
            x *= v[picks[slot]]
        both = self._fb_t @ x
        xf = both[:-1]
        return both[-1], np.einsum("ij,ij->j", xf, xf)

    def _triangle_columns(self, natural_t: np.ndarray, mean: np.ndarray, h: np.ndarray):
        """Mean and h of a (k, m) array of settings (triangle path) written into *mean* and *h*.

        Per block of settings, the rows of the triangle (see :meth:`_compile`) and their product with
        the placed ``[F | beta]`` live in scratch memory reused between calls (no fresh pages).
        """
        k, (degree, placed) = self.k, self._triangle
        n, out_rows, m = placed.shape[1], placed.shape[0], natural_t.shape[1]
        blocks = -(-m // _TRIANGLE_BLOCK)
        width = -(-m // blocks)
        center, inv_scale = self.center[:, None], self._inv_scale[:, None]
        owned = _WORK.lock.acquire(blocking=False)
        try:
            size = (n + out_rows) * width
            flat = _WORK.get(size) if owned else np.empty(size)
            for start in range(0, m, width):
                b = min(width, m - start)
                x = flat[:n * b].reshape(n, b)
                both = flat[n * b:(n + out_rows) * b].reshape(out_rows, b)
                x[0] = 1.0
                w = x[1:1 + k]
                np.subtract(natural_t[:, start:start + b], center, out=w)
                w *= inv_scale
                if degree > 1:
                    at = 1 + k
                    for a in range(k):
                        np.multiply(w[a], w[a:], out=x[at:at + k - a])
                        at += k - a
                np.matmul(placed, x, out=both)
                mean[start:start + b] = both[-1]
                xf = both[:-1]
                np.einsum("ij,ij->j", xf, xf, out=h[start:start + b])
        finally:
            if owned:
                _WORK.lock.release()

    @property
    def plan(self) -> PolynomialPlan | None:
        """Exact trace/slice polynomials (None when the model has categorical factors)."""
        if "_plan" not in self.__dict__:
            ok = not self.contrasts and self.k and self.exponents.shape == (len(self.beta), self.k)
            self._plan = PolynomialPlan(self.exponents, self.beta, self.cov_factor, self.center, self.scale,
                                        self.low, self.high) if ok else None
        return self._plan

    # ----- the numbers --------------------------------------------------------------------------
    def quantile(self, level: float) -> float:
        """Two-sided quantile for *level* (t on ``df``, normal when ``df`` is None), cached per level."""
        q = self._quantiles.get(level)
        if q is None:
            if self.df is None:
                q = float(norm_ppf(0.5 + level / 2.0))
            else:
                q = float(t_ppf(0.5 + level / 2.0, self.df)) if self.df > 0 else float("nan")
            self._quantiles[level] = q
        return q

    def _level(self, level) -> float:
        return self.level if level is None or level == self.level else _check_level(level)

    def _scale(self, level) -> float:
        """The factor c of the half-widths: CI = c sqrt(h), PI = c sqrt(h + extra)."""
        return self.quantile(level) * self.sigma

    def mean_and_leverage(self, natural: np.ndarray):
        """Mean and ``h = ||x F||^2`` at each row of an (m, k) array."""
        both = self.rows(natural) @ self._fb
        xf = both[:, :-1]
        return both[:, -1], np.einsum("ij,ij->i", xf, xf)

    def bands(self, natural: np.ndarray, level=None):
        """Mean, CI half-width, PI half-width and h at each row of an (m, k) array."""
        mean, h = self.mean_and_leverage(natural)
        c = self._scale(self._level(level))
        return mean, c * np.sqrt(h), c * np.sqrt(h + self.extra), h

    def extrapolated(self, natural: np.ndarray, h: np.ndarray) -> np.ndarray:
        """The extrapolation rule: a used continuous factor outside its range, or h above the runs' largest."""
        return self._extrapolated_columns(np.asarray(natural, dtype=float).T, h)

    def _extrapolated_columns(self, natural_t: np.ndarray, h: np.ndarray) -> np.ndarray:
        used = self._continuous_used
        if used.all():
            part, lows, highs = natural_t, self._lows[:, None], self._highs[:, None]
        else:
            part, lows, highs = natural_t[used], self._lows[used, None], self._highs[used, None]
        outside = part < lows
        outside |= part > highs
        flag = np.logical_or.reduce(outside, axis=0)
        flag |= h > self._limit
        return flag

    def predict(self, settings, level=None) -> pd.DataFrame:
        """Mean, CI, PI, leverage (h) and the extrapolation flag at each setting (see ``Fit.predict``)."""
        level = self._level(level)
        natural_t = self.table_columns(settings)
        m = natural_t.shape[1]
        # One (6, m) block written in place; its rows become the frame's float columns.
        block = np.empty((6, m))
        mean, ci, pi, h = block[0], block[1], block[3], block[5]
        if self._triangle is not None and m:
            self._triangle_columns(natural_t, mean, h)
        else:
            mean[:], h[:] = self._mean_and_leverage_columns(natural_t)
        # Rows 1 and 3 as one strided (2, m) view: the CI and PI half-widths, then the low ends.
        halves, highs = block[1:4:2], block[2:5:2]
        ci[:] = h
        np.add(h, self.extra, out=pi)
        np.sqrt(halves, out=halves)
        halves *= self._scale(level)
        np.add(mean, halves, out=highs)
        np.subtract(mean, halves, out=halves)
        frame = pd.DataFrame(block.T, columns=_FRAME_COLUMNS, copy=False)
        frame.insert(6, "extrapolated", self._extrapolated_columns(natural_t, h))
        return frame

    def point(self, settings, level=None, natural=None, powers=None) -> dict:
        """One setting -> ``mean``, ``ci_low/high``, ``pi_low/high``, ``leverage``, ``extrapolated``."""
        level = self._level(level)
        if natural is None:
            natural = self.vector(settings)
        plan = self.plan
        if plan is not None:
            mean, h = plan.mean_and_leverage(plan.powers(natural) if powers is None else powers)
        else:
            means, hs = self.mean_and_leverage(natural[None, :])
            mean, h = float(means[0]), float(hs[0])
        return self._point_of(natural, mean, h, self._scale(level))

    def outside_one(self, natural, h: float) -> bool:
        """The extrapolation rule at one setting (natural values as an array or a list of floats, its h)."""
        values = natural.tolist() if type(natural) is np.ndarray else natural
        return bool(h > self._limit or not all(map(operator.le, self._lows_list, values))
                    or not all(map(operator.le, values, self._highs_list)))

    def _factor(self, factor, parameter="factor") -> int:
        if factor not in self._index:
            raise LevelwiseError(
                f"The '{parameter}' parameter must be one of {list(self.factor_names)}. Got {describe(factor)} instead."
            )
        return self._index[factor]

    def _grid(self, j: int, points: int):
        """x values (shown, numeric) along factor j: its levels, or *points* across its range."""
        key = (j, points)
        if key not in self._grids:
            name = self.factor_names[j]
            if name in self.categories:
                labels = np.array(self.categories[name], dtype=object)
                self._grids[key] = (labels, np.arange(len(labels), dtype=float))
            else:
                x = np.linspace(self.low[j], self.high[j], points)
                x.flags.writeable = False
                self._grids[key] = (x, x)
        return self._grids[key]

    def trace(self, factor, settings, points=50, level=None) -> dict:
        """The mean and half-widths along one factor, the others held at *settings*."""
        level = self._level(level)
        j = self._factor(factor)
        points = check_points(points)
        base = self.vector(settings, free=(factor,))
        plan = self.plan
        if plan is not None:
            return self._traces_of(plan, base, level, points)[factor]
        labels, x = self._grid(j, points)
        grid = np.empty((len(x), self.k))
        grid[:] = base
        grid[:, j] = x
        mean, ci, pi, _ = self.bands(grid, level)
        return {"x": labels, "mean": mean, "ci_half": ci, "pi_half": pi}

    def traces(self, settings, points=50, level=None) -> dict:
        """:meth:`trace` for every factor: ``{factor: {"x", "mean", "ci_half", "pi_half"}}``, in one batch."""
        level = self._level(level)
        points = check_points(points)
        base = self.vector(settings)
        plan = self.plan
        if plan is not None:
            return self._traces_of(plan, base, level, points)
        parts, grids = [], []
        for j in range(self.k):
            labels, x = self._grid(j, points)
            grid = np.empty((len(x), self.k))
            grid[:] = base
            grid[:, j] = x
            parts.append(labels)
            grids.append(grid)
        mean, ci, pi, _ = self.bands(np.concatenate(grids), level)
        out, start = {}, 0
        for name, labels in zip(self.factor_names, parts):
            part = slice(start, start + len(labels))
            out[name] = {"x": labels, "mean": mean[part], "ci_half": ci[part], "pi_half": pi[part]}
            start += len(labels)
        return out

    def _traces_of(self, plan, base, level, points, powers=None):
        powers = plan.powers(base) if powers is None else powers
        xs, mean, ci, pi = plan.traces(powers, self._scale(level), points, self.extra)
        return {name: {"x": xs[j], "mean": mean[j], "ci_half": ci[j], "pi_half": pi[j]}
                for j, name in enumerate(self.factor_names)}

    def slice_axes(self, x, y) -> tuple:
        """Positions of the two slice factors (continuous, different)."""
        ix, iy = self._factor(x, "x"), self._factor(y, "y")
        if x == y:
            raise LevelwiseError(f"The 'x' and 'y' parameters must name two different factors. Got {x!r} twice.")
        for parameter, value in (("x", x), ("y", y)):
            if value in self.categories:
                raise LevelwiseError(
                    f"The '{parameter}' parameter must be a continuous factor; {value!r} is categorical. "
                    "Slice over two continuous factors and set the categorical one in 'settings'."
                )
        return ix, iy

    def slice(self, x, y, settings, shape=(100, 100), level=None, base=None, powers=None) -> dict:
        """Mean and CI/PI half-width grids (ny, nx) over factors *x* (across) and *y* (up)."""
        level = self._level(level)
        ix, iy = self.slice_axes(x, y)
        nx, ny = check_shape(shape)
        if base is None:
            base = self.vector(settings, free=(x, y))
        plan = self.plan
        if plan is not None:
            powers = plan.powers(base) if powers is None else powers
            out = plan.slice(powers, self._scale(level), ix, iy, (nx, ny), self.extra)
            return {"x": out["x"], "y": out["y"], "mean": out["mean"], "ci_half": out["ci_half"],
                    "pi_half": out["pi_half"]}
        xs = np.linspace(self.low[ix], self.high[ix], nx)
        ys = np.linspace(self.low[iy], self.high[iy], ny)
        grid = np.empty((nx * ny, self.k))
        grid[:] = base
        xx, yy = np.meshgrid(xs, ys)
        grid[:, ix], grid[:, iy] = xx.ravel(), yy.ravel()
        mean, ci, pi, _ = self.bands(grid, level)
        return {"x": xs, "y": ys, "mean": mean.reshape(ny, nx), "ci_half": ci.reshape(ny, nx),
                "pi_half": pi.reshape(ny, nx)}

    def refresh(self, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
        """Everything one slider event needs (see ``Fit.refresh``)."""
        natural = self.vector(settings)
        level = self._level(level)
        if points is not None:
            points = check_points(points)
        plan = self.plan
        out = {"point": None, "traces": None, "slice": None}
        if plan is not None and points is not None:  # the point and every trace from one chain of products
            xs, mean, h = plan.event(natural, points)
            powers = plan.powers(natural) if slice_axes is not None else None
            c = self._scale(level)
            np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
            if point:
                out["point"] = self._point_of(natural, mean.item(-1), h.item(-1), c)
            ci = np.sqrt(h)
            ci *= c
            h += self.extra
            pi = np.sqrt(h, out=h)
            pi *= c
            k = self.k  # the traces without the setting's column (see plan.event)
            out["traces"] = {name: {"x": x, "mean": m, "ci_half": lo, "pi_half": hi} for name, x, m, lo, hi
                             in zip(self.factor_names, xs, mean[:-1].reshape(k, -1), ci[:-1].reshape(k, -1),
                                    pi[:-1].reshape(k, -1))}
        else:
            powers = plan.powers(natural) if plan is not None else None  # shared by the point and the slice
            if point:
                out["point"] = self.point(None, level, natural, powers)
            if points is not None:
                out["traces"] = self.traces(settings, points, level)
        if slice_axes is not None:
            x, y = slice_pair(slice_axes)
            out["slice"] = self.slice(x, y, None, shape, level, base=natural, powers=powers)
        return out

    def _point_of(self, natural, mean: float, h: float, c: float) -> dict:
        """The point's dict from its mean and h (c: the half-widths' scale, see :meth:`_scale`)."""
        ci, pi = c * math.sqrt(h), c * math.sqrt(h + self.extra)
        return {"mean": mean, "ci_low": mean - ci, "ci_high": mean + ci, "pi_low": mean - pi,
                "pi_high": mean + pi, "leverage": h, "extrapolated": self.outside_one(natural, h)}

    # ----- the offline page ---------------------------------------------------------------------
    def payload(self, level=None) -> dict:
        """What the offline page evaluates, as JSON-able numbers.

        The page computes, for a setting given by factor name, exactly what :meth:`point` does::

            coded_i = (x_i - center_i) / scale_i      (a factor the model does not use: x_i = center_i)
                      for a categorical factor's variable: values[levels.index(x)] (its contrast column)
            row_j   = prod_i coded_i ** exponents[j][i]   (i over the coded variables ``vars``)
            mean    = row . beta;   h = || row F ||^2   (F = cov_factor)
            CI      = mean -/+ c sqrt(h);   PI = mean -/+ c sqrt(h + extra)   (c = quantile * sigma)
            extrapolated = a used factor outside [low, high] (1e-9 of the half-range allowed) or h > limit

        Numbers that are not finite (no residual degrees of freedom) travel as None (JSON null).
        """
        variables = []  # the coded variables: one per continuous factor, L - 1 per categorical one (issue 14)
        for j, name in enumerate(self.factor_names):
            contrast = self.contrasts[j] if self.contrasts else None
            if contrast is None:
                variables.append({"factor": name})
                continue
            levels = [str(v) for v in self.categories[name]]
            variables += [{"factor": name, "levels": levels, "values": contrast[:, c].tolist()}
                          for c in range(contrast.shape[1])]
        level = self._level(level)
        finite = lambda v: float(v) if math.isfinite(v) else None  # noqa: E731
        return {
            "factors": list(self.factor_names),
            "used": [bool(u) for u in self.used],
            "vars": variables,
            "exponents": self.exponents.tolist(),
            "beta": self.beta.tolist(),
            "cov_factor": self.cov_factor.tolist(),
            "center": self.center.tolist(),
            "scale": self.scale.tolist(),
            "low": self._lows.tolist(),
            "high": self._highs.tolist(),
            "level": level,
            "c": finite(self._scale(level)),
            "extra": finite(self.extra),
            "limit": finite(self._limit),
        }


def slice_pair(slice_axes) -> tuple:
    """The (across, up) factor names of a ``slice_axes`` parameter, or a clear error."""
    try:
        x, y = slice_axes
    except (TypeError, ValueError):
        raise LevelwiseError(
            "The 'slice_axes' parameter must be a pair of factor names (across, up). "
            f"Got {describe(slice_axes)} instead."
        ) from None
    return x, y


def predict(fit, settings, level: float | None = None):
    """``fit.predict(settings, level)`` as a function: mean, CI, PI, leverage and the extrapolation flag.

    Examples
    --------
    >>> import pandas as pd
    >>> from levelwise import fit
    >>> d = pd.DataFrame({"A": [-1, 1, -1, 1], "B": [-1, -1, 1, 1], "y": [1.0, 3.0, 2.0, 4.5]})
    >>> float(round(predict(fit(d, "y", "A + B"), {"A": 1, "B": 1})["mean"].iloc[0], 4))
    4.375
    """
    return fit.engine.predict(settings, level)


__all__ = ["PredictionEngine", "check_points", "check_shape", "predict"]
