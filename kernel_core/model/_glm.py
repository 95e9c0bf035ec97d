"""Generalised linear models for counts: passes out of trials (binomial) and defect counts (Poisson).

The model matrix is the one of a least-squares fit (our formula, coding, categorical contrasts and run ids);
statsmodels ``GLM`` fits it by iteratively reweighted least squares. Coefficients are on the link scale
(log-odds, probit or log rate) per coded unit. Prediction hands the coefficients and a square root of their
covariance to the shared :class:`~levelwise.prediction.Predictor`, which returns the link-scale mean and
variance; the confidence interval is made on the link scale and transformed, so it stays inside (0, 1) for
a probability and above 0 for a rate.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._rich import anova_frame, coefficient_table, fit_html
from .._stats import f_sf, norm_ppf, norm_sf, stats
from . import _glm_residuals as _residuals
from ._families import FitFamily
from ._glm_inputs import _counts, _run_label
from ._glm_scale import inverse_link as _inverse_link
from ._glm_scale import refresh as _refresh
from ._glm_scale import transform as _transform

FAMILIES = {"binomial": ("logit", "probit"), "poisson": ("log",)}
#: Pearson chi-square / df above which overdispersion is reported and the quasi-likelihood scale offered.
OVERDISPERSION = 1.5
NEW_OBSERVATION = (
    "No interval for one new count is given. A new count varies by the binomial or Poisson law around a mean "
    "that is itself uncertain; the two combine into a discrete distribution with no exact, generally accepted "
    "interval that we check against a published source. Use the confidence interval for the probability or "
    "rate, and the binomial or Poisson spread at its limits as a guide."
)


class GlmFit(FitFamily):
    """A binomial or Poisson fit. Build it with ``levelwise.fit(..., family=...)``.

    Attributes
    ----------
    family, link : str
    base : Fit
        The least-squares fit that supplies the model matrix, coding and run ids.
    beta, cov_factor : ndarray
        Link-scale coefficients (coded units) and a square root of their covariance.
    dispersion : float
        Pearson chi-square / residual df (about 1 when the binomial or Poisson variance holds).
    scale : float
        1, or the dispersion for a quasi-likelihood fit (:meth:`quasi`).
    """

    kind = "glm"
    new_observation_note = NEW_OBSERVATION
    #: The data columns of the trials (binomial) and the exposure (Poisson), None when not given.
    trials_name = exposure_name = None

    def __init__(self, base, family, link, counts, trials, exposure, columns, scale_mode=None):
        # The two statsmodels modules a GLM needs, not statsmodels.api (about 26 MB less in a viewer's kernel).
        from statsmodels.genmod import families
        from statsmodels.genmod.generalized_linear_model import GLM

        self.base, self.family, self.link = base, family, link
        self.counts, self.trials, self.exposure = counts, trials, exposure
        self.columns = np.asarray(columns, dtype=int)
        self.X = np.asarray(base.X)[:, self.columns]
        links = families.links
        if family == "binomial":
            fam = families.Binomial(link=links.Logit() if link == "logit" else links.Probit())
            model = GLM(np.column_stack([counts, trials - counts]), self.X, family=fam)
        else:
            fam = families.Poisson(link=links.Log())
            model = GLM(counts, self.X, family=fam, exposure=exposure)
        self.statsmodels_result = res = model.fit()
        self.beta = np.asarray(res.params, dtype=float)
        self.deviance = float(res.deviance)
        self.pearson_chi2 = float(res.pearson_chi2)
        self.df_resid = int(round(res.df_resid))
        self.dispersion = self.pearson_chi2 / self.df_resid if self.df_resid > 0 else math.nan
        # Quasi-likelihood: the covariance times the Pearson dispersion. (statsmodels' own scale="X2" leaves
        # the trials out of the Pearson statistic for a two-column binomial response, so it is not used.)
        self.scale = self.dispersion if scale_mode == "quasi" else 1.0
        self.scale_mode = scale_mode
        cov = np.asarray(res.cov_params(), dtype=float) * self.scale
        self.cov_factor = np.linalg.cholesky(cov)
        self.notes = []
        se = np.sqrt(np.diag(cov))
        if (se > 50).any():
            self.notes.append(
                "Some coefficients have standard errors above 50 on the link scale ("
                + ", ".join(t for t, v in zip(self.terms, se) if v > 50) + "): the estimates run off towards "
                "infinity, as when some settings give only passes, only failures or only zero counts "
                "(separation). Their tests and intervals mean little; drop terms or add runs there."
            )

    # -- what the fit is ------------------------------------------------------------------------------
    response = property(lambda self: self.base.response)
    runs = property(lambda self: self.base.runs)
    factor_names = property(lambda self: self.base.factor_names)
    coding = property(lambda self: self.base.coding)
    categories = property(lambda self: self.base.categories)
    level = property(lambda self: self.base.level)

    @property
    def spec(self):
        """The model specification of the least-squares fit that supplies the model matrix (its formula)."""
        return self.base.spec

    @property
    def terms(self) -> tuple:
        return tuple(self.base.terms[c] for c in self.columns)

    @property
    def exponents(self) -> np.ndarray:
        return np.asarray(self.base.spec.exponents)[self.columns]

    @property
    def groups(self) -> list:
        """Each model term (intercept excluded) and its columns in this fit."""
        position = {c: i for i, c in enumerate(self.columns)}
        out = []
        for label, cols in self.base.groups:
            kept = tuple(position[c] for c in cols if c in position)
            if kept:
                out.append((label, kept))
        return out

    @property
    def n(self) -> int:
        return len(self.counts)

    @property
    def p(self) -> int:
        return len(self.columns)

    @property
    def response_scale(self) -> str:
        return "probability" if self.family == "binomial" else "rate per unit exposure"

    # -- coefficients and overdispersion --------------------------------------------------------------
    @cached_property
    def coefficients(self) -> pd.DataFrame:
        """Link-scale estimates, SEs, z, p, CI; odds ratios (logit) or rate ratios (log) per coded unit."""
        se = np.sqrt(np.einsum("ij,ij->i", self.cov_factor, self.cov_factor))
        z = self.beta / se
        q = norm_ppf(0.5 + self.level / 2.0)
        table = pd.DataFrame({"estimate": self.beta, "std_error": se, "z": z, "p_value": 2 * norm_sf(np.abs(z)),
                              "ci_low": self.beta - q * se, "ci_high": self.beta + q * se},
                             index=pd.Index(self.terms, name="term"))
        ratio = {"logit": "odds_ratio", "log": "rate_ratio"}.get(self.link)
        if ratio:
            table[ratio] = np.exp(table["estimate"])
            table[ratio + "_low"] = np.exp(table["ci_low"])
            table[ratio + "_high"] = np.exp(table["ci_high"])
        return coefficient_table(self, table)

    @property
    def overdispersion(self) -> str:
        """The Pearson chi-square / df check, in words."""
        phi, df = self.dispersion, self.df_resid
        law = "binomial" if self.family == "binomial" else "Poisson"
        if not df > 0:
            return "No residual degrees of freedom: overdispersion cannot be checked."
        p = float(stats.chi2.sf(self.pearson_chi2, df))
        head = f"Pearson chi-square / df = {self.pearson_chi2:.4g} / {df} = {phi:.3g} (p = {p:.3g})."
        if phi > OVERDISPERSION and p < 0.05:
            return (f"{head} The counts vary about {phi:.2g} times as much as the {law} law allows "
                    "(overdispersion): standard errors and tests that assume it are too optimistic. "
                    f"Refit on the quasi-likelihood scale (fit.quasi()), which multiplies the standard errors by "
                    f"sqrt({phi:.3g}) = {math.sqrt(phi):.3g}" + (" (in use)." if self.scale_mode else "."))
        if phi < 1 / OVERDISPERSION and p > 0.95:
            return f"{head} The counts vary less than the {law} law allows (underdispersion); the tests are " \
                   "conservative."
        return f"{head} No sign of overdispersion: the {law} variance fits the scatter of the counts."

    def quasi(self) -> GlmFit:
        """The same model on the quasi-likelihood scale (dispersion = Pearson chi-square / df)."""
        out = GlmFit(self.base, self.family, self.link, self.counts, self.trials, self.exposure, self.columns,
                     scale_mode="quasi")
        out.trials_name, out.exposure_name = self.trials_name, self.exposure_name
        return out

    # -- likelihood-ratio tests -----------------------------------------------------------------------
    def _deviance_without(self, drop):
        keep = [i for i in range(self.p) if i not in set(drop)]
        return GlmFit(self.base, self.family, self.link, self.counts, self.trials, self.exposure,
                      self.columns[keep]).deviance

    def _contains(self, bigger, smaller):
        return (bigger >= smaller).all() and (bigger != smaller).any()

    @cached_property
    def anova(self) -> pd.DataFrame:
        """Likelihood-ratio (deviance) test of each term, by the ANOVA's hierarchy rule.

        A term is tested after every term that does not contain it: the deviance of the model without the
        term and the terms containing it, less that of the model without only the terms containing it.
        On the quasi-likelihood scale the F statistic (LR / df) / dispersion is added.
        """
        term_exp = {label: exp for (label, _), exp in zip(self.base.groups, self.base.group_exponents)}
        groups = self.groups
        rows = {}
        for label, cols in groups:
            above = [c for other, ocols in groups if self._contains(term_exp[other], term_exp[label]) for c in ocols]
            with_term = self.deviance if not above else self._deviance_without(above)
            without = self._deviance_without(above + list(cols))
            lr, df = without - with_term, len(cols)
            row = {"df": df, "lr_chi2": lr, "p_value": float(stats.chi2.sf(lr, df))}
            if self.scale_mode == "quasi":
                f = lr / df / self.scale
                row.update({"F": f, "p_value": float(f_sf(f, df, self.df_resid))})
            rows[label] = row
        return anova_frame(self, pd.DataFrame.from_dict(rows, orient="index").rename_axis("term"))

    def reduce(self, alpha: float = 0.05, hierarchy: bool = True):
        """Backward elimination by likelihood-ratio tests; returns (final fit, steps)."""
        if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not 0 < alpha < 1:
            raise LevelwiseError(f"The 'alpha' parameter of reduce must be in (0, 1). Got {describe(alpha)} instead.")
        term_exp = {label: exp for (label, _), exp in zip(self.base.groups, self.base.group_exponents)}
        current, steps = self, []
        while True:
            table = current.anova
            labels = [label for label, _ in current.groups]
            removable = [t for t in labels if not hierarchy
                         or not any(current._contains(term_exp[o], term_exp[t]) for o in labels)]
            candidates = table.loc[removable] if removable else table.iloc[:0]
            if candidates.empty or candidates["p_value"].max() <= alpha:
                break
            worst = candidates["p_value"].idxmax()
            cols = dict(current.groups)[worst]
            keep = [i for i in range(current.p) if i not in set(cols)]
            steps.append({"step": len(steps) + 1, "term": worst, "lr_chi2": float(candidates.loc[worst, "lr_chi2"]),
                          "p_value": float(candidates.loc[worst, "p_value"]), "deviance": current.deviance})
            current = GlmFit(current.base, current.family, current.link, current.counts, current.trials,
                             current.exposure, current.columns[keep], scale_mode=current.scale_mode)
        current.trials_name, current.exposure_name = self.trials_name, self.exposure_name
        return current, pd.DataFrame(steps, columns=["step", "term", "lr_chi2", "p_value", "deviance"])

    # -- residuals and influence ----------------------------------------------------------------------
    @cached_property
    def diagnostics(self) -> pd.DataFrame:
        """Per run (by run id): expected count (``fitted``) and probability or rate (``fitted_mean``), deviance
        and Pearson residuals, both standardized by ``sqrt(scale (1 - h))``, Blom normal-plot positions of the
        standardized deviance residuals, leverage and Cook's distance (see :mod:`._glm_residuals`)."""
        return _residuals.diagnostics(self)

    def residuals_of(self, frame) -> pd.DataFrame:
        """Fitted probability or rate and deviance and Pearson residuals of any rows (e.g. excluded runs) that
        hold the factor settings, the response and the trials or exposure column."""
        return _residuals.residuals_of(self, frame)

    # -- effects and prediction -----------------------------------------------------------------------
    @property
    def _engine_columns(self):
        return self.columns

    @cached_property
    def engine(self):
        """The prediction engine on the link scale: coefficients, ``Cov(beta) = F F'``, normal quantiles (Wald,
        as statsmodels GLM). :meth:`predict` and :meth:`refresh` transform its bands by the inverse link."""
        return self._engine(self.exponents, df=None)

    @cached_property
    def effects(self) -> pd.DataFrame:
        """Per coded variable: the link-scale effect (high - low) and the change in probability or rate,
        each variable moved from -1 to +1 with every other coded variable at 0 (the centre)."""
        names = np.asarray(self.base.spec.factor_names)
        rows = {}
        center_row = (self.exponents.sum(axis=1) == 0).astype(float)
        centre = _inverse_link(self.link, center_row @ self.beta)
        for v, name in enumerate(names):
            row_of = {}
            for sign in (-1.0, 1.0):
                coded = np.zeros(len(names))
                coded[v] = sign
                row_of[sign] = np.prod(coded[None, :] ** self.exponents, axis=1) @ self.beta
            if not (self.exponents[:, v] > 0).any():
                continue
            low, high = _inverse_link(self.link, row_of[-1.0]), _inverse_link(self.link, row_of[1.0])
            rows[name] = {"link_effect": row_of[1.0] - row_of[-1.0], "at_low": low, "at_centre": centre,
                          "at_high": high, "change": high - low}
        return pd.DataFrame.from_dict(rows, orient="index").rename_axis("variable")

    def z_quantile(self, level: float) -> float:
        """Two-sided normal quantile (Wald intervals, as statsmodels GLM), cached per level."""
        return self.engine.quantile(self.engine._level(level))

    def _transform(self, eta, half):
        """Link-scale mean +/- half-width, transformed by the inverse link (never leaves the valid range)."""
        return _transform(self.link, eta, half)

    def mean_at(self, natural) -> np.ndarray:
        """Probability or rate per unit exposure at an (m, k) array of natural settings (no checks)."""
        eta, _ = self.engine.mean_and_leverage(natural)
        return _inverse_link(self.link, eta)

    def predict(self, settings, level: float | None = None, exposure=None) -> pd.DataFrame:
        """Probability (binomial) or rate per unit exposure (Poisson) with a CI made on the link scale.

        ``exposure`` (Poisson) also gives the expected count for that exposure. There is no interval for one
        new count; see :attr:`new_observation_note`.
        """
        link = self.engine.predict(settings, level)
        eta = link["mean"].to_numpy()
        out = pd.DataFrame(self._transform(eta, link["ci_high"].to_numpy() - eta))
        out["link_se"] = np.sqrt(link["leverage"].to_numpy())
        out["pi_low"] = out["pi_high"] = np.nan  # no interval for one new count: see new_observation_note
        if exposure is not None and self.family == "poisson":
            out["expected_count"] = out["mean"] * np.asarray(exposure, dtype=float)
        out["extrapolated"] = link["extrapolated"].to_numpy()
        return out

    def _curve(self, curve):
        return {"x": curve["x"], **self._transform(curve["mean"], curve["ci_half"])}

    def refresh(self, settings, level=None, points=50, slice_axes=None, shape=(100, 100), point=True) -> dict:
        """One slider event (see ``Fit.refresh``) on the response scale: bands ``ci_low``/``ci_high`` made on the
        link scale and transformed; no prediction interval (see :attr:`new_observation_note`)."""
        return _refresh(self, settings, level, points, slice_axes, shape, point)

    def traces(self, settings, points=50, level=None) -> dict:
        return {name: self._curve(c) for name, c in self.engine.traces(settings, points, level).items()}

    def _repr_html_(self) -> str:
        return fit_html(self)

    def __repr__(self) -> str:
        return (f"<GlmFit {self.family} ({self.link}) {self.response} ~ {self.base.spec.formula}: {self.n} runs, "
                f"deviance {self.deviance:.4g} on {self.df_resid} df>")


def fit_glm(data, response, model, *, family, trials=None, exposure=None, link=None, least_squares,
            **options) -> GlmFit:
    """Fit a binomial or Poisson GLM; see :class:`GlmFit`."""
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    if family not in FAMILIES:
        raise LevelwiseError(f"The 'family' parameter must be one of {list(FAMILIES)}. Got {describe(family)} instead.")
    link = FAMILIES[family][0] if link is None else link
    if link not in FAMILIES[family]:
        raise LevelwiseError(
            f"The 'link' parameter for family {family!r} must be one of {list(FAMILIES[family])}. "
            f"Got {describe(link)} instead."
        )
    if family == "binomial" and trials is None:
        raise LevelwiseError("A binomial fit needs 'trials': the column holding the number of trials of each run.")
    if family == "binomial" and exposure is not None:
        raise LevelwiseError("The 'exposure' parameter is for Poisson fits; a binomial fit takes 'trials'.")
    if family == "poisson" and trials is not None:
        raise LevelwiseError("The 'trials' parameter is for binomial fits; a Poisson fit takes 'exposure'.")
    counts_all = _counts(data, response, "response")
    keep = ~np.isnan(counts_all)
    trials_all = exposure_all = None
    drop = []
    if trials is not None:
        trials_all = _counts(data, trials, "trials", keep)
        drop.append(trials)
        for row in np.flatnonzero(keep):
            if trials_all[row] == 0:
                raise LevelwiseError(f"Run {_run_label(data, row)}: the trials column {trials!r} holds 0; every run "
                                     "with a response needs at least one trial.")
            if counts_all[row] > trials_all[row]:
                raise LevelwiseError(
                    f"Run {_run_label(data, row)}: {counts_all[row]:g} passes in column {response!r} is more than "
                    f"the {trials_all[row]:g} trials in column {trials!r}."
                )
    if exposure is not None:
        exposure_all = _counts(data, exposure, "exposure", keep)
        drop.append(exposure)
        for row in np.flatnonzero(keep):
            if not exposure_all[row] > 0:
                raise LevelwiseError(f"Run {_run_label(data, row)}: the exposure column {exposure!r} must be "
                                     f"positive. Got {exposure_all[row]:g} instead.")
    base = least_squares(data.drop(columns=drop), response, model, **options)
    counts = counts_all[keep]
    fit = GlmFit(base, family, link, counts, None if trials_all is None else trials_all[keep],
                 None if exposure_all is None else exposure_all[keep], np.arange(base.p))
    fit.trials_name, fit.exposure_name = trials, exposure
    return fit._remember(data, response, lambda changed, formula: fit_glm(
        changed, response, formula, family=family, trials=trials, exposure=exposure, link=link,
        least_squares=least_squares, **options), zip(base.runs, np.flatnonzero(keep)))
