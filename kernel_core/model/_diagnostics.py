"""Per-run regression diagnostics in closed form from the QR factor.

Nothing here refits the model: every leave-one-out quantity follows from the
leverages ``h_i = ||x_i R^-1||^2`` and the residuals (Belsley, Kuh & Welsch,
*Regression Diagnostics*, 1980, chapter 2):

- internally studentized residual ``r_i = e_i / (s sqrt(1 - h_i))``;
- leave-one-out variance ``s_(i)^2 = ((n - p) s^2 - e_i^2 / (1 - h_i)) / (n - p - 1)``;
- externally studentized residual ``t_i = e_i / (s_(i) sqrt(1 - h_i))``;
- Cook's distance ``D_i = r_i^2 h_i / (p (1 - h_i))``;
- ``DFFITS_i = t_i sqrt(h_i / (1 - h_i))``;
- ``DFBETAS_ij = (C x_i)_j e_i / ((1 - h_i) s_(i) sqrt(C_jj))`` with ``C = (X'X)^-1``.

Normal-probability-plot coordinates use Blom's plotting positions
``(rank - 3/8) / (n + 1/4)``; outliers are flagged by the Bonferroni-adjusted
two-sided t test on the externally studentized residuals (df ``n - p - 1``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._stats import norm_ppf, stats, t_sf


def influence_table(X, beta, residuals, rinv, runs, terms, *, alpha: float = 0.05) -> pd.DataFrame:
    """The per-run diagnostics table (see the module docstring for the formulas).

    Parameters
    ----------
    X : (n, p) ndarray
        Model matrix of the runs in the fit.
    beta : (p,) ndarray
        Coefficients.
    residuals : (n,) ndarray
    rinv : (p, p) ndarray
        Any square root of ``(X'X)^-1`` (``rinv @ rinv.T``), e.g. the inverse of the R factor.
    runs : sequence
        Run labels (the table's index).
    terms : sequence of str
        Column names for the DFBETAS columns (``dfbetas[<term>]``).
    alpha : float
        Family-wise level of the Bonferroni outlier test.

    Returns
    -------
    pandas.DataFrame
        Columns ``fitted``, ``residual``, ``leverage``, ``studentized``, ``studentized_external``,
        ``cooks_distance``, ``dffits``, ``normal_quantile``, ``outlier_p`` (Bonferroni-adjusted
        p-value), ``outlier`` (bool) and one ``dfbetas[<term>]`` column per term. Quantities that
        need a residual degree of freedom (saturated fits, runs of leverage 1) are NaN.
    """
    X = np.asarray(X, dtype=float)
    e = np.asarray(residuals, dtype=float)
    n, p = X.shape
    df = n - p
    xr = X @ rinv
    h = np.einsum("ij,ij->i", xr, xr)
    one_minus_h = 1.0 - h
    with np.errstate(divide="ignore", invalid="ignore"):
        # Leverage 1 (or a saturated fit) leaves nothing to studentize by: report NaN, not inf.
        safe = np.where(one_minus_h > 1e-12, one_minus_h, np.nan)
        sse = float(e @ e)
        s2 = sse / df if df > 0 else np.nan
        internal = e / np.sqrt(s2 * safe)
        s2_loo = (sse - e**2 / safe) / (df - 1) if df > 1 else np.full(n, np.nan)
        s2_loo = np.where(s2_loo > 0, s2_loo, np.nan)
        external = e / np.sqrt(s2_loo * safe)
        cooks = internal**2 * h / (p * safe)
        dffits = external * np.sqrt(h / safe)
        cx = xr @ rinv.T  # rows are (C x_i)'
        c_diag = np.einsum("ij,ij->i", rinv, rinv)
        dfbetas = cx * (e / (safe * np.sqrt(s2_loo)))[:, None] / np.sqrt(c_diag)[None, :]
    if df > 1:
        outlier_p = np.minimum(1.0, n * 2.0 * t_sf(np.abs(external), df - 1))
    else:
        outlier_p = np.full(n, np.nan)
    ranks = stats.rankdata(internal if df > 0 else e, method="ordinal", nan_policy="omit")
    quantile = norm_ppf((np.asarray(ranks, dtype=float) - 0.375) / (n + 0.25))
    table = pd.DataFrame(
        {
            "fitted": X @ beta,
            "residual": e,
            "leverage": h,
            "studentized": internal,
            "studentized_external": external,
            "cooks_distance": cooks,
            "dffits": dffits,
            "normal_quantile": quantile,
            "outlier_p": outlier_p,
            "outlier": np.nan_to_num(outlier_p, nan=1.0) < alpha,
        },
        index=pd.Index(runs, name="run"),
    )
    for j, term in enumerate(terms):
        table[f"dfbetas[{term}]"] = dfbetas[:, j]
    return table


__all__ = ["influence_table"]
