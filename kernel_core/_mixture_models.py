"""Mixture models: Scheffé polynomials fitted on proportions (or L-pseudo-components), with process factors.

:func:`fit_mixture` maps each blend to its model variables (proportions ``x_i / T``, or L-pseudo-components
``(x_i - L_i) / (T - sum L)``; process factors coded -1/+1) and fits the no-intercept model through
:func:`levelwise.fit`, so coefficients, intervals, diagnostics and exclusions are the ordinary ones. The result is
a :class:`MixtureFit`, a :class:`~levelwise.Fit` that

* treats the model as containing the mean (the proportions sum to 1): R², adjusted R² and the ANOVA use the
  corrected total, and the ANOVA tests the linear blending terms together (``Linear mixture``, q - 1 df);
* takes settings as component amounts (plus process settings in natural units) and refuses a blend that does not
  sum to the total, or breaks a bound or constraint, naming the components; predictions come from the fit's one
  predictor, and leaving the tested region raises the ``extrapolated`` flag;
* draws effect traces along Cox directions (:func:`cox_traces`);
* reports coefficients in proportions and in pseudo-components (the full cubic in its canonical form);
* keeps every linear blending term through :func:`levelwise.reduce`.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from scipy import stats

from ._errors import LevelwiseError, describe
from ._mixture_terms import SCHEFFE_PRESETS, formula_text, model_exponents, scheffe_cubic_canonical
from .design import Factor, as_factors
from .design._mixture_region import Mixture, as_mixture
from .fit import _FIELDS, Fit, _check_level
from .fit import fit as _fit
from .formula import monomials, term_name


@dataclass(frozen=True)
class MixtureInfo:
    """What a mixture fit needs beyond an ordinary fit."""

    mixture: Mixture
    process: tuple
    pseudo: bool
    model: object

    @property
    def names(self) -> list:
        return self.mixture.names + [f.name for f in self.process]

    def variables(self, amounts, process_natural=None) -> np.ndarray:
        """Model variables of checked blends (amounts) and process settings (natural units)."""
        m = self.mixture
        mv = m.to_pseudo(amounts) if self.pseudo else m.to_proportions(amounts)
        if not self.process:
            return mv
        coded = np.column_stack([f.to_coded(np.asarray(process_natural)[:, j]) for j, f in enumerate(self.process)])
        return np.hstack([mv, coded])


class MixtureFit(Fit):
    """A :class:`~levelwise.Fit` of a mixture model; build it with :func:`fit_mixture`.

    ``mixture_info`` holds the :class:`Mixture`, the process factors, whether L-pseudo-components are in use and
    the model as given. ``coefficients`` are in the fitted model variables (pseudo-components when in use);
    ``coefficients_proportions`` and ``coefficients_pseudo`` give the canonical form in either.
    """

    def _replace(self, **changes):
        new = object.__new__(type(self))
        values = new.__dict__
        values.update({name: self.__dict__[name] for name in _FIELDS})
        values["mixture_info"] = self.mixture_info
        values.update(changes)
        return new

    # -- the model contains the mean ------------------------------------------------------------------------
    @cached_property
    def _sst(self) -> float:
        centred = self.y - self.y.mean()
        return float(centred @ centred)

    @cached_property
    def r_squared_adj(self) -> float:
        if self.df_resid <= 0:
            return float("nan")
        return 1.0 - (1.0 - self.r_squared) * (self.n - 1) / self.df_resid

    @cached_property
    def _linear_groups(self) -> list:
        q = self.mixture_info.mixture.q
        return [g for g, row in enumerate(self.group_exponents)
                if row.sum() == 1 and row[:q].sum() == 1]

    @property
    def protected_terms(self) -> tuple:
        """The linear blending terms: :func:`levelwise.reduce` never removes them."""
        return tuple(self.groups[g][0] for g in self._linear_groups)

    @cached_property
    def anova(self) -> pd.DataFrame:
        """ANOVA with the corrected total (the model contains the mean). ``Linear mixture`` (q - 1 df) is the
        sum of squares of the linear blending terms beyond the mean, after any terms that contain no component;
        each other term is tested as in :mod:`levelwise.anova` (partial, respecting hierarchy)."""
        from .anova import _row, anova_table, sse_of

        q = self.mixture_info.mixture.q
        lin = self._linear_groups
        rest = [g for g in range(len(self.groups)) if g not in lin]
        table = anova_table(self.X, self.y, [self.groups[g] for g in rest],
                            self.group_exponents[rest].reshape(len(rest), -1), True, self.run_settings, None)
        if len(lin) >= 2:
            lin_cols = [c for g in lin for c in self.groups[g][1]]
            free = [c for g, row in enumerate(self.group_exponents) if not row[:q].any() for c in self.groups[g][1]]
            ones = np.ones((self.n, 1))
            ss = sse_of(np.hstack([ones, self.X[:, free]]), self.y) - sse_of(self.X[:, lin_cols + free], self.y)
            mse = float(table.loc["Residual", "mean_sq"])
            row = _row("Linear mixture", len(lin) - 1, max(ss, 0.0), mse, self.df_resid)
            line = pd.DataFrame([row]).set_index("source")
            table = pd.concat([table.iloc[:1], line, table.iloc[1:]])
        return table

    # -- settings are blends ------------------------------------------------------------------------------------
    def settings_array(self, settings) -> np.ndarray:
        """Blends (component amounts, summing to the total, inside the bounds) and process settings (natural
        units), as a dict or DataFrame, into the model variables (m, k)."""
        info = self.mixture_info
        amounts = info.mixture.amounts_from(settings)
        frame = settings if isinstance(settings, pd.DataFrame) else pd.DataFrame(
            {k: np.atleast_1d(v) for k, v in settings.items()}) if isinstance(settings, dict) else None
        unknown = [str(c) for c in frame.columns if c not in info.names]
        if unknown:
            raise LevelwiseError(f"The 'settings' name {unknown}, which the mixture model does not have; its "
                                 f"components and process factors are {info.names}.")
        process = None
        if info.process:
            missing = [f.name for f in info.process if f.name not in frame.columns]
            if missing:
                raise LevelwiseError(f"The 'settings' are missing process factor(s) {missing}.")
            process = np.column_stack([pd.to_numeric(frame[f.name], errors="coerce").to_numpy(dtype=float)
                                       for f in info.process])
            process = np.broadcast_to(process, (len(amounts), len(info.process))) if len(process) == 1 else process
            if not np.isfinite(process).all():
                j = int(np.argwhere(~np.isfinite(process))[0][1])
                raise LevelwiseError(f"The setting for process factor {info.process[j].name!r} must be a finite "
                                     "number.")
        return info.variables(amounts, process)

    def settings_vector(self, settings) -> np.ndarray:
        return self.settings_array(settings)[0]

    def trace(self, factor, settings, points: int = 50, level=None) -> dict:
        """The Cox-direction trace of one component (or the trace of a process factor); see :func:`cox_traces`."""
        return cox_traces(self, settings, points, level, only=factor)[factor]

    def traces(self, settings, points: int = 50, level=None) -> dict:
        """Every component's Cox-direction trace and every process factor's trace; see :func:`cox_traces`."""
        return cox_traces(self, settings, points, level)

    def refresh(self, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
        """The point prediction and the Cox-direction traces at a blend (no surface slice for mixtures yet)."""
        if slice_axes is not None:
            raise LevelwiseError("A surface slice of a mixture fit is not available yet; use slice_axes=None.")
        fast = self._fast_blend(settings)
        if fast is not None and (points is None or (type(points) is int and 2 <= points <= 100_000)):
            return self._fast_refresh(*fast, level, points, point)
        out = {"point": None, "slice": None}
        if point:
            row = self.predict(settings, level).iloc[0]
            out["point"] = {k: (bool(row[k]) if k == "extrapolated" else float(row[k])) for k in row.index}
        out["traces"] = None if points is None else self.traces(settings, points, level)
        return out

    @cached_property
    def _fast_constants(self):
        info = self.mixture_info
        m = info.mixture
        return (info.names, m.q, m.total, 1e-9 * m.total, m.declared_lows.tolist(), m.declared_highs.tolist(),
                len(m.G) > 0, [(f.center, f.half_range) for f in info.process],
                m.lows if info.pseudo else 0.0, m.pseudo_range if info.pseudo else m.total)

    def _fast_blend(self, settings):
        """(amounts, model variables) of a valid blend given as a dict of plain numbers; None otherwise (the
        general path then checks it and names what is wrong). Plain Python: this runs on every slider event."""
        names, q, total, tol, lows, highs, constrained, process, offset, divisor = self._fast_constants
        if type(settings) is not dict or len(settings) != len(names):
            return None
        try:
            row = [settings[n] for n in names]
        except KeyError:
            return None
        for value in row:
            if type(value) is not float and type(value) is not int:
                return None
            if value != value or value in (math.inf, -math.inf):
                return None
        xs = row[:q]
        if abs(math.fsum(xs) - total) > tol:
            return None
        for value, lo, hi in zip(xs, lows, highs):
            if value < lo - tol or value > hi + tol:
                return None
        x = np.array(xs, dtype=float)
        if constrained:
            m = self.mixture_info.mixture
            if (m.G @ x > m.h + tol).any():
                return None
        variables = np.empty(len(row))
        variables[:q] = (x - offset) / divisor
        for j, (centre, half) in enumerate(process):
            variables[q + j] = (row[q + j] - centre) / half
        return x, variables

    def _fast_refresh(self, x, variables, level, points, point):
        """One slider event on a checked blend: the point and every Cox trace in one predictor call."""
        info = self.mixture_info
        m = info.mixture
        q = m.q
        level = self.level if level is None else _check_level(level)
        count = 1 + (q * points if points is not None else 0)
        rows = np.empty((count, len(variables)))
        rows[0] = variables
        if points is not None:
            ts, grid = _cox_grid(m, x, points)
            offset, divisor = self._fast_constants[-2:]
            np.divide(grid.reshape(-1, q) - offset, divisor, out=rows[1:, :q])
            if info.process:
                rows[1:, q:] = variables[q:]
        predictor = self.predictor
        mean, h = predictor.mean_and_leverage(rows)
        qs = self.t_quantile(level) * self.s
        ci, pi = qs * np.sqrt(h), qs * np.sqrt(1.0 + h)
        out = {"point": None, "slice": None, "traces": None}
        if point:
            mu, c, p, lev = float(mean[0]), float(ci[0]), float(pi[0]), float(h[0])
            outside = bool(lev > predictor.max_leverage * (1.0 + 1e-9) + 1e-12)
            if info.process:
                coded = variables[q:]
                outside = outside or bool((np.abs(coded) > 1.0 + 1e-9).any())
            out["point"] = {"mean": mu, "ci_low": mu - c, "ci_high": mu + c, "pi_low": mu - p, "pi_high": mu + p,
                            "leverage": lev, "extrapolated": outside}
        if points is not None:
            traces = {}
            change = (ts - x[:, None]) / m.total
            mean_t, ci_t, pi_t = (a[1:].reshape(q, points) for a in (mean, ci, pi))
            for i, name in enumerate(info.names[:q]):
                traces[name] = {"x": change[i], "amount": ts[i], "blends": grid[i], "mean": mean_t[i],
                                "ci_half": ci_t[i], "pi_half": pi_t[i]}
            for j, f in enumerate(info.process):
                grid_p = np.repeat(variables[None, :], points, axis=0)
                grid_p[:, q + j] = np.linspace(-1.0, 1.0, points)
                mu, c, p = predictor.intervals(grid_p, level)
                traces[f.name] = {"x": f.to_natural(grid_p[:, q + j]), "mean": mu, "ci_half": c, "pi_half": p}
            out["traces"] = traces
        return out

    def slice(self, *args, **kwargs):
        raise LevelwiseError("A surface slice of a mixture fit is not available yet.")

    # -- coefficients in other coordinates -----------------------------------------------------------------------
    def _canonical(self, pseudo: bool) -> pd.DataFrame:
        """Coefficients of the canonical form (the model's own terms; the full cubic with x_i x_j (x_i - x_j))
        over proportions or pseudo-components, by the exact linear map between the two bases on the simplex."""
        info = self.mixture_info
        m, q, k = info.mixture, info.mixture.q, len(info.process)
        rng = np.random.default_rng(0)
        count = 4 * self.p + 20
        props = rng.dirichlet(np.ones(q), size=count)
        proc = rng.uniform(-1, 1, size=(count, k))
        amounts = props * m.total
        fitted_vars = np.hstack([m.to_pseudo(amounts) if info.pseudo else props, proc])
        target_vars = np.hstack([m.to_pseudo(amounts) if pseudo else props, proc])
        Z_fit = monomials(fitted_vars, self.spec.exponents)
        names = info.names
        if info.model == "scheffe_cubic" and not k and self.p == len(self.spec.exponents) \
                and len(self.aliased) == 0:
            Z_target, (pairs, triples) = scheffe_cubic_canonical(target_vars[:, :q])
            n = names
            labels = list(n[:q]) + [f"{n[i]}:{n[j]}" for i, j in pairs]
            labels += [f"{n[i]}:{n[j]}:({n[i]}-{n[j]})" for i, j in pairs]
            labels += [f"{n[i]}:{n[j]}:{n[c]}" for i, j, c in triples]
        else:
            Z_target = monomials(target_vars, self.spec.exponents)
            labels = [term_name(r, names) for r in self.spec.exponents]
        T, *_ = np.linalg.lstsq(Z_target, Z_fit, rcond=None)
        if np.abs(Z_target @ T - Z_fit).max() > 1e-8 * max(1.0, np.abs(Z_fit).max()):
            raise LevelwiseError(f"The model {self.spec.formula!r} cannot be written with the same terms in "
                                 f"{'pseudo-components' if pseudo else 'proportions'}; use the fitted coefficients.")
        estimate = T @ self.beta
        tr = T @ self.rinv
        se = self.s * np.sqrt(np.einsum("ij,ij->i", tr, tr))
        with np.errstate(divide="ignore", invalid="ignore"):
            t = estimate / se
        p = 2.0 * stats.t.sf(np.abs(t), self.df_resid) if self.df_resid > 0 else np.full(len(t), np.nan)
        qt = self.t_quantile(self.level)
        return pd.DataFrame({"estimate": estimate, "std_error": se, "t": t, "p_value": p,
                             "ci_low": estimate - qt * se, "ci_high": estimate + qt * se},
                            index=pd.Index(labels, name="term"))

    @cached_property
    def coefficients_proportions(self) -> pd.DataFrame:
        """Coefficients over the proportions x_i / T (the canonical Scheffé form for the presets)."""
        return self._canonical(pseudo=False)

    @cached_property
    def coefficients_pseudo(self) -> pd.DataFrame:
        """Coefficients over the L-pseudo-components (only when the fit uses them)."""
        if not self.mixture_info.pseudo:
            raise LevelwiseError("This mixture fit does not use pseudo-components; fit with pseudo=True.")
        return self._canonical(pseudo=True)

    # -- reduction -------------------------------------------------------------------------------------------
    def refit_terms(self, exponents):
        """The same runs refitted with the terms in *exponents* (rows over components + process factors)."""
        info = self.mixture_info
        frame = pd.DataFrame(self.run_settings, columns=info.names, index=self.runs)
        frame[self.response] = self.y
        base = _fit(frame, self.response, formula_text(exponents, info.names),
                    factors=[Factor(n, -1.0, 1.0) for n in info.names], level=self.level, achieved=None)
        return _wrap(base, MixtureInfo(info.mixture, info.process, info.pseudo, base.spec.formula))

    def __repr__(self) -> str:
        return f"<MixtureFit {self.response} ~ {self.spec.formula}: n={self.n}, p={self.p}, s={self.s:.4g}>"


def _wrap(base: Fit, info: MixtureInfo) -> MixtureFit:
    new = object.__new__(MixtureFit)
    new.__dict__.update(base.__dict__)
    if isinstance(info.model, tuple) or (isinstance(info.model, str) and info.model.strip() in SCHEFFE_PRESETS):
        # Show the preset (or the crossed pair) as the model's formula.
        new.__dict__["spec"] = dataclasses.replace(base.spec, formula=str(info.model))
    new.__dict__["mixture_info"] = info
    return new


def fit_mixture(data, response, model, components, *, total=None, process=(), pseudo=False, level=0.95,
                on_rank_deficiency="raise") -> MixtureFit:
    """Fit a mixture model (no intercept) to *response* in *data*.

    Parameters
    ----------
    data : pandas.DataFrame
        One row per run: component amounts (summing to the total), process settings, responses.
    response : str
    model : str or tuple
        ``"scheffe_linear"``, ``"scheffe_quadratic"``, ``"scheffe_special_cubic"``, ``"scheffe_cubic"``; a pair
        ``(scheffe preset, process model)`` for a crossed mixture-process model (process model
        ``"main_effects"``, ``"two_factor_interactions"``, ``"full_second_order"`` or a formula); or a Wilkinson
        formula over the component and process names (its intercept is dropped: it equals the sum of the linear
        blending terms).
    components : list of Component, int or Mixture
    total : float, optional
        The mixture total (default 1) when *components* is not a Mixture.
    process : list of Factor
        Process factors (coded -1/+1 in the model).
    pseudo : bool
        Fit on L-pseudo-components instead of proportions.
    level : float
        Confidence level.

    Raises
    ------
    LevelwiseError
        A run whose blend does not sum to the total or breaks a bound (naming the row and the components), a
        missing column, a bad model, or inestimable terms.

    Examples
    --------
    >>> import pandas as pd
    >>> d = pd.DataFrame({"A": [1, 0, 0, .5, .5, 0], "B": [0, 1, 0, .5, 0, .5], "C": [0, 0, 1, 0, .5, .5],
    ...                   "y": [10., 8, 12, 11, 13, 9]})
    >>> fit_mixture(d, "y", "scheffe_linear", ["A", "B", "C"]).coefficients.index.tolist()
    ['A', 'B', 'C']
    """
    mixture = as_mixture(components, total)
    process = tuple(as_factors(process, "process")) if process else ()
    for f in process:
        if f.is_categorical:
            raise LevelwiseError(f"Process factor {f.name!r} is categorical; mixture fits take continuous process "
                                 "factors.")
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    if not isinstance(response, str) or response not in data.columns:
        raise LevelwiseError(f"The 'response' parameter must name a column of the data {list(map(str, data.columns))}."
                             f" Got {describe(response)} instead.")
    level = _check_level(level)
    info = MixtureInfo(mixture, process, bool(pseudo), model)
    missing = [n for n in info.names if n not in data.columns]
    if missing:
        raise LevelwiseError(f"The data has no column for component(s) or process factor(s) {missing}.")
    y = pd.to_numeric(data[response], errors="coerce")
    has_y = y.notna().to_numpy()
    used = data.loc[has_y]
    amounts = np.column_stack([pd.to_numeric(used[n], errors="coerce").to_numpy(dtype=float)
                               for n in mixture.names])
    mixture.check_blends(amounts, "data", rows=[f"{label!r}" for label in used.index])
    proc = np.column_stack([pd.to_numeric(used[f.name], errors="coerce").to_numpy(dtype=float)
                            for f in process]) if process else None
    if proc is not None and not np.isfinite(proc).all():
        i, j = np.argwhere(~np.isfinite(proc))[0]
        raise LevelwiseError(f"The process factor column {process[j].name!r} is empty in row {used.index[i]!r}, a "
                             "run with a response.")
    variables = info.variables(amounts, proc)
    frame = pd.DataFrame(variables, columns=info.names, index=used.index)
    frame[response] = y.to_numpy(dtype=float)[has_y]
    if "run" in used.columns:
        frame["run"] = used["run"].to_numpy()
    E = model_exponents(model, mixture.names, [f.name for f in process])
    base = _fit(frame, response, formula_text(E, info.names), factors=[Factor(n, -1.0, 1.0) for n in info.names],
                level=level, on_rank_deficiency=on_rank_deficiency, achieved=None)
    return _wrap(base, info)


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
    """:func:`_cox_lines` for a region of bounds only, in plain Python (a few components: faster than arrays).

    Along line i the others are x_j = s_j (T - t), s_j = r_j / (T - r_i); L_j <= x_j <= U_j gives
    T - U_j / s_j <= t <= T - L_j / s_j for s_j > 0, and L_i <= t <= U_i."""
    T, q = mixture.total, mixture.q
    lows, highs = mixture.__dict__.get("_bounds_lists") or mixture.__dict__.setdefault(
        "_bounds_lists", (mixture.declared_lows.tolist(), mixture.declared_highs.tolist()))
    rv = r.tolist()
    shares, lo, hi = [], [], []
    for i in range(q):
        rest = T - rv[i]
        if rest > 1e-12 * T:
            share = [rv[j] / rest if j != i else 0.0 for j in range(q)]
        else:
            share = [1.0 / (q - 1) if j != i else 0.0 for j in range(q)]
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
        shares.append(share)
        lo.append(a)
        hi.append(b)
    share = np.array(shares)
    return share * T, eye - share, np.array(lo), np.array(hi)


def _cox_interval(mixture, r, i):
    """The Cox line of component i from the blend r: (a, b, lo, hi); see :func:`_cox_lines`."""
    A, B, lo, hi = _cox_lines(mixture, np.asarray(r, dtype=float))
    return A[i], B[i], lo[i], hi[i]


def _cox_grid(mixture, r, points):
    """(t (q, points), blends (q, points, q)) along every component's Cox line over its feasible range."""
    A, B, lo, hi = _cox_lines(mixture, r)
    unit = _unit_grid(points)
    t = lo[:, None] + (hi - lo)[:, None] * unit
    # A[i, i] = 0 and B[i, i] = 1, so component i's own column is exactly t.
    blends = t[:, :, None] * B[:, None, :]
    blends += A[:, None, :]
    return t, blends


_UNIT_GRIDS: dict = {}


def _unit_grid(points):
    grid = _UNIT_GRIDS.get(points)
    if grid is None:
        grid = _UNIT_GRIDS[points] = np.linspace(0.0, 1.0, points)[None, :]
        grid.flags.writeable = False
    return grid


def cox_traces(fit, reference, points: int = 50, level=None, only=None) -> dict:
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
    if not isinstance(fit, MixtureFit):
        raise LevelwiseError(f"cox_traces needs a mixture fit (fit_mixture). Got {describe(fit)}.")
    if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not 2 <= points <= 100_000:
        raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 100000. Got {describe(points)}.")
    level = fit.level if level is None else _check_level(level)
    info = fit.mixture_info
    mixture = info.mixture
    names = info.names
    if only is not None and only not in names:
        raise LevelwiseError(f"The 'factor' parameter must be one of {names}. Got {describe(only)} instead.")
    base = fit.settings_array(reference)
    if len(base) != 1:
        raise LevelwiseError("The reference must be a single blend.")
    r = mixture.amounts_from(reference)[0]
    process_natural = np.array([f.to_natural(base[0, mixture.q + j]) for j, f in enumerate(info.process)])
    out = {}
    ts, grid = _cox_grid(mixture, r, int(points))
    for i, name in enumerate(mixture.names):
        if only is not None and name != only:
            continue
        t, blends = ts[i], grid[i]
        proc = np.tile(process_natural, (len(t), 1)) if info.process else None
        mean, ci, pi = fit.predictor.intervals(info.variables(blends, proc), level)
        out[name] = {"x": (t - r[i]) / mixture.total, "amount": t, "blends": blends, "mean": mean,
                     "ci_half": ci, "pi_half": pi}
    for j, f in enumerate(info.process):
        if only is not None and f.name != only:
            continue
        grid = np.repeat(base, int(points), axis=0)
        grid[:, mixture.q + j] = np.linspace(-1.0, 1.0, int(points))
        mean, ci, pi = fit.predictor.intervals(grid, level)
        out[f.name] = {"x": f.to_natural(grid[:, mixture.q + j]), "mean": mean, "ci_half": ci, "pi_half": pi}
    return out


__all__ = ["MixtureFit", "cox_traces", "fit_mixture"]
