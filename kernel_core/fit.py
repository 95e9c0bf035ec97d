"""Least-squares fitting by Householder QR with column pivoting, and the :class:`Fit` result.

The normal equations lose about twice the digits of QR, and ``numpy.linalg.lstsq``
with its default ``rcond`` silently drops small singular values, so neither is
used. Rank is decided from the pivoted R, and inestimable terms are named.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd
import scipy.linalg
from scipy import stats

from ._errors import LevelwiseError, describe
from .design import META_COLUMNS
from .factors import Factor
from .formula import ModelSpec, names_in_model, parse_model
from .prediction import Predictor


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
    if isinstance(level, bool) or not isinstance(level, (int, float, np.floating)) or not 0 < level < 1:
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


@dataclass(frozen=True, eq=False)
class Fit:
    """An immutable least-squares fit. Build it with :func:`fit`; never change it.

    Coefficients are in coded units (-1/+1 at each factor's low/high) unless the
    fit was made with ``coding="none"``.

    Attributes
    ----------
    response : str
    spec : ModelSpec
        The parsed model (terms and exponent matrix).
    coding : Coding
    n, p, df_resid : int
    coefficients : pandas.DataFrame
        Indexed by term (``Intercept`` first) with ``estimate``, ``std_error``, ``t``,
        ``p_value``, ``ci_low``, ``ci_high``.
    s : float
        Residual standard deviation (NaN for a saturated fit).
    r_squared, r_squared_adj : float
    fitted, residuals : numpy.ndarray
    runs : pandas.Index
        Index labels of the rows used.
    """

    response: str
    spec: ModelSpec
    coding: Coding
    level: float
    runs: pd.Index
    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    beta: np.ndarray = field(repr=False)
    rinv: np.ndarray = field(repr=False)
    rank: int = 0

    # ----- basic statistics ------------------------------------------------------------------
    @property
    def n(self) -> int:
        return len(self.y)

    @property
    def p(self) -> int:
        return self.spec.p

    @property
    def df_resid(self) -> int:
        return self.n - self.p

    @property
    def terms(self) -> tuple:
        return self.spec.terms

    @property
    def factor_names(self) -> tuple:
        return self.spec.factor_names

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
        return float(np.sqrt(self.sse / self.df_resid)) if self.df_resid > 0 else float("nan")

    @cached_property
    def r_squared(self) -> float:
        """R²; uncentred when the model has no intercept (as NIST StRD certifies it)."""
        total = self.y - self.y.mean() if self.spec.has_intercept else self.y
        sst = float(total @ total)
        return 1.0 - self.sse / sst if sst > 0 else float("nan")

    @cached_property
    def r_squared_adj(self) -> float:
        if self.df_resid <= 0:
            return float("nan")
        dof_total = self.n - 1 if self.spec.has_intercept else self.n
        return 1.0 - (1.0 - self.r_squared) * dof_total / self.df_resid

    def t_quantile(self, level: float) -> float:
        """Two-sided t quantile for *level* on the residual df, cached per level."""
        cache = self.__dict__.setdefault("_t_cache", {})
        if level not in cache:
            cache[level] = float(stats.t.ppf(0.5 + level / 2.0, self.df_resid)) if self.df_resid > 0 else float("nan")
        return cache[level]

    @cached_property
    def coefficients(self) -> pd.DataFrame:
        se = self.s * np.sqrt(np.einsum("ij,ij->i", self.rinv, self.rinv))
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
            },
            index=pd.Index(self.terms, name="term"),
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
        )

    def settings_array(self, settings) -> np.ndarray:
        """Validate a mapping of factor name -> natural value into an (m, k) array."""
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
        columns = [_numeric_column(frame, name, "setting") for name in self.factor_names]
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
        mean), ``pi_low``, ``pi_high`` (prediction interval for one new run) and ``extrapolated``
        (a setting outside the factor ranges of the fit).
        """
        level = self.level if level is None else _check_level(level)
        natural = self.settings_array(settings)
        mean, ci_half, pi_half = self.predictor.intervals(natural, level)
        outside = ((natural < self.coding.low - 1e-9 * self.coding.scale)
                   | (natural > self.coding.high + 1e-9 * self.coding.scale)).any(axis=1)
        return pd.DataFrame(
            {
                "mean": mean,
                "ci_low": mean - ci_half,
                "ci_high": mean + ci_half,
                "pi_low": mean - pi_half,
                "pi_high": mean + pi_half,
                "extrapolated": outside,
            }
        )

    def trace(self, factor: str, settings, points: int = 50, level: float | None = None) -> dict:
        """The predicted response along one factor's range, the others held at *settings*.

        Returns a dict of arrays: ``x`` (natural units), ``mean``, ``ci_half`` and ``pi_half``.
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
        x = np.linspace(self.coding.low[j], self.coding.high[j], int(points))
        grid = np.repeat(base[None, :], len(x), axis=0)
        grid[:, j] = x
        mean, ci_half, pi_half = self.predictor.intervals(grid, level)
        return {"x": x, "mean": mean, "ci_half": ci_half, "pi_half": pi_half}

    def __repr__(self) -> str:
        return f"<Fit {self.response} ~ {self.spec.formula}: n={self.n}, p={self.p}, s={self.s:.4g}>"


def _coding_for(names, data_columns, factors, coding) -> Coding:
    if coding not in ("auto", "none"):
        raise LevelwiseError(f"The 'coding' parameter must be 'auto' or 'none'. Got {describe(coding)} instead.")
    by_name = {f.name: f for f in factors or ()}
    center, scale, low, high = [], [], [], []
    for name, column in zip(names, data_columns):
        if name in by_name:
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


def _aliases_message(spec: ModelSpec, r: np.ndarray, piv: np.ndarray, rank: int) -> str:
    """Name each inestimable term and the estimable terms it is a combination of."""
    r11, r12 = r[:rank, :rank], r[:rank, rank:]
    combo = scipy.linalg.solve_triangular(r11, r12) if rank else np.zeros((0, r12.shape[1]))
    parts = []
    for j, column in enumerate(piv[rank:]):
        weights = combo[:, j]
        big = np.flatnonzero(np.abs(weights) > 1e-8 * max(1.0, np.abs(weights).max(initial=0.0)))
        partners = [f"{weights[i]:+.3g}*{spec.terms[piv[i]]}" for i in big]
        parts.append(f"{spec.terms[column]!r} = {' '.join(partners) or '0'}")
    return "; ".join(parts)


def fit(data, response: str, model: str, *, factors=None, coding: str = "auto", level: float = 0.95) -> Fit:
    """Fit *model* to *response* in *data* by least squares (Householder QR with column pivoting).

    Parameters
    ----------
    data : pandas.DataFrame
        One row per run, factor settings in natural units, one column per response.
    response : str
        Column of *data* to model.
    model : str
        Wilkinson formula over the factor names (``"A + B + A:B"``, ``"(A+B+C)**2"``,
        ``"I(A**2)"``, ``"- 1"`` to drop the intercept) or a preset
        (``"linear"``, ``"interactions"``, ``"quadratic"``).
    factors : list of Factor, optional
        Factors giving the coding ranges. Without them the factors are the columns the
        model names (for presets: every column but the response and design bookkeeping
        columns), coded over each column's min..max.
    coding : {"auto", "none"}
        ``"none"`` fits in natural units.
    level : float
        Confidence level of the coefficient intervals and the default for predictions.

    Raises
    ------
    LevelwiseError
        Non-numeric responses or settings, unknown factors, fewer runs than terms,
        or inestimable (aliased) terms, which the message names.

    Examples
    --------
    >>> import pandas as pd
    >>> d = pd.DataFrame({"A": [-1, 1, -1, 1], "B": [-1, -1, 1, 1], "y": [1.0, 3.0, 2.0, 4.5]})
    >>> float(round(fit(d, "y", "A + B").coefficients.loc["A", "estimate"], 4))
    1.125
    """
    level = _check_level(level)
    if not isinstance(data, pd.DataFrame):
        raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
    if not isinstance(response, str) or response not in data.columns:
        raise LevelwiseError(
            f"The 'response' parameter must name a column of the data {list(map(str, data.columns))}. "
            f"Got {describe(response)} instead."
        )
    if factors is not None:
        from .factors import as_factors

        factors = as_factors(factors)
        names = [f.name for f in factors]
    elif isinstance(model, str) and model.strip() in ("linear", "interactions", "quadratic"):
        names = [c for c in data.columns if c != response and c not in META_COLUMNS]
    elif isinstance(model, str):
        names = [n for n in names_in_model(model) if n in data.columns and n != response]
    else:
        names = []
    spec = parse_model(model, names)
    # Only factors that appear in some term are needed as columns.
    missing = [n for n, used in zip(names, spec.exponents.any(axis=0)) if used and n not in data.columns]
    if missing:
        raise LevelwiseError(f"The data has no column for factor(s) {missing} named in the model {model!r}.")
    y_all = _numeric_column(data, response, "response")
    columns = [
        _numeric_column(data, n, "factor") if n in data.columns else np.zeros(len(data)) for n in names
    ]
    natural = np.column_stack(columns) if columns else np.empty((len(data), 0))
    keep = np.isfinite(y_all)
    if not keep.any():
        raise LevelwiseError(f"The response column {response!r} has no values: every run is missing.")
    bad_setting = np.isnan(natural) & keep[:, None]
    if bad_setting.any():
        row, col = np.argwhere(bad_setting)[0]
        raise LevelwiseError(
            f"The factor column {names[col]!r} is empty in row {row + 1}, a run with a response. "
            "Every run used in a fit needs all its settings."
        )
    coding_info = _coding_for(names, columns, factors, coding)
    y = y_all[keep]
    X = spec.matrix(coding_info.to_coded(natural[keep]))
    n, p = X.shape
    if n < p:
        raise LevelwiseError(
            f"The model {model!r} has {p} terms but only {n} usable runs have a value for {response!r}; "
            "at least as many runs as terms are needed. Drop terms or add runs."
        )
    q, r, piv = scipy.linalg.qr(X, mode="economic", pivoting=True)
    diag = np.abs(np.diag(r))
    tol = max(n, p) * np.finfo(float).eps * (diag[0] if diag.size else 0.0)
    rank = int((diag > tol).sum())
    if rank < p:
        raise LevelwiseError(
            f"The model {model!r} cannot be estimated from these runs: {p - rank} term(s) are aliased "
            f"with others. {_aliases_message(spec, r, piv, rank)}. Remove the aliased term(s) or add runs."
        )
    rinv_piv = scipy.linalg.solve_triangular(r, np.eye(p))
    rinv = np.empty_like(rinv_piv)
    rinv[piv] = rinv_piv
    beta = np.empty(p)
    beta[piv] = scipy.linalg.solve_triangular(r, q.T @ y)
    return Fit(
        response=response,
        spec=spec,
        coding=coding_info,
        level=level,
        runs=data.index[keep],
        X=X,
        y=y,
        beta=beta,
        rinv=rinv,
        rank=rank,
    )


__all__ = ["Fit", "fit", "Factor", "Coding"]
