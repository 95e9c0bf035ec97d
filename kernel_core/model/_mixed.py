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
import warnings
from functools import cached_property

import numpy as np
import pandas as pd
import scipy.linalg

from .._errors import LevelwiseError, LevelwiseWarning, describe
from .._rich import anova_frame, coefficient_table, fit_html
from .._stats import f_sf, t_ppf, t_sf
from ..design._splitplot import WHOLE_PLOT_COLUMN, check_whole_plot_column
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


def _indicators(codes, count):
    z = np.zeros((len(codes), count))
    z[np.arange(len(codes)), codes] = 1.0
    return z


def _rank(a):
    return int(np.linalg.matrix_rank(a)) if a.size else 0


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


def _column_constant_within(X, codes, count):
    sums = np.zeros((count, X.shape[1]))
    np.add.at(sums, codes, X)
    means = sums / np.bincount(codes, minlength=count)[:, None]
    spread = np.abs(X - means[codes]).max(axis=0, initial=0.0)
    return spread <= 1e-9 * np.maximum(1.0, np.abs(X).max(axis=0, initial=0.0))


def _moment_start(X, y, Zw, wp_codes, constant, df_wp, df_resid):
    """REML starting value: the stratum (method-of-moments) estimate of sigma2_wp / sigma2_e.

    In a balanced split-plot this is the REML estimate itself (when positive), so the optimiser only
    confirms it; otherwise it starts close. Floored at 1e-3 to stay inside the parameter space.
    """
    from statsmodels.regression.mixed_linear_model import MixedLMParams

    full = np.hstack([Zw, X])
    resid = y - full @ np.linalg.lstsq(full, y, rcond=None)[0]
    s2 = float(resid @ resid) / df_resid
    sizes = Zw.sum(axis=0)
    means = (Zw.T @ y) / sizes
    between = (Zw.T @ X[:, constant]) / sizes[:, None]
    w = np.sqrt(sizes)
    coef = np.linalg.lstsq(between * w[:, None], means * w, rcond=None)[0]
    ms_wp = float((sizes * (means - between @ coef) ** 2).sum()) / df_wp
    ratio = max((ms_wp - s2) / (len(y) / len(sizes)), 0.0) / s2 if s2 > 0 else 1.0
    return MixedLMParams.from_components(np.zeros(X.shape[1]), cov_re=np.array([[max(ratio, 1e-3)]]))


def fit_mixed(data, response, model, *, whole_plot, random_block=None, least_squares, **options) -> MixedFit:
    """Fit the split-plot mixed model; see :class:`MixedFit`. *least_squares* builds the coded model."""
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    wp_all = check_whole_plot_column(data, whole_plot)
    drop = [whole_plot]
    block_all = None
    if random_block is not None:
        block_all = check_whole_plot_column(data, random_block) if random_block in data.columns else None
        if block_all is None:
            raise LevelwiseError(
                f"The 'random_block' parameter must name a column of the data {list(map(str, data.columns))}. "
                f"Got {describe(random_block)} instead."
            )
        drop.append(random_block)
    base = least_squares(data.drop(columns=drop), response, model, **options)
    keep = np.isfinite(pd.to_numeric(data[response], errors="coerce").to_numpy(dtype=float))
    wp = wp_all[keep]
    X, y = np.asarray(base.X), np.asarray(base.y)
    n, p = X.shape
    wp_codes, wp_labels = pd.factorize(wp)
    W = len(wp_labels)
    Zw = _indicators(wp_codes, W)
    if block_all is not None:
        block = block_all[keep]
        block_codes, block_labels = pd.factorize(block)
        per_wp = pd.Series(block_codes).groupby(wp_codes).nunique()
        if (per_wp > 1).any():
            bad = wp_labels[int(per_wp.index[per_wp.to_numpy() > 1][0])]
            raise LevelwiseError(
                f"Whole plot {describe(bad)} (column {whole_plot!r}) spans more than one block of column "
                f"{random_block!r}; whole plots must be nested within blocks."
            )
        Zb = _indicators(block_codes, len(block_labels))
        group_codes = block_codes
    else:
        block, Zb, group_codes = None, np.empty((n, 0)), wp_codes
    constant = _column_constant_within(X, wp_codes, W)
    wp_terms = [label for label, cols in base.groups if constant[list(cols)].all()]
    df_wp = W - _rank(np.hstack([Zb, X[:, constant]]))
    df_resid = n - _rank(np.hstack([Zw, X]))
    if df_wp < 1 or df_resid < 1:
        raise LevelwiseError(
            f"The whole plots in column {whole_plot!r} leave {df_wp} degrees of freedom for the whole-plot "
            f"stratum and {df_resid} for the residual, so a variance component cannot be estimated. Replicate "
            "the whole plots (more whole plots per setting of the hard-to-change factors) or drop terms."
        )
    from statsmodels.regression.mixed_linear_model import MixedLM

    start = None
    if block is None:
        sm_model = MixedLM(y, X, groups=group_codes)
        start = _moment_start(X, y, Zw, wp_codes, constant, df_wp, df_resid)
    else:
        from statsmodels.regression.mixed_linear_model import VCSpec

        mats, names = [], []
        for g in range(len(block_labels)):  # groups in sorted order, as VCSpec wants
            codes = wp_codes[np.flatnonzero(group_codes == g)]
            mats.append((codes[:, None] == np.unique(codes)[None, :]).astype(float))
            names.append([f"wp{c}" for c in np.unique(codes)])
        sm_model = MixedLM(y, X, groups=group_codes, exog_re=np.ones((n, 1)),
                           exog_vc=VCSpec(["whole_plot"], [names], [mats]))
    notes = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = sm_model.fit(reml=True, start_params=start)
        except (np.linalg.LinAlgError, ValueError) as exc:  # e.g. too few whole plots for the model: named
            raise LevelwiseError(
                f"The split-plot (REML) fit of {response!r} could not be made with {len(np.unique(wp_codes))} whole "
                f"plots and {X.shape[1]} model columns ({type(exc).__name__}: {exc}). Add whole plots or simplify "
                "the model."
            ) from None
    for w in caught:
        text = str(w.message)
        if "boundary" not in text and text not in notes:
            notes.append(f"statsmodels MixedLM: {text}")
    s2 = float(result.scale)
    if block is None:
        comps = {"whole_plot": float(result.cov_re.iloc[0, 0] if hasattr(result.cov_re, "iloc")
                                     else np.asarray(result.cov_re)[0, 0]), "residual": s2}
    else:
        comps = {"block": float(np.asarray(result.cov_re)[0, 0]), "whole_plot": float(np.asarray(result.vcomp)[0]),
                 "residual": s2}
    comps = {k: max(v, 0.0) for k, v in comps.items()}
    components = pd.Series(comps, name="variance")
    # GLS at the REML components: whiten each independent group by the Cholesky factor of its covariance.
    s2wp, s2b = comps["whole_plot"], comps.get("block", 0.0)
    Xy = np.column_stack([X, y])
    if block is None:
        # V_j = s2 (I - P_j) + (s2 + n_j s2wp) P_j with P_j the averaging projector of whole plot j, so
        # V_j^(-1/2) = (I - P_j) / s + P_j / sqrt(s2 + n_j s2wp): subtract a share of each whole-plot mean.
        sizes = np.bincount(wp_codes, minlength=W).astype(float)
        sums = np.zeros((W, p + 1))
        np.add.at(sums, wp_codes, Xy)
        shrink = 1.0 - math.sqrt(s2) / np.sqrt(s2 + sizes * s2wp)
        white = (Xy - (shrink / sizes)[wp_codes, None] * sums[wp_codes]) / math.sqrt(s2)
    else:
        white = np.empty_like(Xy)
        for g in np.unique(group_codes):
            rows = np.flatnonzero(group_codes == g)
            codes = wp_codes[rows]
            v = s2 * np.eye(len(rows)) + s2wp * (codes[:, None] == codes[None, :]) + s2b
            white[rows] = np.linalg.solve(np.linalg.cholesky(v), Xy[rows])
    q, r = np.linalg.qr(white[:, :p])
    rinv = scipy.linalg.lapack.dtrtri(r, lower=0)[0]
    beta = rinv @ (q.T @ white[:, p])
    fit = MixedFit(base, wp, block, components, beta, rinv, df_wp, df_resid, wp_terms, whole_plot, notes, result)
    for name in fit.zero_components:
        fit.notes.insert(0, (
            f"The {name.replace('_', '-')} variance is estimated at zero (the boundary of what it can be): the "
            f"{name.replace('_', ' ')}s vary no more than the runs within them. The fit still stands; the tests "
            "keep the stratum degrees of freedom, which is conservative."
        ))
    return fit._remember(data, response, lambda changed, formula: fit_mixed(
        changed, response, formula, whole_plot=whole_plot, random_block=random_block, least_squares=least_squares,
        **options), zip(base.runs, np.flatnonzero(keep)))


def warn_if_whole_plots_ignored(result, data, refit, stacklevel=3):
    """Warn when *data* has whole plots that the least-squares *result* ignores, with each SE's change.

    *refit* is a callable ``refit(whole_plot=column)`` giving the split-plot fit of the same model.
    """
    if WHOLE_PLOT_COLUMN not in data.columns:
        return
    labels = data[WHOLE_PLOT_COLUMN]
    if labels.isna().any() or labels.nunique() in (0, 1, len(labels)):
        return
    try:
        mixed = refit(whole_plot=WHOLE_PLOT_COLUMN)
    except LevelwiseError as error:
        warnings.warn(
            f"The data has whole plots (column {WHOLE_PLOT_COLUMN!r}), which this least-squares fit ignores; a "
            f"split-plot fit could not be made ({error}). Standard errors that ignore the whole plots are wrong.",
            LevelwiseWarning, stacklevel=stacklevel,
        )
        return
    table = mixed.ignoring_whole_plots
    changes = "; ".join(
        f"{term}: {row.se_split_plot:.4g} with whole plots vs {row.se_ignoring_whole_plots:.4g} without "
        f"(x{row.ratio:.2f})" for term, row in table.iterrows()
    )
    warnings.warn(
        f"The data has whole plots (column {WHOLE_PLOT_COLUMN!r}) but this fit treats every run as "
        f"independently reset. Fit with whole_plot={WHOLE_PLOT_COLUMN!r} for the split-plot (REML) analysis. "
        f"Standard errors: {changes}.",
        LevelwiseWarning, stacklevel=stacklevel,
    )
