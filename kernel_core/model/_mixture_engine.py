"""The prediction engine of a mixture fit: the one engine of :mod:`levelwise.model._engine`, over the model
variables (proportions or L-pseudo-components, coded process factors), with

* the **settings check** of a blend: component amounts summing to the total inside the bounds and constraints
  (a :class:`~levelwise.LevelwiseError` names the components), process settings in natural units;
* **traces along Cox directions** (Cox 1971, *Biometrika* 58, 155-159): component i moves from the reference
  blend while the others keep their relative proportions, ``x_j = r_j (T - t) / (T - r_i)``, over every
  amount that keeps the blend in the region; process factors are traced over their range;
* a fast path for slider events (a blend of plain numbers: checked in plain Python, the point and every trace
  in one evaluation).

The mean, the CI/PI half-widths and the extrapolation rule are the base engine's.
"""

from __future__ import annotations

import math
import operator

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._numbers import finite_number, float_values
from ._engine import PredictionEngine
from ._mixture_traces import CoxPlan, bound_lists, cox_polynomial_traces, cox_ranges, cox_shares
from ._settings import check_points

_PLAIN = frozenset((float, int))  # the value types of the slider fast path


class MixtureEngine(PredictionEngine):
    """:class:`PredictionEngine` of a :class:`~levelwise.MixtureFit` (build it with :meth:`of`)."""

    @classmethod
    def of(cls, engine: PredictionEngine, info) -> MixtureEngine:
        """The mixture engine sharing everything with the ordinary *engine* of the same fit."""
        new = object.__new__(cls)
        new.__dict__.update(engine.__dict__)
        new.info = info
        new._plan = None  # traces follow Cox directions, not single factors
        new._fast = new._constants()
        return new

    def _constants(self):
        info = self.info
        m = info.mixture
        return (info.names, m.q, m.total, 1e-9 * m.total, m.declared_lows.tolist(), m.declared_highs.tolist(),
                len(m.G) > 0, [(f.center, f.half_range) for f in info.process],
                np.broadcast_to(m.lows if info.pseudo else 0.0, (m.q,)).astype(float).tolist(),
                float(m.pseudo_range if info.pseudo else m.total))

    def _fast_lists(self, settings):
        """(amounts, model variables) as lists of floats of a valid blend given as a dict of plain numbers; None
        otherwise (the general path then checks it and names what is wrong). Plain Python: this runs on every
        slider event."""
        names, q, total, tol, lows, highs, constrained, process, offsets, divisor = self._fast
        if type(settings) is not dict or len(settings) != len(names):
            return None
        bounds = self.__dict__.get("_fast_bounds")
        if bounds is None:
            plain = not any(offsets)
            pick = operator.itemgetter(*names)
            bounds = self.__dict__["_fast_bounds"] = (
                [lo - tol for lo in lows], [hi + tol for hi in highs], plain, plain and divisor == 1.0,
                pick if len(names) > 1 else (lambda d: (pick(d),)))
        try:
            row = bounds[4](settings)  # a tuple in the order of names
        except KeyError:
            return None
        if not _PLAIN.issuperset(map(type, row)):  # floats and ints only (not bool, not strings, not arrays)
            return None
        amounts = row[:q] if process else row
        try:
            if not abs(math.fsum(amounts) - total) <= tol:  # NaN and infinities fail here too
                return None
        except (ValueError, OverflowError):  # inf - inf, or an overflow in the sum
            return None
        xs = list(map(float, amounts))
        if not (all(map(operator.le, bounds[0], xs)) and all(map(operator.le, xs, bounds[1]))):
            return None
        if constrained:
            m = self.info.mixture
            if (m.G @ np.array(xs) > m.h + tol).any():
                return None
        # (x - offset) / divisor; without offsets x / divisor (the same numbers: x - 0.0 is x)
        # (x / 1.0 is x: the plain proportions are the amounts themselves)
        if bounds[3]:
            variables = [*xs]
        elif bounds[2]:
            variables = [v / divisor for v in xs]
        else:
            variables = [(v - o) / divisor for v, o in zip(xs, offsets)]
        for j, (centre, half) in enumerate(process):
            value = row[q + j]
            if not finite_number(value):  # NaN, infinities and ints beyond the float range: the checked path
                return None
            variables.append((value - centre) / half)
        return xs, variables

    def _fast_blend(self, settings):
        """(amounts, model variables) arrays of a valid blend given as a dict of plain numbers; None otherwise."""
        fast = self._fast_lists(settings)
        return None if fast is None else (np.array(fast[0]), np.array(fast[1]))

    # -- the settings check: blends ------------------------------------------------------------------------
    def _variables(self, settings, where="settings") -> np.ndarray:
        """(m, k) model variables of blends given as a dict or DataFrame (checked, naming the components)."""
        info = self.info
        if isinstance(settings, dict):
            unknown = [str(key) for key in settings if key not in self._index]
            if unknown:
                raise LevelwiseError(f"The 'settings' name {unknown}, which the mixture model does not have; its "
                                     f"components and process factors are {list(self.factor_names)}.")
            frame = pd.DataFrame({key: np.atleast_1d(np.asarray(value, dtype=object))
                                  for key, value in settings.items()}) if settings else pd.DataFrame()
        elif isinstance(settings, pd.DataFrame):
            frame = settings
        else:
            raise LevelwiseError("The 'settings' parameter must be a dict or DataFrame of component amounts (and "
                                 f"process settings). Got {describe(settings)} instead.")
        amounts = info.mixture.amounts_from(frame, where)
        process = None
        if info.process:
            missing = [f.name for f in info.process if f.name not in frame.columns]
            if missing:
                raise LevelwiseError(f"The 'settings' are missing process factor(s) {missing}.")
            process = np.column_stack([float_values(frame[f.name]) for f in info.process])
            if not np.isfinite(process).all():
                j = int(np.argwhere(~np.isfinite(process))[0][1])
                raise LevelwiseError(f"The setting for process factor {info.process[j].name!r} must be a finite "
                                     "number.")
        return info.variables(amounts, process)

    def vector(self, settings, free=()) -> np.ndarray:
        """One blend ``{component: amount, process factor: setting}`` -> its (k,) model variables."""
        fast = self._fast_blend(settings)
        if fast is not None:
            return fast[1]
        if not isinstance(settings, dict):
            raise LevelwiseError("The 'settings' parameter must be a dict of component -> amount. "
                                 f"Got {describe(settings)} instead.")
        variables = self._variables(settings)
        if len(variables) != 1:
            raise LevelwiseError("The 'settings' must be a single blend here.")
        return variables[0]

    def columns(self, settings) -> np.ndarray:
        """Blends (a dict, a dict of lists or a DataFrame) -> (k, m) model variables."""
        fast = self._fast_blend(settings)
        if fast is not None:
            return fast[1][:, None]
        return np.ascontiguousarray(self._variables(settings).T)

    def amounts(self, settings) -> np.ndarray:
        """The checked (q,) component amounts of one blend."""
        fast = self._fast_blend(settings)
        return fast[0] if fast is not None else self.info.mixture.amounts_from(settings)[0]

    # -- traces and slider events --------------------------------------------------------------------------
    def cox_traces(self, settings, points=50, level=None, only=None) -> dict:
        """Every component's Cox-direction trace and every process factor's trace (see :func:`cox_traces`)."""
        level = self._level(level)
        points = check_points(points)
        if only is not None and only not in self._index:
            raise LevelwiseError(f"The 'factor' parameter must be one of {list(self.factor_names)}. "
                                 f"Got {describe(only)} instead.")
        out = self._refresh(self.amounts(settings).tolist(), self.vector(settings).tolist(), level, points,
                            point=False)["traces"]
        return out if only is None else {only: out[only]}

    def trace(self, factor, settings, points=50, level=None) -> dict:
        return self.cox_traces(settings, points, level, only=factor)[factor]

    def traces(self, settings, points=50, level=None) -> dict:
        return self.cox_traces(settings, points, level)

    def slice(self, *args, **kwargs):
        raise LevelwiseError("A surface slice of a mixture fit is not available; use levelwise.ternary_slice.")

    def payload(self, level=None) -> dict:
        """What the offline page evaluates: the base engine's payload over the model variables (``factors`` names
        the components then the process factors; every variable has centre 0 and scale 1) plus ``mixture``, how a
        blend becomes those variables and the region it must stay in::

            component variable  = (x_i - offset_i) / divisor   (proportions: offset 0, divisor T;
                                                                 pseudo-components: offset L_i, divisor T - sum L)
            process variable    = (x - center) / half_range
            region              = declared bounds, G x <= h; Cox moves as in :func:`cox_traces`
        """
        out = PredictionEngine.payload(self, level)
        info = self.info
        m = info.mixture
        offset, divisor = self._fast[-2:]
        out["mixture"] = {
            "components": list(m.names), "units": [c.units for c in m.components], "total": m.total,
            "declared_low": m.declared_lows.tolist(), "declared_high": m.declared_highs.tolist(),
            "low": m.lows.tolist(), "high": m.highs.tolist(), "G": m.G.tolist(), "h": m.h.tolist(),
            "pseudo": bool(info.pseudo), "offset": list(offset),
            "divisor": float(divisor),
            "process": [{"name": f.name, "units": f.units, "center": f.center, "half_range": f.half_range,
                         "low": f.low, "high": f.high} for f in info.process],
        }
        return out

    def refresh(self, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
        """The point and every trace of one slider event (no surface slice for mixtures)."""
        if slice_axes is not None:
            raise LevelwiseError("A surface slice of a mixture fit is not available; use slice_axes=None "
                                 "(levelwise.ternary_slice draws three components).")
        level = self.level if level is None else self._level(level)
        if points is not None and (type(points) is not int or not 2 <= points <= 100_000):
            points = check_points(points)  # (raises, naming what arrived; a whole-number numpy value passes)
        fast = self._fast_lists(settings)
        if fast is None:
            fast = self.amounts(settings).tolist(), self.vector(settings).tolist()
        return self._refresh(fast[0], fast[1], level, points, point)

    def _refresh(self, xs, variables, level, points, point):
        """The slider event of the checked blend *xs* with model *variables* (lists of floats)."""
        c = self._scale(level)
        if points is not None:  # the exact polynomials along every Cox line (see _mixture_traces)
            plan = self.__dict__.get("_cox_plan")
            if plan is None:
                plan = self.__dict__["_cox_plan"] = CoxPlan(self)
            across, ci_t, pi_t, mean0, h0 = cox_polynomial_traces(self, plan, xs, variables, points, c)
        else:
            mean, h = self.mean_and_leverage(np.array(variables)[None, :])
            mean0, h0 = float(mean[0]), float(h[0])
        out = {"point": None, "slice": None, "traces": None}
        if point:
            out["point"] = self._point_of(variables, mean0, h0, c)
        if points is not None:
            q = plan.q
            traces = {name: {"x": x, "amount": t, "blends": b, "mean": mu, "ci_half": ci, "pi_half": pi}
                      for name, x, t, b, mu, ci, pi in zip(self.factor_names, across[q + 1], across[q],
                                                           across[:q].transpose(1, 2, 0), across[-1], ci_t, pi_t)}
            process = self.info.process
            if process:
                base = np.array(variables)
                for j, f in enumerate(process):
                    grid_p = np.repeat(base[None, :], points, axis=0)
                    grid_p[:, q + j] = np.linspace(-1.0, 1.0, points)
                    mu, c_half, p_half, _ = self.bands(grid_p, level)
                    traces[f.name] = {"x": f.to_natural(grid_p[:, q + j]), "mean": mu, "ci_half": c_half,
                                      "pi_half": p_half}
            out["traces"] = traces
        return out


def _cox_constants(mixture):
    """Per-mixture constants of :func:`_cox_lines`, cached on the Mixture."""
    cached = mixture.__dict__.get("_cox_constants")
    if cached is None:
        q = mixture.q
        eye = np.eye(q)
        G = np.vstack([-eye, eye, mixture.G])
        h = np.concatenate([-mixture.declared_lows, mixture.declared_highs, mixture.h])
        cached = mixture.__dict__["_cox_constants"] = (eye, 1.0 - eye, np.ascontiguousarray(G.T), h,
                                                       (1.0 - eye) / (q - 1))
    return cached


def _cox_lines(mixture, r):
    """The Cox direction of every component from the blend r, at once.

    Line i: x(t) = A[i] + t B[i] with x_i = t and x_j = r_j (T - t) / (T - r_i) (the others keep their relative
    proportions; from a pure blend they share equally). Returns (A, B, lo, hi): the feasible t of line i is
    [lo[i], hi[i]] (bounds and constraints)."""
    T = mixture.total
    eye, off, GT, h, equal = _cox_constants(mixture)
    if not len(mixture.G) and mixture.q <= 8:
        return _cox_lines_bounds(mixture, r, eye)
    rest = T - r
    pure = rest <= 1e-12 * T
    share = r[None, :] / np.where(pure, 1.0, rest)[:, None] * off
    if pure.any():
        share[pure] = equal[pure]
    A = share * T
    B = eye - share
    slope = B @ GT
    room = h - A @ GT
    ratio = np.divide(room, slope, out=np.zeros_like(room), where=np.abs(slope) > 1e-12)
    lo = np.where(slope < -1e-12, ratio, -np.inf).max(axis=1)
    hi = np.where(slope > 1e-12, ratio, np.inf).min(axis=1)
    return A, B, lo, hi


def _cox_lines_bounds(mixture, r, eye):
    """:func:`_cox_lines` for a region of bounds only: the shares by :func:`cox_shares`, the ranges by
    :func:`cox_ranges` (plain Python: a few components)."""
    T = mixture.total
    lows, highs = bound_lists(mixture)
    rv = r.tolist()
    share = cox_shares(rv, T)
    lo, hi = cox_ranges(rv, T, lows, highs)
    return share * T, eye - share, np.array(lo), np.array(hi)


def _cox_interval(mixture, r, i):
    """The Cox line of component i from the blend r: (a, b, lo, hi); see :func:`_cox_lines`."""
    A, B, lo, hi = _cox_lines(mixture, np.asarray(r, dtype=float))
    return A[i], B[i], lo[i], hi[i]


def cox_traces(fit, reference, points: int = 50, level=None) -> dict:
    """Effect traces along the Cox directions (Cox 1971, *Biometrika* 58, 155-159).

    From the reference blend, component i moves to amount t while every other component keeps its proportion
    relative to the others: ``x_j = r_j (T - t) / (T - r_i)``; t runs over every amount that keeps the blend inside
    the bounds and constraints. Process factors are traced over their range with the blend held.

    Returns
    -------
    dict
        Per component: ``x`` (change of the component's proportion from the reference blend, (t - r_i) / T; a
        common axis for all components), ``amount`` (t), ``blends`` (points, q) amounts, ``mean``, ``ci_half``,
        ``pi_half``. Per process factor: ``x`` (natural settings), ``mean``, ``ci_half``, ``pi_half``.
    """
    engine = getattr(fit, "engine", None)
    if not isinstance(engine, MixtureEngine):
        raise LevelwiseError(f"cox_traces needs a mixture fit (fit_mixture). Got {describe(fit)}.")
    return engine.cox_traces(reference, points, level)


__all__ = ["MixtureEngine", "cox_traces"]
