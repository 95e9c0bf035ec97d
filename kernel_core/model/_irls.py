"""Iteratively reweighted least squares for the binomial and Poisson fits, in numpy alone.

The steps are those of statsmodels' ``GLM.fit()`` (method ``"IRLS"``, its defaults): the same starting means
((y + 0.5) / 2 for a proportion, (y + mean y) / 2 for a count), the same working response and weights, each
weighted least-squares step solved by ``lstsq``, the same stopping rule (the deviance changes by at most 1e-8,
at most 100 steps), the same clipping of probabilities to [eps, 1 - eps] and of means to >= eps, and the
covariance ``pinv(X' W X)`` with the weights of the last step. ``tests/test_fit_glm.py`` checks the fits
against statsmodels' GLM.

Importing statsmodels' GLM pulls in ``scipy.stats`` and statsmodels' formula machinery: about 30 MB in every
kernel that shows a pass-rate or rate response. A served dashboard's kernel needs only the numbers below.
"""

from __future__ import annotations

import numpy as np
from scipy import special

EPS = np.finfo(float).eps
MAXITER, TOL = 100, 1e-8
_SQRT_2PI = np.sqrt(2.0 * np.pi)


class IrlsResult:
    """What a fit keeps: coefficients, deviance, Pearson chi-square, residual df and ``Cov(beta)`` (scale 1)."""

    __slots__ = ("params", "deviance", "pearson_chi2", "df_resid", "cov", "iterations", "converged")

    def __init__(self, params, deviance, pearson_chi2, df_resid, cov, iterations, converged):
        self.params, self.deviance, self.pearson_chi2 = params, deviance, pearson_chi2
        self.df_resid, self.cov, self.iterations, self.converged = df_resid, cov, iterations, converged

    def cov_params(self) -> np.ndarray:
        return self.cov


def _prob(p):
    return np.clip(p, EPS, 1.0 - EPS)


class _Link:
    """Link g, its inverse and its derivative g'(mu), with statsmodels' clipping of mu."""

    def __init__(self, name: str):
        self.name = name

    def __call__(self, mu):
        if self.name == "logit":
            p = _prob(mu)
            return np.log(p / (1.0 - p))
        if self.name == "probit":
            return special.ndtri(_prob(mu))
        return np.log(np.clip(mu, EPS, np.inf))

    def inverse(self, eta):
        if self.name == "logit":
            return 1.0 / (1.0 + np.exp(-eta))
        if self.name == "probit":
            return special.ndtr(eta)
        return np.exp(eta)

    def deriv(self, mu):
        if self.name == "logit":
            p = _prob(mu)
            return 1.0 / (p * (1.0 - p))
        if self.name == "probit":
            z = special.ndtri(_prob(mu))
            return _SQRT_2PI * np.exp(0.5 * z * z)  # 1 / phi(Phi^-1(mu))
        return 1.0 / np.clip(mu, EPS, np.inf)


def _variance(family, mu):
    if family == "binomial":
        p = _prob(mu)
        return p * (1.0 - p)
    return np.fabs(mu)


def _deviance(family, y, mu, n):
    if family == "binomial":
        y_mu = np.clip(y / (mu + 1e-20), EPS, np.inf)
        n_y_mu = np.clip((1.0 - y) / (1.0 - mu + 1e-20), EPS, np.inf)
        return float(np.sum(2.0 * n * (y * np.log(y_mu) + (1.0 - y) * np.log(n_y_mu))))
    y_mu = np.clip(y / mu, EPS, np.inf)
    return float(np.sum(2.0 * (y * np.log(y_mu) - (y - mu))))


def irls(X, family: str, link: str, counts, trials=None, exposure=None) -> IrlsResult:
    """Fit a binomial (counts out of trials) or Poisson (counts, optional exposure) GLM by IRLS.

    ``X`` is the model matrix; the binomial response is the proportion counts / trials with the trials as
    weights, the Poisson one the counts with log(exposure) as offset.
    """
    X = np.asarray(X, dtype=float)
    g = _Link(link)
    if family == "binomial":
        n = np.asarray(trials, dtype=float)
        y = np.asarray(counts, dtype=float) / n
        mu = (y + 0.5) / 2.0
        offset = 0.0
    else:
        n = np.ones(len(counts))
        y = np.asarray(counts, dtype=float)
        mu = (y + y.mean()) / 2.0
        offset = np.log(np.asarray(exposure, dtype=float)) if exposure is not None else 0.0
    eta = g(mu)
    history = [np.inf, _deviance(family, y, mu, n)]
    converged = False
    iteration = 0
    for iteration in range(MAXITER):  # noqa: B007 - the count of steps is kept
        weights = n / (g.deriv(mu) ** 2 * _variance(family, mu))
        z = eta + g.deriv(mu) * (y - mu) - offset
        root = np.sqrt(weights)
        wx = root[:, None] * X
        params = np.linalg.lstsq(wx, root * z, rcond=-1)[0]
        eta = X @ params + offset
        mu = g.inverse(eta)
        history.append(_deviance(family, y, mu, n))
        if abs(history[-1] - history[-2]) <= TOL:
            converged = True
            break
    # As statsmodels: the last step solved once more through the pseudo-inverse, which also gives Cov(beta).
    pinv = np.linalg.pinv(wx, rcond=1e-15)
    params = pinv @ (root * z)
    cov = pinv @ pinv.T
    mu = g.inverse(X @ params + offset)
    pearson = float(np.sum((y - mu) ** 2 / _variance(family, mu) * n))
    df_resid = len(y) - int(np.linalg.matrix_rank(X))
    return IrlsResult(params, _deviance(family, y, mu, n), pearson, df_resid, cov, iteration + 1, converged)
