"""The :class:`Fit` result: an immutable least-squares fit and the statistics read from it."""
from __future__ import annotations

import dataclasses
import math
import operator
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from .._rich import anova_frame, coefficient_table, fit_html
from .._stats import t_ppf, t_sf
from . import _exclusions
from ._coding import Coding
from ._engine import PredictionEngine
from ._fit_queries import FitQueries
from ._formula import ModelSpec, term_name


@dataclass(frozen=True, eq=False)
class Fit(FitQueries):
    """An immutable least-squares fit. Build it with :func:`fit`; never change it.

    Coefficients are in coded units (-1/+1 at each factor's low/high) unless the
    fit was made with ``coding="none"``; :attr:`coefficients_natural` re-expresses
    them in natural units.

    Attributes
    ----------
    response : str
    spec : ModelSpec
        The estimated model columns (terms and exponent matrix over the coded variables).
    coding : Coding
    level : float
        Default confidence level.
    runs : pandas.Index
        Run ids of the runs in the fit (a property: ``all_runs`` less exclusions). A run id is the
        value in the data's ``run`` column when it has one, else the row's position 1..n.
    all_runs : pandas.Index
        Run ids of every run with a response, before exclusions.
    X, y : ndarray
        Model matrix and response of those runs (properties over ``X_all``, ``y_all``).
    beta : ndarray
        Coefficients in coded units, in the order of :attr:`terms`.
    rinv : ndarray
        A square root of ``(X'X)^-1`` (the inverse of the R factor; no longer triangular after
        :meth:`exclude` / :meth:`include` updates).
    run_settings : ndarray
        (n, k) natural settings used (achieved where recorded); categorical factors hold level indices.
    groups : tuple of (str, tuple of int)
        Each model term (intercept excluded) and its columns; one column per term unless the term
        involves a categorical factor.
    group_exponents : ndarray
        Exponents of each term of *groups* over the factors (for hierarchy).
    categories : dict
        Levels of each categorical factor (in contrast order).
    aliased : dict
        Terms dropped as inestimable (``on_rank_deficiency="warn"``) -> what each equals.
    missing_runs : tuple
        Run ids of runs left out because the response is missing.
    exclusions : tuple of (run id, reason)
        Runs excluded by :meth:`exclude`, with the reason given.
    setting_deviations : pandas.DataFrame or None
        Achieved - planned setting per run (rows) and factor (columns) in natural units,
        or None when the data carries no achieved settings.
    """

    response: str
    spec: ModelSpec
    coding: Coding
    level: float
    all_runs: pd.Index
    X_all: np.ndarray = field(repr=False)
    y_all: np.ndarray = field(repr=False)
    beta: np.ndarray = field(repr=False)
    rinv: np.ndarray = field(repr=False)
    rank: int = 0
    settings_all: np.ndarray = field(default=None, repr=False)
    groups: tuple = ()
    group_exponents: np.ndarray = field(default=None, repr=False)
    factor_names: tuple = ()
    contrasts: tuple = ()
    categories: dict = field(default_factory=dict)
    aliased: dict = field(default_factory=dict)
    missing_runs: tuple = ()
    exclusions: tuple = ()
    setting_deviations: pd.DataFrame | None = field(default=None, repr=False)
    _order: np.ndarray = field(default=None, repr=False)
    _lookup: dict = field(default_factory=dict, repr=False)

    # Exclusions keep the arrays of every run with a response (``*_all``) and change only the
    # positions in use (``_order``), so an exclusion copies nothing of size n x p.
    @cached_property
    def runs(self) -> pd.Index:
        """Run ids of the runs in the fit (the data's ``run`` column, else 1..n in row order)."""
        return self.all_runs if self._order is None else self.all_runs[self._order]

    @cached_property
    def X(self) -> np.ndarray:
        """Model matrix of the runs in the fit."""
        return self.X_all if self._order is None else self.X_all[self._order]

    @cached_property
    def y(self) -> np.ndarray:
        """Response of the runs in the fit."""
        return self.y_all if self._order is None else self.y_all[self._order]

    @cached_property
    def run_settings(self) -> np.ndarray:
        """(n, k) natural settings of the runs in the fit (achieved where recorded)."""
        return self.settings_all if self._order is None else self.settings_all[self._order]

    @property
    def settings(self) -> np.ndarray:
        """Same as :attr:`run_settings` (``levelwise.refit`` reads this name)."""
        return self.run_settings

    def _replace(self, **changes) -> Fit:
        """A new Fit with some fields changed and no cached values (cheaper than dataclasses.replace).

        Arrays are shared, not copied (they are read-only); derived values are recomputed on demand.
        """
        values = self._field_values.copy()  # a dict copy clones its table: no per-field inserts
        values.update(changes)
        new = object.__new__(Fit)
        object.__setattr__(new, "__dict__", values)
        return new

    @cached_property
    def _field_values(self) -> dict:
        """The dataclass fields of this fit by name, without cached values (what :meth:`_replace` copies)."""
        return dict(zip(_FIELDS, _FIELD_GETTER(self.__dict__)))

    @cached_property
    def _ordinals(self) -> np.ndarray:
        """Position of each run in the fit as first built (keeps run order through exclusions)."""
        return np.arange(self.n) if self._order is None else self._order

    # ----- basic statistics ------------------------------------------------------------------
    @property
    def n(self) -> int:
        return len(self.y_all) if self._order is None else len(self._order)

    @property
    def p(self) -> int:
        return self.spec.p

    @property
    def df_resid(self) -> int:
        return self.n - self.p

    @property
    def terms(self) -> tuple:
        return self.spec.terms

    @cached_property
    def _fitted(self) -> np.ndarray:
        return self.X @ self.beta

    @cached_property
    def _residuals(self) -> np.ndarray:
        return self.y - self._fitted

    @cached_property
    def fitted(self) -> pd.Series:
        """Fitted value of each run in the fit, indexed by run id."""
        return pd.Series(self._fitted, index=self.runs, name="fitted")

    @cached_property
    def residuals(self) -> pd.Series:
        """Residual (observed - fitted) of each run in the fit, indexed by run id."""
        return pd.Series(self._residuals, index=self.runs, name="residual")

    @cached_property
    def sse(self) -> float:
        return float(self._residuals @ self._residuals)

    @cached_property
    def s(self) -> float:
        """Residual standard deviation; NaN for a saturated fit (no residual df)."""
        return float(np.sqrt(self.sse / self.df_resid)) if self.df_resid > 0 else float("nan")

    @cached_property
    def _sst(self) -> float:
        total = self.y - self.y.mean() if self.spec.has_intercept else self.y
        return float(total @ total)

    @cached_property
    def r_squared(self) -> float:
        """R²; uncentred when the model has no intercept (as NIST StRD certifies it)."""
        return 1.0 - self.sse / self._sst if self._sst > 0 else float("nan")

    @cached_property
    def r_squared_adj(self) -> float:
        if self.df_resid <= 0:
            return float("nan")
        dof_total = self.n - 1 if self.spec.has_intercept else self.n
        return 1.0 - (1.0 - self.r_squared) * dof_total / self.df_resid

    @cached_property
    def leverage(self) -> np.ndarray:
        """Leverage (diagonal of the hat matrix) of each run: ``||x_i R^-1||^2``."""
        xr = self.X @ self.rinv
        return np.einsum("ij,ij->i", xr, xr)

    @cached_property
    def press(self) -> float:
        """Prediction error sum of squares: sum of (e_i / (1 - h_i))^2; NaN if some h_i = 1."""
        one_minus_h = 1.0 - self.leverage
        if np.any(one_minus_h <= 1e-12):
            return float("nan")
        return float(np.sum((self._residuals / one_minus_h) ** 2))

    @cached_property
    def r_squared_pred(self) -> float:
        """Predicted R², 1 - PRESS / total SS (uncentred without intercept)."""
        return 1.0 - self.press / self._sst if self._sst > 0 else float("nan")

    def t_quantile(self, level: float) -> float:
        """Two-sided t quantile for *level* on the residual df, cached per level."""
        cache = self.__dict__.setdefault("_t_cache", {})
        if level not in cache:
            cache[level] = float(t_ppf(0.5 + level / 2.0, self.df_resid)) if self.df_resid > 0 else float("nan")
        return cache[level]

    @cached_property
    def _c_diag(self) -> np.ndarray:
        return np.einsum("ij,ij->i", self.rinv, self.rinv)

    @cached_property
    def vif(self) -> np.ndarray:
        """Variance inflation factor of each column (NaN for the intercept).

        With an intercept, ``VIF_j = C_jj * sum((x_j - mean)^2) = 1 / (1 - R_j^2)``;
        without, the uncentred form ``C_jj * sum(x_j^2)``.
        """
        X = self.X
        centred = X - X.mean(axis=0) if self.spec.has_intercept else X
        out = self._c_diag * np.einsum("ij,ij->j", centred, centred)
        if self.spec.has_intercept:
            out[0] = np.nan
        return out

    @cached_property
    def coefficients(self) -> pd.DataFrame:
        """Estimate, std_error, t, p_value, ci_low, ci_high and vif per term (coded units).

        For a saturated fit (as many terms as runs) the estimates are given and the rest is NaN.
        """
        se = self.s * np.sqrt(self._c_diag)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = self.beta / se
        p = 2.0 * t_sf(np.abs(t), self.df_resid) if self.df_resid > 0 else np.full(self.p, np.nan)
        q = self.t_quantile(self.level)
        return coefficient_table(self, pd.DataFrame(
            {
                "estimate": self.beta,
                "std_error": se,
                "t": t,
                "p_value": p,
                "ci_low": self.beta - q * se,
                "ci_high": self.beta + q * se,
                "vif": self.vif,
            },
            index=pd.Index(self.terms, name="term"),
        ))

    @cached_property
    def coefficients_natural(self) -> pd.DataFrame:
        """Coefficients of the same model in natural units (``estimate``, ``std_error``).

        Each coded term is expanded into monomials of the natural settings. When the model is
        not hierarchical, the expansion has monomials the coded model lacks (``A:B`` alone gives
        ``A``, ``B`` and a constant); they are listed after the model's own terms. Categorical
        contrast columns are not rescaled.
        """
        var_center, var_scale = self._variable_coding
        names = self.spec.factor_names
        table: dict[tuple, np.ndarray] = {}
        for j, row in enumerate(self.spec.exponents):
            poly = {(): 1.0}
            for v in np.flatnonzero(row):
                e = int(row[v])
                new = {}
                for key, coef in poly.items():
                    for a in range(e + 1):
                        c = coef * math.comb(e, a) * (-var_center[v]) ** (e - a) / var_scale[v] ** e
                        grown = dict(key)
                        grown[int(v)] = a
                        k2 = tuple(sorted(grown.items())) if a else key
                        new[k2] = new.get(k2, 0.0) + c
                poly = new
            for key, coef in poly.items():
                table.setdefault(key, np.zeros(self.p))[j] += coef
        own = [tuple((int(v), int(e)) for v, e in enumerate(row) if e) for row in self.spec.exponents]
        extra = sorted((k for k in table if k not in own), key=lambda k: (sum(e for _, e in k), k))
        keys = [k for k in own if k in table] + extra
        T = np.array([table[k] for k in keys])
        estimate = T @ self.beta
        tr = T @ self.rinv
        se = self.s * np.sqrt(np.einsum("ij,ij->i", tr, tr))
        labels = []
        for key in keys:
            row = np.zeros(len(names), dtype=int)
            for v, e in key:
                row[v] = e
            labels.append(term_name(row, names))
        return pd.DataFrame({"estimate": estimate, "std_error": se}, index=pd.Index(labels, name="term"))

    @cached_property
    def _variable_coding(self):
        """Centre and scale of each coded variable (categorical contrast columns: 0 and 1)."""
        if not self.contrasts:
            return self.coding.center, self.coding.scale
        center, scale = [], []
        for j, contrast in enumerate(self.contrasts):
            width = 1 if contrast is None else contrast.shape[1]
            center += [self.coding.center[j] if contrast is None else 0.0] * width
            scale += [self.coding.scale[j] if contrast is None else 1.0] * width
        return np.array(center), np.array(scale)

    @cached_property
    def setting_deviation_summary(self) -> pd.DataFrame | None:
        """Per factor: runs moved from plan, largest and root-mean-square |achieved - planned| in
        natural units, and the largest as a fraction of the factor's half-range (coded units).
        None when the data carries no achieved settings."""
        dev = self.setting_deviations
        if dev is None:
            return None
        values = dev.to_numpy(dtype=float)
        half = np.array([self.coding.high[self.factor_names.index(c)] - self.coding.low[self.factor_names.index(c)]
                         for c in dev.columns]) / 2.0
        largest = np.abs(values).max(axis=0) if len(values) else np.zeros(len(dev.columns))
        with np.errstate(divide="ignore", invalid="ignore"):
            coded = np.where(half > 0, largest / half, np.nan)
        return pd.DataFrame(
            {
                "runs_moved": np.count_nonzero(values, axis=0),
                "max_abs": largest,
                "rms": np.sqrt(np.mean(values**2, axis=0)) if len(values) else largest,
                "max_abs_coded": coded,
            },
            index=pd.Index(dev.columns, name="factor"),
        )

    # ----- ANOVA, diagnostics, orthogonality -------------------------------------------------
    @cached_property
    def anova(self) -> pd.DataFrame:
        """ANOVA table: model, each term (partial SS respecting hierarchy), residual split into
        curvature, lack of fit and pure error when the runs allow it. See :mod:`levelwise.model._anova`."""
        from ._anova import anova_table

        return anova_frame(self, anova_table(
            self.X, self.y, self.groups, self.group_exponents, self.spec.has_intercept,
            self.run_settings, self._centre_indicator,
        ))

    @cached_property
    def _centre_indicator(self):
        """Centre-run indicator when the curvature test applies (``levelwise.model._term_tests.centre_indicator``):
        centre runs in the continuous factors, also when replicated at each level of discrete factors."""
        from ._term_tests import centre_indicator

        return centre_indicator(self)

    @cached_property
    def diagnostics(self) -> pd.DataFrame:
        """Per-run diagnostics in closed form (see :mod:`levelwise.model._diagnostics`)."""
        from ._diagnostics import influence_table

        return influence_table(self.X, self.beta, self._residuals, self.rinv, self.runs, self.terms)

    @cached_property
    def max_abs_correlation(self) -> float:
        """Largest |correlation| between two non-constant model columns of different terms.

        0 for an orthogonal design. The contrast columns of one categorical term are correlated by
        construction (0.5 for sum-to-zero contrasts in a balanced design), so pairs within a term are
        left out.
        """
        X = self.X
        varying = np.flatnonzero(np.ptp(X, axis=0) > 0) if self.n else np.zeros(0, dtype=int)
        if len(varying) < 2:
            return 0.0
        corr = np.corrcoef(X[:, varying], rowvar=False)
        term_of = np.full(self.p, -1)
        for g, (_, cols) in enumerate(self.groups):
            term_of[list(cols)] = g
        same = term_of[varying][:, None] == term_of[varying][None, :]
        corr[same] = 0.0
        return float(np.abs(corr).max())

    @property
    def orthogonality(self) -> dict:
        """What missing runs and exclusions cost: the runs left out, the largest |correlation|
        between model columns and the largest VIF."""
        vif = self.vif[np.isfinite(self.vif)]
        return {
            "missing_runs": self.missing_runs,
            "excluded_runs": tuple(label for label, _ in self.exclusions),
            "max_abs_correlation": self.max_abs_correlation,
            "max_vif": float(vif.max()) if vif.size else float("nan"),
        }

    # ----- exclusions by rank-one update (see levelwise.model._exclusions) ----------------------
    def exclude(self, run, reason: str) -> Fit:
        """A new Fit without run *run* (a run id, as in :attr:`runs`), by a rank-one downdate.

        ``(X'X)^-1`` loses the run by Sherman–Morrison; the square root kept in :attr:`rinv` is
        updated as ``R^-1 (I + a v v')`` with ``v = R^-T x``, ``h = v'v`` and
        ``a = (1/sqrt(1-h) - 1) / h``, so no QR is recomputed.

        Raises
        ------
        LevelwiseError
            When *run* is not a run id of the fit, *reason* is empty, or the run's leverage is 1
            (without it some term could not be estimated).
        """
        return _exclusions.exclude(self, run, reason)

    def include(self, run) -> Fit:
        """A new Fit with excluded run *run* (a run id) back in, by a rank-one update (Sherman–Morrison)."""
        return _exclusions.include(self, run)

    @cached_property
    def _rinv_beta(self) -> np.ndarray:
        """``[R^-1 | beta]`` side by side (one product gives x R^-1 and x beta), column-major as the
        rank-one update of :meth:`exclude` (BLAS dger) takes and returns it."""
        both = np.empty((self.p, self.p + 1), order="F")
        both[:, :-1] = self.rinv
        both[:, -1] = self.beta
        return both

    def _position(self, run):
        """Row of run id *run* among the runs in the fit, or None."""
        ordinal = self._ordinal_of(run)
        if ordinal is None or self._order is None:
            return ordinal
        i = int(np.searchsorted(self._ordinals, ordinal))
        return i if i < self.n and self._ordinals[i] == ordinal else None

    def _ordinal_of(self, run):
        """Position of run id *run* in :attr:`all_runs` (looked up in a dict shared by derived fits)."""
        lookup = self._lookup
        if not lookup:
            lookup.update(zip(self.all_runs.tolist(), range(len(self.all_runs))))
        if isinstance(run, bool):
            return None
        try:
            return lookup.get(run)
        except TypeError:  # an unhashable value
            return None


    # ----- prediction: everything goes through the one engine (levelwise.model._engine) ---------
    @cached_property
    def engine(self) -> PredictionEngine:
        """The prediction engine of this fit: coefficients, the covariance factor ``R^-1`` with
        dispersion ``s^2``, the coding, the settings check and the extrapolation rule."""
        used = self.group_exponents.any(axis=0) if self.group_exponents is not None and len(
            self.group_exponents) else np.zeros(len(self.factor_names), dtype=bool)
        return PredictionEngine(
            factor_names=self.factor_names, exponents=self.spec.exponents, beta=self.beta, cov_factor=self.rinv,
            center=self.coding.center, scale=self.coding.scale, low=self.coding.low, high=self.coding.high,
            dispersion=self.s**2, df=self.df_resid, categories=self.categories, contrasts=self.contrasts,
            used=used, max_leverage=float(self.leverage.max()) if self.n else np.inf, level=self.level,
        )

    def _repr_html_(self) -> str:
        return fit_html(self)

    def __repr__(self) -> str:
        return f"<Fit {self.response} ~ {self.spec.formula}: n={self.n}, p={self.p}, s={self.s:.4g}>"



_FIELDS = tuple(f.name for f in dataclasses.fields(Fit))
_FIELD_GETTER = operator.itemgetter(*_FIELDS)
