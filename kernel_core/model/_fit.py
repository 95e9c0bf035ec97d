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

import warnings
from types import MappingProxyType

import numpy as np
import pandas as pd
import scipy.linalg

from .._errors import LevelwiseError, LevelwiseWarning, describe
from ..design._design import META_COLUMNS
from ._coding import _coding_for, _expand, encode, sum_to_zero
from ._formula import PRESETS, ModelSpec, monomials, names_in_model, parse_model
from ._inputs import (
    ACHIEVED_SUFFIX,
    _achieved_columns,
    _check_level,
    _factor_columns,
    _numeric_column,
    _read_only,
    _run_ids,
)
from ._numerics import (
    EXTENDED_PRECISION_CONDITION,
    EXTENDED_PRECISION_WORK,
    _apply_qt,
    _extended_solution,
    _inestimable,
    _scaled_pivoted_qr,
)
from ._result import Fit


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
    whole_plot=None,
    random_block=None,
    family=None,
    trials=None,
    exposure=None,
    link=None,
):
    """Fit *model* to *response* in *data* (least squares; REML for split plots; GLM for counts).

    Without ``whole_plot`` or ``family`` this is :func:`least_squares`, whose parameters it takes.
    ``whole_plot="column"`` (and optionally ``random_block="column"``) fits the split-plot linear mixed
    model by REML (:class:`~levelwise.model.MixedFit`). ``family="binomial"`` (with ``trials=`` and
    ``link="logit"`` or ``"probit"``) or ``family="poisson"`` (optional ``exposure=``) fits a generalised linear
    model (:class:`~levelwise.model.GlmFit`). A least-squares fit of data with a ``whole_plot`` column warns with
    the change in each standard error.
    """
    options = dict(factors=factors, coding=coding, level=level, on_rank_deficiency=on_rank_deficiency,
                   achieved=achieved)
    if whole_plot is not None or random_block is not None:
        if family is not None:
            raise LevelwiseError("The 'whole_plot' and 'family' parameters cannot be combined (no mixed GLM yet).")
        from ._reml import fit_mixed

        return fit_mixed(data, response, model, whole_plot=whole_plot, random_block=random_block,
                         least_squares=least_squares, **options)
    if family is not None or trials is not None or exposure is not None or link is not None:
        from ._glm import fit_glm

        return fit_glm(data, response, model, family=family, trials=trials, exposure=exposure, link=link,
                       least_squares=least_squares, **options)
    result = least_squares(data, response, model, **options)
    if isinstance(data, pd.DataFrame) and "whole_plot" in data.columns:
        from ._reml import warn_if_whole_plots_ignored

        warn_if_whole_plots_ignored(
            result, data, lambda whole_plot: fit(data, response, model, whole_plot=whole_plot, **options)
        )
    return result


def least_squares(
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
        (``"main_effects"``, ``"two_factor_interactions"``, ``"full_second_order"``).
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
    >>> float(round(least_squares(d, "y", "A + B").coefficients.loc["A", "estimate"], 4))
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
        from ..design import as_factors

        factors = as_factors(factors)
        names = [f.name for f in factors]
    elif isinstance(model, str) and model.strip() in PRESETS:
        names = [
            c for c in data.columns
            if c != response and c not in META_COLUMNS and c != "whole_plot" and not str(c).endswith(ACHIEVED_SUFFIX)
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
    run_ids = _run_ids(data)
    y_all = _numeric_column(data, response, "response")
    planned_columns, categories = _factor_columns(data, names, factors, response)
    # One column-major copy of the settings: each factor's column stays contiguous for coding and model rows.
    natural = np.empty((len(data), len(names)), order="F")
    for j, column in enumerate(planned_columns):
        natural[:, j] = column
    achieved_map = _achieved_columns(data, names, categories, achieved)
    deviations = None
    if achieved_map:
        dev = {}
        for name, column in achieved_map.items():
            j = names.index(name)
            values = _numeric_column(data, column, "achieved-setting")
            reached = np.isfinite(values)
            natural[reached, j] = values[reached]
            dev[name] = np.where(reached, values - planned_columns[j], 0.0)
        deviations = pd.DataFrame(dev, index=run_ids)
    keep = np.isfinite(y_all)
    if not keep.any():
        raise LevelwiseError(
            f"The response column {response!r} has no values: every run is missing. At least one run must have a value."
        )
    every = bool(keep.all())
    # Settings hold no infinities (refused above), so a column with an empty cell is one whose sum is NaN.
    if np.isnan(natural.sum(axis=0)).any():
        empty = np.isnan(natural)
        bad_setting = empty & keep[:, None] & term_spec.exponents.any(axis=0)[None, :]
        if bad_setting.any():
            row, col = np.argwhere(bad_setting)[0]
            raise LevelwiseError(
                f"The factor column {names[col]!r} is empty in row {row + 1}, a run with a response. "
                "Every run used in a fit needs all its settings."
            )
        natural[empty] = 0.0
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
    y = y_all if every else y_all[keep]
    settings = natural if every else natural[keep]
    X = monomials(encode(settings, coding_info.center, coding_info.scale, contrasts), spec.exponents)
    n, p = X.shape
    short = (
        f"The model {model!r} has {p} terms but only {n} usable runs have a value for {response!r}; "
        "at least as many runs as terms are needed. Drop terms or add runs."
    )
    reflectors, r, piv, norms, rank = _scaled_pivoted_qr(X)
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
        reflectors, r, piv, norms, rank = _scaled_pivoted_qr(X)
    # X / norms = Q R P'  =>  beta = D^-1 P R^-1 Q'y and (X'X)^-1 = (D^-1 P R^-1)(D^-1 P R^-1)'.
    rinv_piv = scipy.linalg.solve_triangular(r, np.eye(p))
    rinv = np.empty_like(rinv_piv)
    rinv[piv] = rinv_piv
    rinv /= norms[:, None]
    beta = np.empty(p)
    beta[piv] = scipy.linalg.solve_triangular(r, _apply_qt(reflectors, y))
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
        all_runs=run_ids if every else run_ids[keep],
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
        missing_runs=() if every else tuple(run_ids[~keep].tolist()),
        setting_deviations=deviations,
    )
    if precise:
        # Keep the extended-precision fitted values and residuals (cached properties are plain entries).
        result.__dict__["_fitted"], result.__dict__["_residuals"] = _read_only(*precise)
    return result

