"""Split-plot analysis: the linear mixed model fitted by REML (random whole-plot intercept + residual).

The variance components come from statsmodels ``MixedLM`` (REML). The fixed effects and their covariance
are the generalised least-squares solution at those components: each group of correlated runs (a whole
plot, or a block when blocks are random) is whitened by the Cholesky factor of its covariance
``V = sigma2_e I + sigma2_wp Z Z' (+ sigma2_block 1 1')``, and the whitened model is solved by QR, so
``Cov(beta) = (X' V^-1 X)^-1 = R^-1 R^-T`` and ``R^-1`` is the covariance factor handed to the prediction engine.

Denominator degrees of freedom follow the between-within (containment) rule, stated in
:data:`DENOMINATOR_RULE`; in a balanced split-plot they give the classical stratum ANOVA tests.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._rich import anova_frame, coefficient_table, fit_html
from .._stats import f_sf, t_ppf, t_sf
from ._families import FitFamily

DENOMINATOR_RULE = (
    "between-within (containment) rule: a term whose model columns are constant within every whole plot "
    "is a whole-plot term, tested on the whole-plot stratum with df = whole plots - rank of [random-block "
    "indicators, whole-plot columns]; every other term is a sub-plot term, tested on the residual with "
    "df = runs - rank of [whole-plot indicators, model columns]."
)
INTERVAL_RULE = (
    "mean +/- t * SE with t on the whole-plot stratum df (the mean at a setting carries the whole-plot "
    "variance); the prediction interval for one new run in a new whole plot adds both variance components "
    "(and the block component when blocks are random)."
)
#: A variance component below this fraction of the residual variance is reported as zero.
ZERO_COMPONENT = 1e-6


class MixedFit(FitFamily):
    """A split-plot fit: linear mixed model by REML. Build it with ``levelwise.fit(..., whole_plot=...)``.

    Attributes
    ----------
    response, terms, factor_names, runs
        As for a least-squares fit; ``runs`` are the run ids.
    beta, cov_beta, cov_factor : ndarray
        GLS coefficients (coded units), their covariance and a square root R^-1 of it.
    variance_components : pandas.Series
        ``whole_plot`` and ``residual`` variances (and ``block`` when blocks are random).
    df_whole_plot, df_residual : int
        Stratum degrees of freedom by :data:`DENOMINATOR_RULE`.
    notes : list of str
        Plain-language remarks (a variance component at zero, optimiser messages).
    """

    kind = "mixed"
    denominator_rule = DENOMINATOR_RULE
    interval_rule = INTERVAL_RULE

    def __init__(self, base, whole_plot_labels, block_labels, components, beta, rinv, df_wp, df_resid,
                 wp_terms, whole_plot_column, notes, statsmodels_result):
        self.base = base
        self.whole_plot = pd.Series(whole_plot_labels, index=base.runs, name=whole_plot_column)
        self.block = None if block_labels is None else pd.Series(block_labels, index=base.runs, name="block")
        self.variance_components = components
        self.beta = beta
        self.cov_factor = rinv
        self.df_whole_plot = df_wp
        self.df_residual = df_resid
        self.whole_plot_terms = tuple(wp_terms)
        self.whole_plot_column = whole_plot_column
        self.notes = list(notes)
        self.statsmodels_result = statsmodels_result

    # -- what the fit is ------------------------------------------------------------------------------
    response = property(lambda self: self.base.response)
    terms = property(lambda self: self.base.terms)
    factor_names = property(lambda self: self.base.factor_names)
    runs = property(lambda self: self.base.runs)
    coding = property(lambda self: self.base.coding)
    spec = property(lambda self: self.base.spec)
    categories = property(lambda self: self.base.categories)
    level = property(lambda self: self.base.level)
    n = property(lambda self: self.base.n)
    p = property(lambda self: self.base.p)

    @cached_property
    def cov_beta(self) -> np.ndarray:
        return self.cov_factor @ self.cov_factor.T

    @cached_property
    def zero_components(self) -> list[str]:
        """Names of the variance components estimated at zero (at the boundary)."""
        resid = self.variance_components["residual"]
        return [k for k, v in self.variance_components.items() if k != "residual" and v <= ZERO_COMPONENT * resid]

    def _stratum_of_column(self):
        stratum = np.array(["sub-plot"] * self.p, dtype=object)
        wp = set(self.whole_plot_terms)
        for j, term in enumerate(self.terms):
            if term in wp or term == "1":
                stratum[j] = "whole-plot"
        for label, cols in self.base.groups:
            for c in cols:
                stratum[c] = "whole-plot" if label in wp else "sub-plot"
        return stratum

    @cached_property
    def coefficients(self) -> pd.DataFrame:
        """GLS estimates (coded units), standard errors, stratum df, t, p and the confidence interval."""
        se = np.sqrt(np.einsum("ij,ij->i", self.cov_factor, self.cov_factor))
        stratum = self._stratum_of_column()
        df = np.where(stratum == "whole-plot", self.df_whole_plot, self.df_residual).astype(float)
        t = self.beta / se
        q = t_ppf(0.5 + self.level / 2.0, df)
        return coefficient_table(self, pd.DataFrame(
            {"estimate": self.beta, "std_error": se, "stratum": stratum, "df": df, "t": t,
             "p_value": 2.0 * t_sf(np.abs(t), df), "ci_low": self.beta - q * se, "ci_high": self.beta + q * se},
            index=pd.Index(self.terms, name="term"),
        ))

    @cached_property
    def anova(self) -> pd.DataFrame:
        """Wald F test of each term on its stratum's df (see :data:`DENOMINATOR_RULE`)."""
        rows = {}
        wp = set(self.whole_plot_terms)
        for label, cols in self.base.groups:
            cols = list(cols)
            b = self.beta[cols]
            c = self.cov_beta[np.ix_(cols, cols)]
            f = float(b @ np.linalg.solve(c, b)) / len(cols)
            stratum = "whole-plot" if label in wp else "sub-plot"
            den = self.df_whole_plot if stratum == "whole-plot" else self.df_residual
            rows[label] = {"stratum": stratum, "df": len(cols), "df_denominator": den, "F": f,
                           "p_value": float(f_sf(f, len(cols), den))}
        return anova_frame(self, pd.DataFrame.from_dict(rows, orient="index").rename_axis("term"))

    # -- residuals by whole plot --------------------------------------------------------------------
    @cached_property
    def fitted(self) -> pd.Series:
        """Marginal fitted values X beta, by run id."""
        return pd.Series(self.base.X @ self.beta, index=self.runs, name="fitted")

    @cached_property
    def residuals(self) -> pd.Series:
        """Marginal residuals y - X beta, by run id."""
        return pd.Series(self.base.y - self.fitted.to_numpy(), index=self.runs, name="residual")

    @cached_property
    def _predicted_effects(self):
        """Best linear unbiased predictions of the whole-plot (and block) effects, per run."""
        comp = self.variance_components
        s2, s2wp = comp["residual"], comp["whole_plot"]
        s2b = comp.get("block", 0.0)
        r = self.residuals.to_numpy()
        wp_codes, wp_labels = pd.factorize(self.whole_plot.to_numpy())
        group = wp_codes if self.block is None else pd.factorize(self.block.to_numpy())[0]
        wp_effect = np.zeros(len(wp_labels))
        block_effect = np.zeros(len(r))
        for g in np.unique(group):
            rows = np.flatnonzero(group == g)
            codes = wp_codes[rows]
            z = (codes[:, None] == np.unique(codes)[None, :]).astype(float)
            v = s2 * np.eye(len(rows)) + s2wp * z @ z.T + s2b
            vir = np.linalg.solve(v, r[rows])
            wp_effect[np.unique(codes)] = s2wp * (z.T @ vir)
            block_effect[rows] = s2b * vir.sum()
        return wp_codes, wp_labels, wp_effect, block_effect

    @cached_property
    def whole_plot_effects(self) -> pd.Series:
        """Predicted random effect of each whole plot (BLUP), by whole-plot label."""
        _, labels, effect, _ = self._predicted_effects
        return pd.Series(effect, index=pd.Index(labels, name=self.whole_plot_column), name="whole_plot_effect")

    @cached_property
    def diagnostics(self) -> pd.DataFrame:
        """Per run (by run id): whole plot, marginal and conditional fitted values and residuals."""
        codes, _, effect, block_effect = self._predicted_effects
        conditional = self.residuals.to_numpy() - effect[codes] - block_effect
        s = math.sqrt(self.variance_components["residual"])
        return pd.DataFrame(
            {"whole_plot": self.whole_plot.to_numpy(), "fitted": self.fitted.to_numpy(),
             "residual": self.residuals.to_numpy(), "whole_plot_effect": effect[codes],
             "conditional_residual": conditional, "standardized_conditional": conditional / s if s > 0 else np.nan},
            index=self.runs,
        )

    @cached_property
    def residuals_by_whole_plot(self) -> pd.DataFrame:
        """One row per whole plot: runs, mean marginal residual, predicted effect, spread of the rest."""
        d = self.diagnostics
        g = d.groupby("whole_plot", sort=False)
        return pd.DataFrame({"runs": g.size(), "mean_residual": g["residual"].mean(),
                             "whole_plot_effect": g["whole_plot_effect"].first(),
                             "conditional_sd": g["conditional_residual"].std(ddof=0)})

    # -- prediction: the one engine, with the GLS covariance factor ----------------------------------
    _engine_columns = slice(None)

    @cached_property
    def engine(self):
        """The prediction engine: GLS coefficients, ``Cov(beta) = F F'``, t on the whole-plot stratum df, and a
        new run's variance = the sum of the variance components (see :data:`INTERVAL_RULE`)."""
        return self._engine(self.base.spec.exponents, df=self.df_whole_plot,
                            new_run_variance=float(self.variance_components.sum()))

    def t_quantile(self, level: float) -> float:
        """Two-sided t quantile on the whole-plot stratum df (cached per level)."""
        return self.engine.quantile(self.engine._level(level))

    def predict(self, settings, level: float | None = None) -> pd.DataFrame:
        """Mean, CI for the mean and PI for one new run (both variance components), see :data:`INTERVAL_RULE`.

        ``leverage`` is ``x Cov(beta) x'`` (the variance of the mean) and ``se_mean`` its square root.
        """
        out = self.engine.predict(settings, level)
        out.insert(5, "se_mean", np.sqrt(out["leverage"].to_numpy()))
        return out

    def refresh(self, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
        """One slider event (see ``Fit.refresh``), with the split-plot intervals."""
        return self.engine.refresh(settings, level, points, slice_axes, shape, point)

    def trace(self, factor, settings, points=50, level=None) -> dict:
        return self.engine.trace(factor, settings, points, level)

    def traces(self, settings, points=50, level=None) -> dict:
        return self.engine.traces(settings, points, level)

    def slice(self, x, y, settings, shape=(100, 100), level=None) -> dict:
        return self.engine.slice(x, y, settings, shape, level)

    # -- backward elimination -----------------------------------------------------------------------
    def reduce(self, alpha: float = 0.05, hierarchy: bool = True):
        """Backward elimination by the stratum F tests of :attr:`anova`, refitting (REML) after each removal.

        With *hierarchy* a term stays while a term containing it stays. Returns (final fit, steps).
        """
        from ._reduce import formula_of

        if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not 0 < alpha < 1:
            raise LevelwiseError(f"The 'alpha' parameter of reduce must be in (0, 1). Got {describe(alpha)} instead.")
        term_exp = {label: exp for (label, _), exp in zip(self.base.groups, self.base.group_exponents)}
        intercept = bool((np.asarray(self.base.spec.exponents).sum(axis=1) == 0).any())

        def contains(big, small):
            return (big >= small).all() and (big != small).any()

        current, steps = self, []
        while True:
            table = current.anova
            labels = list(table.index)
            removable = [t for t in labels if not hierarchy
                         or not any(contains(term_exp[o], term_exp[t]) for o in labels)]
            candidates = table.loc[removable]
            if candidates.empty or candidates["p_value"].max() <= alpha:
                break
            worst = candidates["p_value"].idxmax()
            steps.append({"step": len(steps) + 1, "term": worst, "stratum": candidates.loc[worst, "stratum"],
                          "F": float(candidates.loc[worst, "F"]),
                          "p_value": float(candidates.loc[worst, "p_value"])})
            rows = [term_exp[t] for t in labels if t != worst]
            if intercept:
                rows = [np.zeros(len(self.factor_names), dtype=int)] + rows
            current = current._with_exclusions(current.exclusions, model=formula_of(rows, self.factor_names))
        return current, pd.DataFrame(steps, columns=["step", "term", "stratum", "F", "p_value"])

    # -- effects, and the least-squares tools that do not apply ------------------------------------------
    @property
    def effects(self) -> pd.Series:
        """Effects of the two-level terms: 2 x the coded GLS coefficient (see ``levelwise.model.effects``)."""
        from ._effects import effects

        return effects(self)

    def _not_for_split_plots(self, what: str, why: str):
        raise LevelwiseError(f"{what} is not available for a split-plot (REML) fit: {why} Use the stratum tests "
                             "of 'anova' and the 'coefficients' with their own standard errors instead.")

    def half_normal(self):
        """Refused: the effects of whole-plot and sub-plot terms have different standard errors."""
        self._not_for_split_plots("The half-normal plot", "whole-plot and sub-plot effects have different "
                                  "standard errors, so they do not share one half-normal line.")

    def lenth(self, alpha: float = 0.05):
        """Refused: Lenth's method assumes effects with one common standard error."""
        self._not_for_split_plots("Lenth's method", "it assumes every effect has the same standard error, and "
                                  "whole-plot effects have a larger one than sub-plot effects.")

    def box_cox(self, *args, **kwargs):
        """Refused: the profile likelihood of levelwise's Box-Cox is that of least squares."""
        self._not_for_split_plots("The Box-Cox power search", "its profile likelihood is that of a least-squares "
                                  "fit with independent runs.")

    # -- the cost of ignoring the whole plots -------------------------------------------------------
    @cached_property
    def ignoring_whole_plots(self) -> pd.DataFrame:
        """Standard errors of the least-squares fit that ignores whole plots against the split-plot fit."""
        ols = self.base.coefficients["std_error"].to_numpy()
        mixed = self.coefficients["std_error"].to_numpy()
        return pd.DataFrame({"se_split_plot": mixed, "se_ignoring_whole_plots": ols, "ratio": ols / mixed},
                            index=pd.Index(self.terms, name="term"))

    def _repr_html_(self) -> str:
        return fit_html(self)

    def __repr__(self) -> str:
        comp = ", ".join(f"{k} {v:.4g}" for k, v in self.variance_components.items())
        return f"<MixedFit {self.response} ~ {self.base.spec.formula}: {self.n} runs, " \
               f"{self.whole_plot.nunique()} whole plots; REML variances {comp}>"
