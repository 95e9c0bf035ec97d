"""The split-plot fit itself: REML variance components from statsmodels ``MixedLM``, then the generalised
least-squares fixed effects at those components (see :mod:`levelwise.model._mixed` for the result it returns)."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import scipy.linalg

from .._errors import LevelwiseError, LevelwiseWarning, describe
from ..design._splitplot import WHOLE_PLOT_COLUMN, check_whole_plot_column
from ._mixed import MixedFit


def _indicators(codes, count):
    z = np.zeros((len(codes), count))
    z[np.arange(len(codes)), codes] = 1.0
    return z


def _rank(a):
    return int(np.linalg.matrix_rank(a)) if a.size else 0


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
