"""Residuals and influence of a GLM fit: deviance and Pearson residuals, leverage, Cook's distance.

Formulas (McCullagh & Nelder, *Generalized Linear Models*, 2nd ed., sections 2.4 and 12.5; common practice):

* binomial, y passes of m trials, fitted probability p, mu = m p:
  deviance residual ``sign(y - mu) sqrt(2 [y log(y / mu) + (m - y) log((m - y) / (m - mu))])``,
  Pearson residual ``(y - mu) / sqrt(m p (1 - p))``;
* Poisson, y counts over exposure t, fitted rate r, mu = t r:
  deviance residual ``sign(y - mu) sqrt(2 [y log(y / mu) - (y - mu)])``, Pearson residual ``(y - mu) / sqrt(mu)``
  (``0 log 0 = 0``);
* leverage h: the diagonal of ``W^1/2 X (X'WX)^-1 X' W^1/2`` with the expected-information weights W;
* standardized residuals: ``r / sqrt(scale (1 - h))``; Cook's distance ``r_P^2 h / (scale p (1 - h)^2)``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import special

from .._errors import LevelwiseError
from .._stats import norm_ppf, stats
from ._glm_scale import dmu_deta, inverse_link


def residuals(family: str, counts, size, mean):
    """(deviance, Pearson) residuals of *counts* given *size* (trials or exposure; None: 1) and the fitted
    probability or rate *mean*."""
    y = np.asarray(counts, dtype=float)
    size = np.ones_like(y) if size is None else np.asarray(size, dtype=float)
    mean = np.asarray(mean, dtype=float)
    mu = size * mean
    if family == "binomial":
        unit = 2.0 * (special.xlogy(y, y / mu) + special.xlogy(size - y, (size - y) / (size - mu)))
        var = size * mean * (1.0 - mean)
    else:
        unit = 2.0 * (special.xlogy(y, y / mu) - (y - mu))
        var = mu
    deviance = np.sign(y - mu) * np.sqrt(np.maximum(unit, 0.0))
    return deviance, (y - mu) / np.sqrt(var)


def diagnostics(fit) -> pd.DataFrame:
    """The per-run table of ``GlmFit.diagnostics`` (index = run id)."""
    size = fit.trials if fit.family == "binomial" else fit.exposure
    eta = fit.X @ fit.beta
    mean = inverse_link(fit.link, eta)  # a probability, or a rate per unit of exposure
    deviance, pearson = residuals(fit.family, fit.counts, size, mean)
    if fit.family == "binomial":
        weight = fit.trials * dmu_deta(fit.link, eta) ** 2 / (mean * (1 - mean))
    else:
        weight = (np.ones_like(mean) if fit.exposure is None else fit.exposure) * mean
    q, _ = np.linalg.qr(np.sqrt(weight)[:, None] * fit.X)
    h = np.einsum("ij,ij->i", q, q)
    spread = np.sqrt(fit.scale * (1.0 - h))
    std_deviance = deviance / spread
    ranks = stats.rankdata(std_deviance, method="ordinal", nan_policy="omit")
    n = len(ranks)
    return pd.DataFrame({
        "fitted": mean * (1.0 if size is None else size),  # expected count of the run
        "fitted_mean": mean,
        "deviance_residual": deviance,
        "pearson_residual": pearson,
        "standardized_deviance": std_deviance,
        "standardized_pearson": pearson / spread,
        "normal_quantile": norm_ppf((np.asarray(ranks, dtype=float) - 0.375) / (n + 0.25)),  # Blom
        "leverage": h,
        "cooks_distance": pearson ** 2 * h / (fit.scale * fit.p * (1.0 - h) ** 2),
    }, index=fit.runs)


def residuals_of(fit, frame: pd.DataFrame) -> pd.DataFrame:
    """Fitted mean and (deviance, Pearson) residuals of the rows of *frame* (any runs, e.g. excluded ones) under
    *fit*: the frame holds the factor settings, the response and the trials or exposure column."""
    size_column = fit.trials_name if fit.family == "binomial" else fit.exposure_name
    needed = [fit.response] + ([size_column] if size_column else [])
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise LevelwiseError(f"The rows need the column(s) {missing} to compute count residuals; they have "
                             f"{list(map(str, frame.columns))}.")
    mean = fit.predict(frame[list(fit.factor_names)])["mean"].to_numpy()
    size = frame[size_column].to_numpy(dtype=float) if size_column else None
    deviance, pearson = residuals(fit.family, frame[fit.response].to_numpy(dtype=float), size, mean)
    return pd.DataFrame({"fitted_mean": mean, "deviance_residual": deviance, "pearson_residual": pearson},
                        index=frame.index)
