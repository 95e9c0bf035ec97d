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
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._stats import t_sf
from ..design import Factor, as_factors
from ..design._mixture_region import Mixture, as_mixture
from ._fit import fit as _fit
from ._formula import monomials, term_name
from ._inputs import _check_level
from ._mixture_terms import SCHEFFE_PRESETS, formula_text, model_exponents, scheffe_cubic_canonical, split_crossed
from ._result import _FIELDS, Fit


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


#: Why effects, Lenth's method and the half-normal plot are refused for a mixture fit.
NOT_EFFECTS = ("effects, Lenth's method and the half-normal plot apply to two-level factors; a mixture model's "
               "blending coefficients are not effects (the components cannot move one at a time). Look at the "
               "Cox-direction effect traces instead.")


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
        from ._anova import _row, anova_table, sse_of

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

    # -- prediction: the fit's one engine, with the blend check and Cox-direction traces -----------------------
    @cached_property
    def engine(self):
        """The fit's prediction engine (:class:`MixtureEngine`): the ordinary engine over the model variables,
        whose settings are blends (checked) and whose traces follow Cox directions."""
        from ._mixture_engine import MixtureEngine

        return MixtureEngine.of(Fit.engine.func(self), self.mixture_info)

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
        p = 2.0 * t_sf(np.abs(t), self.df_resid) if self.df_resid > 0 else np.full(len(t), np.nan)
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

    # -- two-level effects do not apply ---------------------------------------------------------------------
    @property
    def effects(self):
        """Refused: a blending coefficient is not a two-level effect (see :func:`levelwise.cox_traces`)."""
        raise LevelwiseError(NOT_EFFECTS)

    def lenth(self, alpha: float = 0.05):
        """Refused: Lenth's method needs two-level effects (see :func:`levelwise.cox_traces`)."""
        raise LevelwiseError(NOT_EFFECTS)

    def half_normal(self):
        """Refused: a half-normal plot needs two-level effects (see :func:`levelwise.cox_traces`)."""
        raise LevelwiseError(NOT_EFFECTS)

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
        shown = " * ".join(info.model) if isinstance(info.model, tuple) else str(info.model)
        new.__dict__["spec"] = dataclasses.replace(base.spec, formula=shown)
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
    model = split_crossed(model)
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


__all__ = ["MixtureFit", "fit_mixture"]
