"""Least-squares fitting by Householder QR with column pivoting, and the :class:`Fit` result.

The normal equations lose about twice the digits of QR, and ``numpy.linalg.lstsq``
with its default ``rcond`` silently drops small singular values, so neither is
used. Columns are scaled to unit length before the pivoted QR (and the solution
unscaled after), which keeps high-degree polynomials in natural units accurate.
Rank is decided from the pivoted R, and inestimable terms are named with the
terms they are aliased with; a minimum-norm split of aliased effects is never made.

Conventions
-----------
- **Coding**: coded = (natural - centre) / half-range, -1 at a factor's low and +1
  at its high. Ranges come from ``factors`` when given, else each column's min..max.
  ``coding="none"`` fits in natural units.
- **Categorical factors** (a :class:`Factor` with ``is_categorical``, or a factor
  column holding text) use *sum-to-zero* contrasts over the levels seen in the
  data, in the factor's level order (else sorted): each level but the first has a
  column, named ``Factor[level]``, that is 1 at that level, -1 at the first level and
  0 elsewhere. A two-level categorical factor therefore codes as -1 (first level) /
  +1 (second), as ``Factor.to_coded`` does, and its effect is 2 x its coefficient.
- **Achieved settings**: a column named ``"<factor> (achieved)"`` (or any column
  given in ``achieved={factor: column}``) holds the setting actually reached in
  each run. The fit uses it where it has a value, and the plan elsewhere;
  :attr:`Fit.setting_deviations` reports achieved - planned per run and factor.
"""

from __future__ import annotations

import dataclasses
import math
import operator
import warnings
from dataclasses import dataclass, field
from functools import cached_property
from itertools import product
from types import MappingProxyType

import numpy as np
import pandas as pd
import scipy.linalg
from scipy import stats

from ._errors import LevelwiseError, LevelwiseWarning, describe
from .design import META_COLUMNS, Factor
from .formula import ModelSpec, monomials, names_in_model, parse_model, term_name
from .prediction import InteractivePlan, Predictor, encode

#: Suffix of a column holding the achieved setting of a factor: ``"Oven (achieved)"``.
ACHIEVED_SUFFIX = " (achieved)"


@dataclass(frozen=True)
class Coding:
    """Centre and half-range per factor: coded = (natural - center) / scale."""

    names: tuple
    center: np.ndarray
    scale: np.ndarray
    low: np.ndarray
    high: np.ndarray

    def to_coded(self, natural: np.ndarray) -> np.ndarray:
        return (natural - self.center) / self.scale


def _check_level(level) -> float:
    if (
        isinstance(level, bool)
        or not isinstance(level, (int, float, np.floating, np.integer))
        or not 0 < level < 1
    ):
        raise LevelwiseError(
            f"The 'level' parameter must be a number in the open interval (0, 1). Got {describe(level)} instead."
        )
    return float(level)


def _numeric_column(data: pd.DataFrame, column: str, role: str) -> np.ndarray:
    """Column as float, with an error naming the row and value of the first non-number."""
    values = data[column]
    converted = pd.to_numeric(values, errors="coerce")
    bad = converted.isna() & values.notna()
    if bad.any():
        row = bad.to_numpy().nonzero()[0][0]
        raise LevelwiseError(
            f"The {role} column {column!r} must hold numbers. "
            f"Row {row + 1} (index {data.index[row]!r}) holds {describe(values.iloc[row])} instead."
        )
    array = converted.to_numpy(dtype=float, na_value=np.nan)
    infinite = np.isinf(array)
    if infinite.any():
        row = int(np.flatnonzero(infinite)[0])
        raise LevelwiseError(
            f"The {role} column {column!r} must hold finite numbers. Row {row + 1} holds {array[row]!r} instead."
        )
    return array


_PLAIN_NUMBERS = (int, float, np.float64, np.float32, np.int64, np.int32)
_PLAIN_TYPES = frozenset(_PLAIN_NUMBERS)


def _read_only(*arrays):
    """Mark arrays read-only, so a Fit's numbers cannot be changed in place."""
    for array in arrays:
        if isinstance(array, np.ndarray):
            array.flags.writeable = False
    return arrays if len(arrays) > 1 else arrays[0]


def _is_text_column(values: pd.Series) -> bool:
    return not (pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values))


def sum_to_zero(levels: int) -> np.ndarray:
    """(L, L-1) sum-to-zero contrast matrix: a row of -1 for the first level, then identity rows.

    For two levels this is -1 at the first level and +1 at the second, the coding of
    :meth:`Factor.to_coded` for a two-level categorical factor.
    """
    return np.vstack([-np.ones((1, levels - 1)), np.eye(levels - 1)])


@dataclass(frozen=True, eq=False)
class Fit:
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
        Labels (data index) of the runs in the fit (a property: ``all_runs`` less exclusions).
    all_runs : pandas.Index
        Labels of every run with a response, before exclusions.
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
        Labels of runs left out because the response is missing.
    exclusions : tuple of (label, reason)
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
        """Same as :attr:`run_settings` (``levelwise.reduce.refit`` reads this name)."""
        return self.run_settings

    def _replace(self, **changes) -> Fit:
        """A new Fit with some fields changed and no cached values (cheaper than dataclasses.replace).

        Arrays are shared, not copied (they are read-only); derived values are recomputed on demand.
        """
        new = object.__new__(Fit)
        values = new.__dict__
        values.update(zip(_FIELDS, _FIELD_GETTER(self.__dict__)))
        values.update(changes)
        return new

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
    def fitted(self) -> np.ndarray:
        return self.X @ self.beta

    @cached_property
    def residuals(self) -> np.ndarray:
        return self.y - self.fitted

    @cached_property
    def sse(self) -> float:
        return float(self.residuals @ self.residuals)

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
        return float(np.sum((self.residuals / one_minus_h) ** 2))

    @cached_property
    def r_squared_pred(self) -> float:
        """Predicted R², 1 - PRESS / total SS (uncentred without intercept)."""
        return 1.0 - self.press / self._sst if self._sst > 0 else float("nan")

    def t_quantile(self, level: float) -> float:
        """Two-sided t quantile for *level* on the residual df, cached per level."""
        cache = self.__dict__.setdefault("_t_cache", {})
        if level not in cache:
            cache[level] = float(stats.t.ppf(0.5 + level / 2.0, self.df_resid)) if self.df_resid > 0 else float("nan")
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
        p = 2.0 * stats.t.sf(np.abs(t), self.df_resid) if self.df_resid > 0 else np.full(self.p, np.nan)
        q = self.t_quantile(self.level)
        return pd.DataFrame(
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
        )

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
        curvature, lack of fit and pure error when the runs allow it. See :mod:`levelwise.anova`."""
        from .anova import anova_table

        return anova_table(
            self.X, self.y, self.groups, self.group_exponents, self.spec.has_intercept,
            self.run_settings, self._centre_indicator,
        )

    @cached_property
    def _centre_indicator(self):
        """Centre-run indicator when the curvature test applies (``levelwise._term_tests.centre_indicator``):
        centre runs in the continuous factors, also when replicated at each level of discrete factors."""
        from ._term_tests import centre_indicator

        return centre_indicator(self)

    @cached_property
    def diagnostics(self) -> pd.DataFrame:
        """Per-run diagnostics in closed form (see :mod:`levelwise.diagnostics`)."""
        from .diagnostics import influence_table

        return influence_table(self.X, self.beta, self.residuals, self.rinv, self.runs, self.terms)

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

    # ----- exclusions by rank-one update ------------------------------------------------------
    def exclude(self, run, reason: str) -> Fit:
        """A new Fit without *run* (a data index label), by a rank-one downdate.

        ``(X'X)^-1`` loses the run by Sherman–Morrison; the square root kept in :attr:`rinv` is
        updated as ``R^-1 (I + a v v')`` with ``v = R^-T x``, ``h = v'v`` and
        ``a = (1/sqrt(1-h) - 1) / h``, so no QR is recomputed.

        Raises
        ------
        LevelwiseError
            When *run* is not in the fit, *reason* is empty, or the run's leverage is 1 (without
            it some term could not be estimated).
        """
        if not isinstance(reason, str) or not reason.strip():
            raise LevelwiseError(
                f"The 'reason' parameter of exclude must be a non-empty text saying why run {run!r} is "
                f"left out. Got {describe(reason)} instead."
            )
        i = self._position(run)
        if i is None:
            raise LevelwiseError(
                f"The 'run' parameter of exclude must be a run in this fit {list(self.runs)[:20]}. "
                f"Got {describe(run)} instead."
            )
        n = self.n
        if n - 1 < self.p:
            raise LevelwiseError(
                f"Run {run!r} cannot be excluded: the model has {self.p} terms and only {n - 1} runs would remain."
            )
        order = self._order
        ordinal = i if order is None else int(order[i])
        x = self.X_all[ordinal]
        rinv = self.rinv
        both = x @ self._rinv_beta  # x R^-1, then the fitted value x beta
        v = both[:-1]
        h = float(v @ v)
        if h > 1.0 - 1e-10:
            raise LevelwiseError(
                f"Run {run!r} cannot be excluded: its leverage is 1, so without it at least one term of the "
                "model could not be estimated. Drop a term or keep the run."
            )
        e = float(self.y_all[ordinal]) - float(both[-1])
        cx = rinv @ v
        a = (1.0 / math.sqrt(1.0 - h) - 1.0) / h if h > 0 else 0.5
        # [R^-1 | beta] in one update: R^-1 + a cx v' and beta - cx e / (1 - h).
        w = both * a
        w[-1] = -e / (1.0 - h)
        new_rb = np.multiply.outer(cx, w)
        new_rb += self._rinv_beta
        new_rb.flags.writeable = False
        new_rinv, new_beta = new_rb[:, :-1], new_rb[:, -1]
        every = self._ordinals
        new_order = np.concatenate((every[:i], every[i + 1 :]))
        new = self._replace(
            beta=new_beta,
            rinv=new_rinv,
            exclusions=self.exclusions + ((run, reason.strip()),),
            _order=new_order,
        )
        new.__dict__["_rinv_beta"] = new_rb
        # The residual sum of squares loses the run's deleted residual: SSE - e^2 / (1 - h)
        # (Belsley, Kuh & Welsch 1980). Kept only when no digits cancel; else recomputed on demand.
        sse = self.sse
        smaller = sse - e * e / (1.0 - h)
        if smaller > 1e-6 * sse:
            new.__dict__["sse"] = smaller
            new.__dict__["s"] = math.sqrt(smaller / (n - 1 - self.p)) if n - 1 > self.p else float("nan")
        return new

    @cached_property
    def _rinv_beta(self) -> np.ndarray:
        """``[R^-1 | beta]`` side by side (one product gives x R^-1 and x beta)."""
        return np.column_stack([self.rinv, self.beta])

    def _position(self, run):
        """Row of *run* among the runs in the fit, or None."""
        ordinal = self._ordinal_of(run)
        if ordinal is None or self._order is None:
            return ordinal
        i = int(np.searchsorted(self._ordinals, ordinal))
        return i if i < self.n and self._ordinals[i] == ordinal else None

    def _ordinal_of(self, run):
        """Position of *run* in :attr:`all_runs` (labels looked up in a dict shared by derived fits)."""
        lookup = self._lookup
        if not lookup and self.all_runs.is_unique:
            lookup.update(zip(self.all_runs, range(len(self.all_runs))))
        try:
            ordinal = lookup.get(run)
        except TypeError:  # an unhashable label
            return None
        return ordinal

    def include(self, run) -> Fit:
        """A new Fit with an excluded *run* back in, by a rank-one update (Sherman–Morrison)."""
        excluded = [label for label, _ in self.exclusions]
        if run not in excluded:
            raise LevelwiseError(
                f"The 'run' parameter of include must be an excluded run {excluded}. Got {describe(run)} instead."
            )
        ordinal = self._ordinal_of(run)
        x, y_run = self.X_all[ordinal], self.y_all[ordinal]
        v = self.rinv.T @ x
        h = float(v @ v)
        e = y_run - x @ self.beta
        cx = self.rinv @ v
        beta = self.beta + cx * e / (1.0 + h)
        a = (1.0 / np.sqrt(1.0 + h) - 1.0) / h if h > 0 else -0.5
        rinv = self.rinv + a * np.outer(cx, v)
        i = int(np.searchsorted(self._ordinals, ordinal))
        return self._replace(
            beta=_read_only(beta),
            rinv=_read_only(rinv),
            exclusions=tuple(item for item in self.exclusions if item[0] != run),
            _order=np.insert(self._ordinals, i, ordinal),
        )

    # ----- prediction ------------------------------------------------------------------------
    @cached_property
    def predictor(self) -> Predictor:
        """The cached evaluator for the interactive path (no formulas, no DataFrames)."""
        return Predictor(
            exponents=self.spec.exponents,
            beta=self.beta,
            rinv=self.rinv,
            center=self.coding.center,
            scale=self.coding.scale,
            s=self.s,
            t_of_level=self.t_quantile,
            contrasts=self.contrasts,
            max_leverage=float(self.leverage.max()) if self.n else np.inf,
        )

    @cached_property
    def interactive_plan(self) -> InteractivePlan | None:
        """Per-fit constants of :meth:`refresh` (None when the model has categorical factors)."""
        if self.contrasts or not self.factor_names or self.spec.exponents.shape != (self.p, len(self.factor_names)):
            return None
        return InteractivePlan(self.spec.exponents, self.beta, self.rinv, self.coding.center, self.coding.scale,
                               self.coding.low, self.coding.high)

    @cached_property
    def _factor_set(self) -> frozenset:
        return frozenset(self.factor_names)

    def settings_vector(self, settings) -> np.ndarray:
        """Validate one setting given as a dict ``{factor: number}`` (natural units) into a (k,) array.

        Checked by hand, without pandas (this runs on every slider event). Categorical factors are
        given by level. Every factor must be given, no other name, each a finite number.
        """
        if not isinstance(settings, dict):
            raise LevelwiseError(
                "The 'settings' parameter must be a dict of factor -> natural setting. "
                f"Got {describe(settings)} instead."
            )
        names = self.factor_names
        if len(settings) != len(names) or not self._factor_set.issuperset(settings):
            missing = [name for name in names if name not in settings]
            if missing:
                raise LevelwiseError(
                    f"The 'settings' parameter is missing factor(s) {missing}; it must give every factor of the "
                    f"model {list(names)}."
                )
            unknown = [key for key in settings if key not in self._factor_set]
            raise LevelwiseError(
                f"The 'settings' parameter names {[str(key) for key in unknown]}, which the model does not have; "
                f"its factors are {list(names)}."
            )
        row = [settings[name] for name in names]
        if not self.categories:
            for value in row:
                if type(value) not in _PLAIN_TYPES or not math.isfinite(value):
                    break
            else:
                return np.array(row, dtype=float)
        vector = np.empty(len(names))
        for j, (name, value) in enumerate(zip(names, row)):
            if name in self.categories:
                vector[j] = _level_indices([value], name, self.categories[name], "setting")[0]
                if np.isnan(vector[j]):
                    raise LevelwiseError(
                        f"The setting for categorical factor {name!r} must be one of its levels "
                        f"{list(self.categories[name])}. Got {describe(value)} instead."
                    )
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
                raise LevelwiseError(
                    f"The setting for factor {name!r} must be a finite number. Got {describe(value)} instead."
                )
            if not math.isfinite(value):
                raise LevelwiseError(
                    f"The setting for factor {name!r} must be a finite number. Got {describe(value)} instead."
                )
            vector[j] = value
        return vector

    def refresh(self, settings, level: float | None = None, points: int | None = 50, slice_axes=None,
                shape=(100, 100), point: bool = True) -> dict:
        """Everything one slider event needs, in one call, as numpy arrays (no DataFrames).

        Parameters
        ----------
        settings : dict
            ``{factor: natural setting}`` for every factor of the model (a level for a categorical one).
        level : float, optional
            Confidence level of the intervals (the fit's level by default).
        points : int or None
            Points per factor trace; None computes no traces.
        slice_axes : (str, str), optional
            The factors across and up a surface slice; None computes no slice.
        shape : (int, int)
            Grid points of the slice along its two axes.
        point : bool
            False computes no point prediction (a view that shows only the slice).

        Returns
        -------
        dict
            ``point``: ``mean``, ``ci_low``, ``ci_high``, ``pi_low``, ``pi_high``, ``leverage`` (floats)
            and ``extrapolated`` (bool), as one row of :meth:`predict` (or None); ``traces``: as
            :meth:`traces` (or None); ``slice``: as :meth:`slice` (or None).

        Raises
        ------
        LevelwiseError
            A setting that is missing, not a finite number, an unknown level or names no factor of
            the model; a bad ``level``, ``points``, ``slice_axes`` or ``shape``.
        """
        natural = self.settings_vector(settings)
        if level is None:
            level = self.level
        elif level != self.level:
            level = _check_level(level)
        if points is not None and (isinstance(points, bool) or not isinstance(points, (int, np.integer))
                                   or not 2 <= points <= 100_000):
            raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 100000 or None. "
                                 f"Got {describe(points)}.")
        plan = self.interactive_plan
        if plan is None:  # categorical factors: the general path
            out = {"point": None}
            if point:
                row = self.predict(settings, level).iloc[0]
                out["point"] = {key: (bool(row[key]) if key == "extrapolated" else float(row[key]))
                                for key in row.index}
            out["traces"] = None if points is None else self.traces(settings, int(points), level)
            out["slice"] = None if slice_axes is None else self.slice(*_axes(slice_axes), settings, shape, level)
            return out
        ts = self.t_quantile(level) * self.s
        powers = plan.powers(natural)
        out = {"point": plan.point(natural, powers, ts, self.predictor.max_leverage) if point else None}
        out["traces"] = None if points is None else self._trace_dict(plan, powers, ts, int(points))
        out["slice"] = None
        if slice_axes is not None:
            ix, iy = self._slice_axes(slice_axes)
            out["slice"] = plan.slice(powers, ts, ix, iy, _shape(shape))
        return out

    def _trace_dict(self, plan, powers, ts, points):
        xs, mean, ci, pi = plan.traces(powers, ts, points)
        return {name: {"x": xs[j], "mean": mean[j], "ci_half": ci[j], "pi_half": pi[j]}
                for j, name in enumerate(self.factor_names)}

    def _slice_axes(self, slice_axes):
        cache = self.__dict__.setdefault("_slice_axes_cache", {})
        try:
            return cache[slice_axes]
        except (KeyError, TypeError):
            pass
        from .surface import _slice_factors

        x, y = _axes(slice_axes)
        result = _slice_factors(self, x, y)
        cache[(x, y)] = result
        return result

    def settings_array(self, settings) -> np.ndarray:
        """Validate factor settings (dict or DataFrame, natural units) into an (m, k) array.

        Categorical factors are given by level and become level indices; a level that was not in
        the data is an error (it has no estimated effect).
        """
        if isinstance(settings, dict) and not self.categories:
            # Fast path for the interactive case (one setting of plain numbers); anything else, and
            # every error message, goes through the general path below.
            try:
                row = [settings[name] for name in self.factor_names]
            except KeyError:
                row = None
            if row is not None and all(type(v) in _PLAIN_NUMBERS for v in row):
                array = np.array([row], dtype=float)
                if np.isfinite(array).all():
                    return array
        if isinstance(settings, pd.DataFrame):
            frame = settings
        elif isinstance(settings, dict):
            columns = {key: np.atleast_1d(value) for key, value in settings.items()}
            lengths = {len(v) for v in columns.values()} - {1}
            if len(lengths) > 1 or 0 in lengths or any(np.ndim(v) != 1 for v in columns.values()):
                raise LevelwiseError(
                    "The 'settings' values must be single numbers or lists of one common length. "
                    f"Got {describe(settings)} instead."
                )
            n = lengths.pop() if lengths else 1
            frame = pd.DataFrame({key: np.resize(v, n) if len(v) == 1 else v for key, v in columns.items()})
        else:
            raise LevelwiseError(
                "The 'settings' parameter must be a dict or DataFrame of factor settings in natural units. "
                f"Got {describe(settings)} instead."
            )
        missing = [name for name in self.factor_names if name not in frame.columns]
        if missing:
            raise LevelwiseError(
                f"The 'settings' parameter is missing factor(s) {missing}; it must give every factor of the model "
                f"{list(self.factor_names)}."
            )
        columns = []
        for name in self.factor_names:
            if name in self.categories:
                columns.append(_level_indices(frame[name], name, self.categories[name], "settings"))
            else:
                columns.append(_numeric_column(frame, name, "setting"))
        array = np.column_stack(columns) if columns else np.empty((len(frame), 0))
        if np.isnan(array).any():
            row, col = np.argwhere(np.isnan(array))[0]
            raise LevelwiseError(
                f"The setting for factor {self.factor_names[col]!r} in row {row + 1} must be a finite number. "
                "Got NaN instead."
            )
        return array

    def predict(self, settings, level: float | None = None) -> pd.DataFrame:
        """Predicted mean with confidence and prediction intervals at natural-unit *settings*.

        Returns a DataFrame with ``mean``, ``ci_low``, ``ci_high`` (confidence interval for the
        mean), ``pi_low``, ``pi_high`` (prediction interval for one new run), ``leverage`` and
        ``extrapolated``: a setting outside the factor ranges, or whose leverage exceeds the
        largest leverage among the runs of the fit.
        """
        level = self.level if level is None else _check_level(level)
        natural = self.settings_array(settings)
        predictor = self.predictor
        mean, h = predictor.mean_and_leverage(natural)
        q = self.t_quantile(level)
        ci_half = q * self.s * np.sqrt(h)
        pi_half = q * self.s * np.sqrt(1.0 + h)
        continuous = np.array([name not in self.categories for name in self.factor_names], dtype=bool)
        tol = 1e-9 * self.coding.scale
        outside = (((natural < self.coding.low - tol) | (natural > self.coding.high + tol)) & continuous).any(axis=1)
        outside |= h > predictor.max_leverage * (1.0 + 1e-9) + 1e-12
        return pd.DataFrame(
            {
                "mean": mean,
                "ci_low": mean - ci_half,
                "ci_high": mean + ci_half,
                "pi_low": mean - pi_half,
                "pi_high": mean + pi_half,
                "leverage": h,
                "extrapolated": outside,
            }
        )

    def trace(self, factor: str, settings, points: int = 50, level: float | None = None) -> dict:
        """The predicted response along one factor's range, the others held at *settings*.

        Returns a dict of arrays: ``x`` (natural units; the levels for a categorical factor),
        ``mean``, ``ci_half`` and ``pi_half``.
        """
        level = self.level if level is None else _check_level(level)
        if factor not in self.factor_names:
            raise LevelwiseError(
                f"The 'factor' parameter must be one of {list(self.factor_names)}. Got {describe(factor)} instead."
            )
        if isinstance(points, bool) or not isinstance(points, (int, float, np.integer, np.floating)) \
                or not 2 <= points <= 100_000 or points != int(points):
            raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 100000. Got {describe(points)}.")
        base = self.settings_array(settings)[0]
        j = self.factor_names.index(factor)
        grids = self.__dict__.setdefault("_trace_grids", {})  # the x values per (factor, points), cached
        key = (j, int(points))
        if key not in grids:
            if factor in self.categories:
                labels = np.array(self.categories[factor], dtype=object)
                grids[key] = (labels, np.arange(len(labels), dtype=float))
            else:
                x = np.linspace(self.coding.low[j], self.coding.high[j], int(points))
                grids[key] = (x, x)
        labels, x = grids[key]
        grid = np.empty((len(x), len(base)))
        grid[:] = base
        grid[:, j] = x
        mean, ci_half, pi_half = self.predictor.intervals(grid, level)
        return {"x": labels, "mean": mean, "ci_half": ci_half, "pi_half": pi_half}

    def traces(self, settings, points: int = 50, level: float | None = None) -> dict:
        """:meth:`trace` for every factor at once: ``{factor: {"x", "mean", "ci_half", "pi_half"}}``.

        The continuous factors' curves are evaluated in one batch (one model evaluation for all of
        them), which is what a refresh of every slider's curve needs.
        """
        level = self.level if level is None else _check_level(level)
        base = self.settings_array(settings)[0]
        points = int(points)
        plan = self.interactive_plan
        if plan is not None and 2 <= points <= 100_000:
            return self._trace_dict(plan, plan.powers(base), self.t_quantile(level) * self.s, points)
        grids = self.__dict__.setdefault("_trace_grids", {})
        key = ("all", points)
        if key not in grids:
            continuous = [j for j, name in enumerate(self.factor_names) if name not in self.categories]
            template = np.full((len(continuous) * points, len(self.factor_names)), np.nan)
            xs = {}
            for b, j in enumerate(continuous):
                xs[j] = np.linspace(self.coding.low[j], self.coding.high[j], points)
                template[b * points : (b + 1) * points, j] = xs[j]
            grids[key] = (continuous, template, np.isnan(template), xs)
        continuous, template, blank, xs = grids[key]
        out = {}
        if continuous:
            grid = np.where(blank, base, template)
            mean, ci_half, pi_half = self.predictor.intervals(grid, level)
            for b, j in enumerate(continuous):
                part = slice(b * points, (b + 1) * points)
                out[self.factor_names[j]] = {"x": xs[j], "mean": mean[part], "ci_half": ci_half[part],
                                             "pi_half": pi_half[part]}
        for name in self.categories:
            out[name] = self.trace(name, settings, points, level)
        return {name: out[name] for name in self.factor_names}

    # ----- delegations to the analysis modules (imported lazily) ------------------------------
    @property
    def effects(self):
        """Effects (2 x coded coefficient for two-level terms); see :mod:`levelwise.effects`."""
        from .effects import effects

        return effects(self)

    def lenth(self, alpha: float = 0.05):
        """Lenth's (1989) PSE, ME, SME and the active effects; see :mod:`levelwise.effects`."""
        from .effects import lenth

        return lenth(self, alpha)

    def half_normal(self):
        """Half-normal plot coordinates of the effects; see :mod:`levelwise.effects`."""
        from .effects import half_normal

        return half_normal(self)

    def slice(self, x, y, settings, shape=(100, 100), level=None):
        """Surface-slice grids of mean and CI/PI half-widths; see :mod:`levelwise.surface`."""
        from .surface import slice_grid

        return slice_grid(self, x, y, settings, shape, level)

    def box_cox(self):
        """Box–Cox λ with a 95% CI and a suggestion; see :mod:`levelwise.boxcox`."""
        from .boxcox import box_cox

        return box_cox(self)

    def __repr__(self) -> str:
        return f"<Fit {self.response} ~ {self.spec.formula}: n={self.n}, p={self.p}, s={self.s:.4g}>"


def _axes(slice_axes) -> tuple:
    """The two slice factors from ``slice_axes``."""
    try:
        x, y = slice_axes
    except (TypeError, ValueError):
        raise LevelwiseError(
            "The 'slice_axes' parameter must be a pair of factor names (across, up). "
            f"Got {describe(slice_axes)} instead."
        ) from None
    return x, y


def _shape(shape) -> tuple:
    if type(shape) is tuple and len(shape) == 2 and type(shape[0]) is int and type(shape[1]) is int \
            and shape[0] >= 2 and shape[1] >= 2:
        return shape
    from .surface import _check_shape

    return _check_shape(shape)


def _level_indices(values: pd.Series, name: str, levels: tuple, role: str) -> np.ndarray:
    """Indices of categorical *values* in *levels*; NaN where missing; error on an unknown level."""
    lookup = {level: i for i, level in enumerate(levels)}
    lookup.update({str(level): i for i, level in enumerate(levels)})
    out = np.full(len(values), np.nan)
    for row, value in enumerate(values):
        if value is None or (isinstance(value, float) and math.isnan(value)):
            continue
        key = value if value in lookup else str(value)
        if key not in lookup:
            raise LevelwiseError(
                f"The {role} for categorical factor {name!r} in row {row + 1} is level {describe(value)}, "
                f"which was not in the data of this fit. Allowed levels: {list(levels)}."
            )
        out[row] = lookup[key]
    return out


def _coding_for(names, data_columns, factors, coding, categories) -> Coding:
    if coding not in ("auto", "none"):
        raise LevelwiseError(f"The 'coding' parameter must be 'auto' or 'none'. Got {describe(coding)} instead.")
    by_name = {f.name: f for f in factors or ()}
    center, scale, low, high = [], [], [], []
    for name, column in zip(names, data_columns):
        if name in categories:
            low.append(0.0)
            high.append(float(len(categories[name]) - 1))
            center.append(0.0)
            scale.append(1.0)
            continue
        if name in by_name and getattr(by_name[name], "low", None) is not None:
            lo, hi = by_name[name].low, by_name[name].high
        else:
            finite = column[np.isfinite(column)]
            lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 0.0)
        low.append(lo)
        high.append(hi)
        if coding == "none" or hi <= lo:
            center.append(0.0)
            scale.append(1.0)
        else:
            center.append((lo + hi) / 2.0)
            scale.append((hi - lo) / 2.0)
    arr = lambda v: np.asarray(v, dtype=float)  # noqa: E731
    return Coding(tuple(names), arr(center), arr(scale), arr(low), arr(high))


def _expand(spec: ModelSpec, names, categories, contrasts):
    """Expand term-level *spec* into model columns over the coded variables.

    Returns (column spec, groups, group exponents). A term with a categorical factor of L levels
    becomes L-1 columns (times those of any other categorical factor in it).
    """
    var_names, var_of = [], []
    for j, name in enumerate(names):
        if contrasts[j] is None:
            var_of.append([len(var_names)])
            var_names.append(name)
        else:
            var_of.append(list(range(len(var_names), len(var_names) + contrasts[j].shape[1])))
            var_names += [f"{name}[{level}]" for level in categories[name][1:]]
    rows, groups, group_exp = [], [], []
    for term_row in spec.exponents:
        choices = []
        for j in np.flatnonzero(term_row):
            if contrasts[j] is None:
                choices.append([(var_of[j][0], int(term_row[j]))])
            elif term_row[j] > 1:
                raise LevelwiseError(
                    f"The model {spec.formula!r} raises categorical factor {names[j]!r} to a power; "
                    "only continuous factors can have powers."
                )
            else:
                choices.append([(v, 1) for v in var_of[j]])
        start = len(rows)
        for combo in product(*choices):
            row = np.zeros(len(var_names), dtype=int)
            for v, e in combo:
                row[v] = e
            rows.append(row)
        if term_row.any():
            groups.append((term_name(term_row, names), tuple(range(start, len(rows)))))
            group_exp.append(term_row)
    exponents = np.array(rows, dtype=int).reshape(len(rows), len(var_names))
    terms = tuple(term_name(row, var_names) for row in exponents)
    column_spec = ModelSpec(formula=spec.formula, factor_names=tuple(var_names), exponents=exponents, terms=terms)
    return column_spec, groups, np.array(group_exp, dtype=int).reshape(len(group_exp), len(names))


def _scaled_pivoted_qr(X):
    norms = np.sqrt(np.einsum("ij,ij->j", X, X))
    norms[norms == 0] = 1.0
    scaled = np.asfortranarray(X / norms)
    q, r, piv = scipy.linalg.qr(scaled, mode="economic", pivoting=True, overwrite_a=True, check_finite=False)
    diag = np.abs(np.diag(r))
    n, p = X.shape
    tol = max(n, p) * np.finfo(float).eps * (diag[0] if diag.size else 0.0)
    rank = int((diag > tol).sum())
    return q, r, piv, norms, rank


def _inestimable(X, terms, rank):
    """Pick the inestimable columns in model order and say what each equals.

    Columns are taken greedily in model order: a column that adds nothing to the span of the
    columns kept before it (unit-length columns, residual norm after projection below a tolerance)
    is inestimable, so the later term of each dependency is the one named.
    Returns (kept column indices, {term: "+1*A^2 ..."}).
    """
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    Xs = X / norms
    tol = 100 * max(X.shape) * np.finfo(float).eps
    basis = np.empty((X.shape[0], 0))
    kept = []
    for j in range(X.shape[1]):
        v = Xs[:, j].copy()
        for _ in range(2):  # twice is enough (Gram-Schmidt re-orthogonalisation)
            v -= basis @ (basis.T @ v)
        size = np.linalg.norm(v)
        if size > tol:
            kept.append(j)
            basis = np.column_stack([basis, v / size])
    kept = np.array(kept, dtype=int)
    if len(kept) != rank:  # borderline case: fall back to the pivoted QR's choice
        piv = _scaled_pivoted_qr(X)[2]
        kept = np.sort(piv[:rank])
    dropped = np.setdiff1d(np.arange(X.shape[1]), kept)
    weights, *_ = np.linalg.lstsq(X[:, kept], X[:, dropped], rcond=None)
    aliases = {}
    for j, column in enumerate(dropped):
        w = weights[:, j]
        big = np.flatnonzero(np.abs(w) > 1e-8 * max(1.0, np.abs(w).max(initial=0.0)))
        partners = " ".join(f"{w[i]:+.3g}*{terms[kept[i]]}" for i in big)
        aliases[terms[column]] = partners or "0"
    return kept, aliases


#: Condition number (of the unit-length columns) above which the solution is recomputed in extended precision.
EXTENDED_PRECISION_CONDITION = 1e4
#: Problems with n * p^2 up to this are always solved in extended precision (about a millisecond).
EXTENDED_PRECISION_WORK = 4e6


def _householder_longdouble(A):
    """Householder QR of *A* (n >= p) in extended precision: (R, reflectors)."""
    A = A.copy()
    n, p = A.shape
    reflectors = []
    for k in range(p):
        x = A[k:, k]
        norm = np.sqrt(x @ x)
        v = x.copy()
        v[0] += norm if x[0] >= 0 else -norm
        vv = v @ v
        if vv == 0:
            reflectors.append(None)
            continue
        A[k:, k:] -= np.outer(v, (2 / vv) * (v @ A[k:, k:]))
        reflectors.append((v, vv))
    return np.triu(A[:p, :p]), reflectors


def _back_substitute(R, B):
    out = np.zeros_like(B)
    for i in range(R.shape[0] - 1, -1, -1):
        out[i] = (B[i] - R[i, i + 1 :] @ out[i + 1 :]) / R[i, i]
    return out


def _extended_solution(XL, yL, piv, norms):
    """Least squares in extended precision (numpy longdouble) for ill-conditioned models.

    The model matrix is rebuilt from the settings in extended precision (so the powers of a
    high-degree polynomial are not rounded to float64 first), its columns are scaled and put in the
    pivot order of the float64 QR, and an unpivoted Householder QR is run. Returns float64
    (beta, rinv, fitted, residuals).
    """
    p = XL.shape[1]
    scale = norms[piv].astype(np.longdouble)
    R, reflectors = _householder_longdouble(XL[:, piv] / scale)
    qty = yL.copy()
    for k, reflector in enumerate(reflectors):
        if reflector is not None:
            v, vv = reflector
            qty[k:] -= v * ((2 / vv) * (v @ qty[k:]))
    beta = np.empty(p, dtype=np.longdouble)
    beta[piv] = _back_substitute(R, qty[:p]) / scale
    rinv = np.empty((p, p), dtype=np.longdouble)
    rinv[piv] = _back_substitute(R, np.eye(p, dtype=np.longdouble)) / scale[:, None]
    fitted = XL @ beta
    residuals = yL - fitted
    return (beta.astype(float), rinv.astype(float), fitted.astype(float), residuals.astype(float))


def _factor_columns(data, names, factors, response):
    """Settings of each factor: (list of float columns, {categorical name: levels})."""
    by_name = {f.name: f for f in factors or ()}
    columns, categories = [], {}
    for name in names:
        if name not in data.columns:
            columns.append(np.zeros(len(data)))
            continue
        factor = by_name.get(name)
        declared = factor is not None and getattr(factor, "is_categorical", False)
        if declared or (factor is None and _is_text_column(data[name])):
            values = data[name]
            present = [v for v in values[values.notna()].unique()]
            if declared:
                order = list(getattr(factor, "levels", ()) or ())
                known = {str(level) for level in order}
                stray = [v for v in present if v not in order and str(v) not in known]
                if stray:
                    raise LevelwiseError(
                        f"The factor column {name!r} holds level {describe(stray[0])}, which is not a level of the "
                        f"factor. Allowed levels: {order}."
                    )
                seen = {str(v) for v in present}
                levels = tuple(level for level in order if level in present or str(level) in seen)
            else:
                levels = tuple(sorted(present, key=str))
            categories[name] = levels
            columns.append(_level_indices(values, name, levels, "factor column"))
        else:
            columns.append(_numeric_column(data, name, "factor"))
    return columns, categories


def _achieved_columns(data, names, categories, achieved):
    """Factor name -> column of achieved settings."""
    if achieved is None:
        return {}
    if isinstance(achieved, str) and achieved == "auto":
        return {
            name: name + ACHIEVED_SUFFIX
            for name in names
            if name not in categories and name + ACHIEVED_SUFFIX in data.columns
        }
    if not isinstance(achieved, dict):
        raise LevelwiseError(
            "The 'achieved' parameter must be 'auto', None or a dict {factor: column of achieved settings}. "
            f"Got {describe(achieved)} instead."
        )
    for name, column in achieved.items():
        if name not in names or name in categories:
            raise LevelwiseError(
                f"The 'achieved' parameter names factor {name!r}, which is not a continuous factor of the model "
                f"{[n for n in names if n not in categories]}."
            )
        if column not in data.columns:
            raise LevelwiseError(
                f"The 'achieved' parameter maps factor {name!r} to column {column!r}, which is not in the data."
            )
    return dict(achieved)


def fit(
    data,
    response: str,
    model: str,
    *,
    factors=None,
    coding: str = "auto",
    level: float = 0.95,
    on_rank_deficiency: str = "raise",
    achieved="auto",
) -> Fit:
    """Fit *model* to *response* in *data* by least squares (Householder QR with column pivoting).

    Parameters
    ----------
    data : pandas.DataFrame
        One row per run, factor settings in natural units, one column per response.
    response : str
        Column of *data* to model. Runs with no value leave this fit only (see ``Fit.missing_runs``).
    model : str
        Wilkinson formula over the factor names (``"A + B + A:B"``, ``"(A+B+C)**2"``,
        ``"I(A**2)"``, ``"- 1"`` or ``"0 +"`` to drop the intercept) or a preset
        (``"linear"``, ``"interactions"``, ``"quadratic"``).
    factors : list of Factor, optional
        Factors giving the coding ranges (and the levels of categorical factors). Without them
        the factors are the columns the model names (for presets: every column but the response,
        achieved-setting columns and design bookkeeping columns), coded over each column's min..max.
    coding : {"auto", "none"}
        ``"none"`` fits in natural units.
    level : float
        Confidence level of the coefficient intervals and the default for predictions.
    on_rank_deficiency : {"raise", "warn"}
        What to do when some terms cannot be estimated: raise a LevelwiseError naming them and
        what each is aliased with, or warn and drop them (listed in ``Fit.aliased``).
    achieved : "auto", None or dict
        Columns holding achieved settings: ``"auto"`` uses ``"<factor> (achieved)"`` columns when
        present, a dict maps factor -> column, None ignores achieved settings.

    Raises
    ------
    LevelwiseError
        Non-numeric responses or settings, unknown factors, every response missing, fewer runs
        than terms, a bad ``level``, or inestimable (aliased) terms in ``"raise"`` mode.

    Examples
    --------
    >>> import pandas as pd
    >>> d = pd.DataFrame({"A": [-1, 1, -1, 1], "B": [-1, -1, 1, 1], "y": [1.0, 3.0, 2.0, 4.5]})
    >>> float(round(fit(d, "y", "A + B").coefficients.loc["A", "estimate"], 4))
    1.125
    """
    level = _check_level(level)
    if on_rank_deficiency not in ("raise", "warn"):
        raise LevelwiseError(
            "The 'on_rank_deficiency' parameter must be 'raise' or 'warn'. "
            f"Got {describe(on_rank_deficiency)} instead."
        )
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    if not isinstance(response, str) or response not in data.columns:
        raise LevelwiseError(
            f"The 'response' parameter must name a column of the data {list(map(str, data.columns))}. "
            f"Got {describe(response)} instead."
        )
    if factors is not None:
        from .design import as_factors

        factors = as_factors(factors)
        names = [f.name for f in factors]
    elif isinstance(model, str) and model.strip() in ("linear", "interactions", "quadratic"):
        names = [
            c for c in data.columns
            if c != response and c not in META_COLUMNS and not str(c).endswith(ACHIEVED_SUFFIX)
        ]
    elif isinstance(model, str):
        names = [n for n in names_in_model(model) if n in data.columns and n != response]
    else:
        names = []
    term_spec = parse_model(model, names)
    # Only factors that appear in some term are needed as columns.
    missing = [n for n, used in zip(names, term_spec.exponents.any(axis=0)) if used and n not in data.columns]
    if missing:
        raise LevelwiseError(f"The data has no column for factor(s) {missing} named in the model {model!r}.")
    y_all = _numeric_column(data, response, "response")
    planned_columns, categories = _factor_columns(data, names, factors, response)
    planned = np.column_stack(planned_columns) if planned_columns else np.empty((len(data), 0))
    natural = planned.copy()
    achieved_map = _achieved_columns(data, names, categories, achieved)
    deviations = None
    if achieved_map:
        dev = {}
        for name, column in achieved_map.items():
            j = names.index(name)
            values = _numeric_column(data, column, "achieved-setting")
            reached = np.isfinite(values)
            natural[reached, j] = values[reached]
            dev[name] = np.where(reached, values - planned[:, j], 0.0)
        deviations = pd.DataFrame(dev, index=data.index)
    keep = np.isfinite(y_all)
    if not keep.any():
        raise LevelwiseError(
            f"The response column {response!r} has no values: every run is missing. At least one run must have a value."
        )
    bad_setting = np.isnan(natural) & keep[:, None] & term_spec.exponents.any(axis=0)[None, :]
    if bad_setting.any():
        row, col = np.argwhere(bad_setting)[0]
        raise LevelwiseError(
            f"The factor column {names[col]!r} is empty in row {row + 1}, a run with a response. "
            "Every run used in a fit needs all its settings."
        )
    natural = np.where(np.isnan(natural), 0.0, natural)
    coding_info = _coding_for(names, planned_columns, factors, coding, categories)
    contrasts = tuple(sum_to_zero(len(categories[n])) if n in categories else None for n in names)
    for name, levels in categories.items():
        if len(levels) < 2 and term_spec.exponents[:, names.index(name)].any():
            raise LevelwiseError(
                f"The categorical factor {name!r} has only the level(s) {list(levels)} in the runs with a "
                "response; at least two levels are needed to estimate its effect."
            )
    if not categories:
        contrasts = ()
        spec = term_spec
        groups = [(t, (j,)) for j, t in enumerate(term_spec.terms) if term_spec.exponents[j].any()]
        group_exp = term_spec.exponents[term_spec.exponents.any(axis=1)]
    else:
        spec, groups, group_exp = _expand(term_spec, names, categories, contrasts)
    y = y_all[keep]
    settings = natural[keep]
    X = spec.matrix(encode(settings, coding_info.center, coding_info.scale, contrasts))
    n, p = X.shape
    short = (
        f"The model {model!r} has {p} terms but only {n} usable runs have a value for {response!r}; "
        "at least as many runs as terms are needed. Drop terms or add runs."
    )
    q, r, piv, norms, rank = _scaled_pivoted_qr(X)
    aliased = {}
    if rank < p:
        kept, aliased = _inestimable(X, spec.terms, rank)
        listing = "; ".join(f"{term!r} = {expr}" for term, expr in aliased.items())
        message = (
            f"The model {model!r} cannot be fully estimated from these runs: {p - rank} term(s) are aliased "
            f"with others. {listing}."
        )
        if n < p:
            message = short + " " + message
        if on_rank_deficiency == "raise":
            raise LevelwiseError(
                message + " Remove the aliased term(s), add runs, or fit with on_rank_deficiency='warn'."
            )
        warnings.warn(message + " They were dropped from the fit.", LevelwiseWarning, stacklevel=2)
        position = {old: new for new, old in enumerate(kept)}
        spec = ModelSpec(
            formula=spec.formula,
            factor_names=spec.factor_names,
            exponents=spec.exponents[kept],
            terms=tuple(spec.terms[j] for j in kept),
        )
        new_groups, new_exp = [], []
        for (label, cols), exp in zip(groups, group_exp):
            still = tuple(position[c] for c in cols if c in position)
            if still:
                new_groups.append((label, still))
                new_exp.append(exp)
        groups, group_exp = new_groups, np.array(new_exp, dtype=int).reshape(len(new_exp), len(names))
        X = X[:, kept]
        p = X.shape[1]
        q, r, piv, norms, rank = _scaled_pivoted_qr(X)
    # X / norms = Q R P'  =>  beta = D^-1 P R^-1 Q'y and (X'X)^-1 = (D^-1 P R^-1)(D^-1 P R^-1)'.
    rinv_piv = scipy.linalg.solve_triangular(r, np.eye(p))
    rinv = np.empty_like(rinv_piv)
    rinv[piv] = rinv_piv
    rinv /= norms[:, None]
    beta = np.empty(p)
    beta[piv] = scipy.linalg.solve_triangular(r, q.T @ y)
    beta /= norms
    precise = None
    diag = np.abs(np.diag(r))
    if (
        p
        and (n * p * p <= EXTENDED_PRECISION_WORK or diag[0] > EXTENDED_PRECISION_CONDITION * diag[-1])
        and np.finfo(np.longdouble).eps < np.finfo(float).eps
    ):
        # Float64 QR keeps about 16 - log10(condition) digits normwise, and coefficients of small
        # influence (the intercept of a degree-5 polynomial in natural units) lose more. Small
        # problems, and ill-conditioned ones of any size, are re-solved in extended precision.
        settings_ld = settings.astype(np.longdouble)
        if contrasts:
            coded_ld = encode(settings, coding_info.center, coding_info.scale, contrasts).astype(np.longdouble)
        else:
            coded_ld = (settings_ld - coding_info.center.astype(np.longdouble)) / coding_info.scale.astype(
                np.longdouble
            )
        XL = monomials(coded_ld, spec.exponents, dtype=np.longdouble)
        beta, rinv, *precise = _extended_solution(XL, y.astype(np.longdouble), piv, norms)
    _read_only(X, y, beta, rinv, settings, group_exp)
    result = Fit(
        response=response,
        spec=spec,
        coding=coding_info,
        level=level,
        all_runs=data.index[keep],
        X_all=X,
        y_all=y,
        beta=beta,
        rinv=rinv,
        rank=rank,
        settings_all=settings,
        groups=tuple(groups),
        group_exponents=group_exp,
        factor_names=tuple(names),
        contrasts=contrasts,
        categories=MappingProxyType(categories),
        aliased=MappingProxyType(aliased),
        missing_runs=tuple(data.index[~keep]),
        setting_deviations=deviations,
    )
    if precise:
        # Keep the extended-precision fitted values and residuals (cached properties are plain entries).
        result.__dict__["fitted"], result.__dict__["residuals"] = _read_only(*precise)
    return result


_FIELDS = tuple(f.name for f in dataclasses.fields(Fit))
_FIELD_GETTER = operator.itemgetter(*_FIELDS)

__all__ = ["ACHIEVED_SUFFIX", "Coding", "Factor", "Fit", "fit", "sum_to_zero"]
