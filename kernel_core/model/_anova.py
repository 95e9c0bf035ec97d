"""Analysis of variance for a :class:`~levelwise.fit.Fit`.

Term sums of squares are *partial* and respect hierarchy (often called "type II"):
a term is tested after every other term except those that contain it, where a
term contains another when its exponents are at least as large in every factor
(``A:B`` and ``A^2`` contain ``A``). Each F uses the full model's residual mean
square.

The residual is split when the runs allow it:

- **pure error**: variation within groups of runs made at identical settings;
- **curvature** (centre runs in the continuous factors, the other runs at their corners, no
  squared terms of those factors in the model; categorical and discrete factors may take any
  level at the centre runs, see ``levelwise.model._term_tests.centre_indicator``): the extra sum of
  squares of a centre-run indicator added to the model, which for a balanced two-level design
  equals ``n_F n_C (ybar_F - ybar_C)^2 / (n_F + n_C)``;
- **lack of fit**: the rest of the residual.

Curvature and lack of fit are tested against pure error when it exists.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.linalg

from .._stats import f_sf


def sse_of(X: np.ndarray, y: np.ndarray) -> float:
    """Residual sum of squares of the least-squares fit of *y* on the (full-rank) columns of *X*."""
    if X.shape[1] == 0:
        return float(y @ y)
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    q, _ = scipy.linalg.qr(X / norms, mode="economic")
    resid = y - q @ (q.T @ y)
    return float(resid @ resid)


def replicate_groups(settings: np.ndarray) -> np.ndarray:
    """Group number of each run; runs at identical settings (to 12 significant digits) share one."""
    if settings.shape[1] == 0:
        return np.zeros(len(settings), dtype=int)
    rounded = np.array([[float(f"{v:.12g}") for v in row] for row in settings])
    _, inverse = np.unique(rounded, axis=0, return_inverse=True)
    return inverse.ravel()


def _row(source, df, ss, denominator_ms, denominator_df, within=""):
    ms = ss / df if df > 0 else np.nan
    if df > 0 and denominator_df > 0 and denominator_ms > 0:
        f = ms / denominator_ms
        p = float(f_sf(f, df, denominator_df))
    else:
        f, p = np.nan, np.nan
    return {"source": source, "within": within, "df": int(df), "sum_sq": ss, "mean_sq": ms, "F": f, "p_value": p}


def anova_table(
    X: np.ndarray,
    y: np.ndarray,
    groups,
    group_exponents: np.ndarray,
    has_intercept: bool,
    settings: np.ndarray,
    centre: np.ndarray | None = None,
) -> pd.DataFrame:
    """Build the ANOVA table.

    Parameters
    ----------
    X, y : ndarray
        Model matrix (full column rank) and response of the runs in the fit.
    groups : sequence of (str, sequence of int)
        Each model term (intercept excluded) and its columns in *X*.
    group_exponents : (g, k) ndarray
        Exponents of each term over the factors, for the containment (hierarchy) rule.
    has_intercept : bool
    settings : (n, k) ndarray
        Settings of each run, to find replicated runs.
    centre : (n,) bool ndarray, optional
        Centre-point indicator when the curvature test applies (see the module docstring).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``source``: ``Model``, each term, ``Curvature`` (when tested), ``Residual``,
        ``Lack of fit``, ``Pure error`` (when runs are replicated) and ``Total``. Columns ``within``
        (``"Residual"`` for the parts of the residual), ``df``, ``sum_sq``, ``mean_sq``, ``F``, ``p_value``.
    """
    n, p = X.shape
    sse = sse_of(X, y)
    df_resid = n - p
    mse = sse / df_resid if df_resid > 0 else np.nan
    total = float(((y - y.mean()) @ (y - y.mean())) if has_intercept else y @ y)
    df_total = n - 1 if has_intercept else n
    rows = [_row("Model", df_total - df_resid, total - sse, mse, df_resid)]
    all_cols = np.arange(p)
    for g, (label, cols) in enumerate(groups):
        exp = group_exponents[g]
        relatives = [
            c
            for h, (_, other) in enumerate(groups)
            if h != g and np.all(group_exponents[h] >= exp)
            for c in other
        ]
        without_rel = np.setdiff1d(all_cols, relatives)
        without_both = np.setdiff1d(without_rel, cols)
        ss = sse_of(X[:, without_both], y) - sse_of(X[:, without_rel], y)
        rows.append(_row(label, len(cols), max(ss, 0.0), mse, df_resid))
    parts = []
    group_of_run = replicate_groups(settings)
    n_groups = int(group_of_run.max()) + 1 if n else 0
    df_pe = n - n_groups
    ss_pe = 0.0
    if df_pe > 0:
        means = np.bincount(group_of_run, weights=y) / np.bincount(group_of_run)
        dev = y - means[group_of_run]
        ss_pe = float(dev @ dev)
    ms_pe = ss_pe / df_pe if df_pe > 0 else np.nan
    df_lof, ss_lof = df_resid - df_pe, sse - ss_pe
    if centre is not None and centre.any() and not centre.all() and df_resid > 0:
        ss_curv = max(sse - sse_of(np.column_stack([X, centre.astype(float)]), y), 0.0)
        if df_pe > 0:
            parts.append(_row("Curvature", 1, ss_curv, ms_pe, df_pe, "Residual"))
        else:
            rest = df_resid - 1
            ms_rest = (sse - ss_curv) / rest if rest > 0 else np.nan
            parts.append(_row("Curvature", 1, ss_curv, ms_rest, rest, "Residual"))
        df_lof, ss_lof = df_lof - 1, ss_lof - ss_curv
    if df_pe > 0:
        if df_lof > 0:
            parts.append(_row("Lack of fit", df_lof, max(ss_lof, 0.0), ms_pe, df_pe, "Residual"))
        parts.append(_row("Pure error", df_pe, ss_pe, np.nan, 0, "Residual"))
    rows.append(_row("Residual", df_resid, sse, np.nan, 0))
    rows.extend(parts)
    rows.append(_row("Total", df_total, total, np.nan, 0))
    return pd.DataFrame(rows).set_index("source")


__all__ = ["anova_table", "replicate_groups", "sse_of"]
