"""Cox-direction traces as exact polynomials: the slider-event path of the mixture engine.

Along component i's Cox line the blend is affine in the line's unit parameter s (``t = lo + (hi - lo) s``,
``x(t) = A + t B``), the model variables (proportions or pseudo-components, process factors held) are affine in s,
and every model column is a polynomial in s of degree at most d, the model's largest degree in the components.
So is every column of ``row [F | beta]``. The engine evaluates ``[F | beta]`` rows at d + 1 nodes per line (plus
the current blend), turns them into polynomial coefficients with one fixed interpolation matrix, and evaluates
the polynomials on the cached unit grid: the mean is the last column and h = ||x F||^2 the sum of squares of the
others, exactly the quantities of :meth:`PredictionEngine.mean_and_leverage` (up to rounding).
"""

from __future__ import annotations

import numpy as np


class CoxPlan:
    """Per fit: the degree d along a Cox line, the d + 1 interpolation nodes and, per number of points, the matrix
    that maps values at the nodes to values on the unit grid (the Lagrange basis of the nodes on the grid)."""

    def __init__(self, engine):
        q = engine.info.mixture.q
        degree = int(np.asarray(engine.exponents)[:, :q].sum(axis=1).max(initial=0))
        self.degree = max(degree, 1)
        self.nodes = np.linspace(0.0, 1.0, self.degree + 1)
        self.ends_to_nodes = np.column_stack([1.0 - self.nodes, self.nodes])  # (d + 1, 2): affine in s
        self._to_coefficients = np.linalg.inv(np.vander(self.nodes, self.degree + 1, increasing=True))
        self._grids: dict = {}

    def lagrange(self, points: int) -> np.ndarray:
        """(points, d + 1): values at the nodes -> values on ``linspace(0, 1, points)`` (exact for degree <= d)."""
        cached = self._grids.get(points)
        if cached is None:
            unit = np.linspace(0.0, 1.0, points)
            cached = np.vander(unit, self.degree + 1, increasing=True) @ self._to_coefficients
            cached.flags.writeable = False
            self._grids[points] = cached
        return cached


def _rows(engine, natural):
    """``engine.rows`` for the model variables of a mixture fit, whose coding is the identity (centre 0, scale 1):
    a model column is a product of whole columns of [1, v, v^2, ...] (fewer array operations per event)."""
    identity = engine.__dict__.get("_identity_coding")
    if identity is None:
        identity = engine.__dict__["_identity_coding"] = bool(
            not engine.contrasts and len(engine.exponents) and not engine.center.any() and (engine.scale == 1).all())
    if not identity:
        return engine.rows(natural)
    picks = engine._picks
    parts = [np.ones((natural.shape[0], 1)), natural]
    for _ in range(2, engine._top + 1):
        parts.append(parts[-1] * natural)
    v = np.concatenate(parts, axis=1)
    x = v[:, picks[0]]
    for slot in range(1, len(picks)):
        x *= v[:, picks[slot]]
    return x


def _ends_bounds(mixture, xs, T):
    """Both ends of every Cox line of a region of bounds only, in plain Python (a few components: far fewer array
    operations): per line, the blend, t and the change (t - x_i) / T at t = lo and at t = hi, flat.

    Along line i the others are x_j = s_j (T - t), s_j = r_j / (T - r_i) (equal shares from a pure blend);
    L_j <= x_j <= U_j gives T - U_j / s_j <= t <= T - L_j / s_j for s_j > 0, and L_i <= t <= U_i."""
    q = mixture.q
    lows, highs = mixture.__dict__.get("_bounds_lists") or mixture.__dict__.setdefault(
        "_bounds_lists", (mixture.declared_lows.tolist(), mixture.declared_highs.tolist()))
    ends = []
    for i in range(q):
        xi = xs[i]
        rest = T - xi
        if rest > 1e-12 * T:
            share = [v / rest for v in xs]
        else:
            share = [1.0 / (q - 1)] * q
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
        for t in (a, b):
            left = T - t
            blend = [sj * left for sj in share]
            blend[i] = t
            ends.extend(blend)
            ends.append(t)
            ends.append((t - xi) / T)
    return ends


def cox_polynomial_traces(engine, plan: CoxPlan, x, variables, points: int):
    """Mean and h along every Cox line from the blend *x* (amounts), and at *x* itself (model *variables*).

    Returns (t, change, blends, mean, h, mean0, h0): t (q, points) the moving component's amount, change
    (t - x_i) / T, blends (q, points, q), mean and h (q, points). The blend, t and the change are affine along a
    line: they come from the line's two ends, and the same interpolation as the rest gives them on the grid.
    """
    from ._mixture_engine import _cox_lines

    mixture = engine.info.mixture
    q, T = mixture.q, mixture.total
    offset, divisor = engine._fast[-2:]
    n_nodes = plan.degree + 1
    k = len(variables)
    if not len(mixture.G) and q <= 8:
        ends = np.array(_ends_bounds(mixture, x.tolist(), T)).reshape(q, 2, q + 2)
    else:  # constraints: the lines by arrays (levelwise _cox_lines)
        A, B, lo, hi = _cox_lines(mixture, x)
        t_ends = np.column_stack([lo, hi])
        blends = t_ends[:, :, None] * B[:, None, :]
        blends += A[:, None, :]
        ends = np.concatenate([blends, t_ends[:, :, None], ((t_ends - x[:, None]) / T)[:, :, None]], axis=2)
    at = plan.ends_to_nodes @ ends  # (q, d + 1, q + 2): blend, t, change at each node
    natural = np.empty((1 + q * n_nodes, k))
    natural[0] = variables
    np.divide(at[:, :, :q].reshape(-1, q) - offset, divisor, out=natural[1:, :q])
    if k > q:
        natural[1:, q:] = variables[q:]
    both = _rows(engine, natural) @ engine._fb  # [x F | mean] at the current blend and every node
    values = plan.lagrange(points) @ np.concatenate([at, both[1:].reshape(q, n_nodes, -1)], axis=2)
    xf = values[:, :, q + 2:-1]
    h = np.einsum("qsr,qsr->qs", xf, xf)
    first = both[0]
    return (values[:, :, q], values[:, :, q + 1], values[:, :, :q], values[:, :, -1], h, float(first[-1]),
            float(first[:-1] @ first[:-1]))


__all__ = ["CoxPlan", "cox_polynomial_traces"]
