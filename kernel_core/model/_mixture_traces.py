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
    """``engine.rows`` for the model variables of a mixture fit, whose coding is the identity (centre 0, scale 1),
    in four array operations: every power of every variable at once, then one gather and one product."""
    plan = engine.__dict__.get("_plain_rows")
    if plan is None:
        identity = bool(not engine.contrasts and len(engine.exponents) and not engine.center.any()
                        and (engine.scale == 1).all())
        if identity:
            E = np.asarray(engine.exponents)
            k = E.shape[1]
            width = max(1, int((E > 0).sum(axis=1).max(initial=0)))
            picks = np.zeros((E.shape[0], width), dtype=np.intp)  # index e * k + i of v_i^e; 0 is v_0^0 = 1
            for j, row in enumerate(E):
                for slot, i in enumerate(np.flatnonzero(row)):
                    picks[j, slot] = row[i] * k + i
            plan = (np.arange(int(E.max()) + 1, dtype=float)[:, None], picks)
        else:
            plan = False
        engine.__dict__["_plain_rows"] = plan
    if plan is False:
        return engine.rows(natural)
    powers, picks = plan
    table = np.power(natural[:, None, :], powers).reshape(natural.shape[0], -1)
    return table[:, picks].prod(axis=2)


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


def _ends_bounds(mixture, xs, T, offset, divisor, tail):
    """Both ends of every Cox line of a region of bounds only, in plain Python (a few components: far fewer array
    operations): per line and end, the blend, t, the change (t - x_i) / T and the model variables, flat. A last
    line whose two ends are the current blend itself gives the point.

    Along line i the others are x_j = s_j (T - t), s_j = r_j / (T - r_i) (equal shares from a pure blend);
    L_j <= x_j <= U_j gives T - U_j / s_j <= t <= T - L_j / s_j for s_j > 0, and L_i <= t <= U_i."""
    q = mixture.q
    lows, highs = mixture.__dict__.get("_bounds_lists") or mixture.__dict__.setdefault(
        "_bounds_lists", (mixture.declared_lows.tolist(), mixture.declared_highs.tolist()))
    ends = []
    for i in range(q):
        xi = xs[i]
        share, a, b = cox_line_range(i, xs, T, lows, highs)
        for t in (a, b):
            left = T - t
            blend = [sj * left for sj in share]
            blend[i] = t
            ends.extend(blend)
            ends.append(t)
            ends.append((t - xi) / T)
            ends.extend([(v - o) / divisor for v, o in zip(blend, offset)])
            ends.extend(tail)
    here = xs + [0.0, 0.0] + [(v - o) / divisor for v, o in zip(xs, offset)] + tail
    return ends + here + here


def cox_polynomial_traces(engine, plan: CoxPlan, x, variables, points: int):
    """Mean and h along every Cox line from the blend *x* (amounts), and at *x* itself (model *variables*).

    Returns (t, change, blends, mean, h, mean0, h0): t (q, points) the moving component's amount, change
    (t - x_i) / T, blends (q, points, q), mean and h (q, points). The blend, t, the change and the model variables
    are affine along a line: they come from the line's two ends, and the same interpolation as the rest gives
    them at the nodes and on the grid.
    """
    from ._mixture_engine import _cox_lines

    mixture = engine.info.mixture
    q, T = mixture.q, mixture.total
    offset, divisor = engine._fast[-2:]
    n_nodes = plan.degree + 1
    k = len(variables)
    width = q + 2 + k
    if not len(mixture.G) and q <= 8:
        offsets = plan.__dict__.get("_offsets") or plan.__dict__.setdefault(
            "_offsets", np.broadcast_to(offset, (q,)).astype(float).tolist())
        flat = _ends_bounds(mixture, x.tolist(), T, offsets, divisor, variables[q:].tolist())
        ends = np.array(flat).reshape(q + 1, 2, width)
    else:  # constraints: the lines by arrays (levelwise _cox_lines)
        A, B, lo, hi = _cox_lines(mixture, x)
        t_ends = np.column_stack([lo, hi])
        ends = np.empty((q + 1, 2, width))
        ends[:q, :, :q] = t_ends[:, :, None] * B[:, None, :] + A[:, None, :]
        ends[:q, :, q] = t_ends
        ends[:q, :, q + 1] = (t_ends - x[:, None]) / T
        ends[:q, :, q + 2:q + 2 + q] = (ends[:q, :, :q] - offset) / divisor
        ends[:q, :, q + 2 + q:] = variables[q:]
        ends[q, :, :q], ends[q, :, q:q + 2], ends[q, :, q + 2:] = x, 0.0, variables
    at = plan.ends_to_nodes @ ends  # (q + 1, d + 1, width) at the nodes; the last line is the point
    both = _rows(engine, at[:, :, q + 2:].reshape(-1, k)) @ engine._fb  # [x F | mean] at every node
    values = plan.lagrange(points) @ np.concatenate([at[:q, :, :q + 2], both[:-n_nodes].reshape(q, n_nodes, -1)],
                                                     axis=2)
    xf = values[:, :, q + 2:-1]
    h = np.einsum("qsr,qsr->qs", xf, xf)
    first = both[-1]
    return (values[:, :, q], values[:, :, q + 1], values[:, :, :q], values[:, :, -1], h, float(first[-1]),
            float(first[:-1] @ first[:-1]))


__all__ = ["CoxPlan", "cox_line_range", "cox_polynomial_traces"]
