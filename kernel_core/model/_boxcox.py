"""Box-Cox power transformation of the response: lambda by profile likelihood, with a 95 % interval.

For the model's columns X and a positive response y, the profile log-likelihood of the
power lambda (Box & Cox 1964, J. R. Stat. Soc. B 26, 211-252; citation from memory) is, up to a constant,

    llf(lambda) = (lambda - 1) sum(log y) - n/2 log(SSE(lambda) / n),

where SSE(lambda) is the residual sum of squares of y^(lambda) = (y^lambda - 1)/lambda
(log y at 0) regressed on X. The 95 % interval is every lambda whose llf is within
chi2(0.95; 1)/2 of the maximum (likelihood-ratio test, 1 df).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from .._errors import LevelwiseError
from .._stats import stats

#: The usual named powers, with words for the suggestion.
NAMED_POWERS = (
    (1.0, "no transformation"),
    (0.5, "the square root"),
    (0.0, "the logarithm"),
    (-0.5, "the reciprocal square root (1/sqrt(y))"),
    (-1.0, "the reciprocal (1/y)"),
    (2.0, "the square"),
    (-2.0, "the reciprocal square (1/y^2)"),
)


@dataclass(frozen=True, eq=False)
class BoxCoxResult:
    """The maximum-likelihood power, its interval and a suggestion in words.

    Attributes
    ----------
    lam : float
        The maximum-likelihood lambda.
    ci_low, ci_high : float
        The likelihood-ratio interval at *level* (``-inf``/``inf`` when the profile does not
        drop far enough inside the search range).
    level : float
    suggested_lambda : float
        1 when the interval holds 1; else the named power inside the interval (0.5, 0, -0.5,
        -1, 2, -2) closest to ``lam``; else ``lam`` rounded to 0.1.
    suggestion : str
        Plain-language advice.
    profile : dict
        ``lambda`` and ``llf`` arrays for drawing the profile likelihood.
    """

    lam: float
    ci_low: float
    ci_high: float
    level: float
    suggested_lambda: float
    suggestion: str
    profile: dict


def transform(y, lam: float) -> np.ndarray:
    """The Box-Cox transform (y^lam - 1) / lam, or log y at lam = 0."""
    logy = np.log(np.asarray(y, dtype=float))
    if lam == 0:
        return logy
    return np.expm1(lam * logy) / lam


def box_cox(fit, level: float = 0.95, bounds=(-5.0, 5.0)) -> BoxCoxResult:
    """Box-Cox analysis of the response of *fit* for the fit's own model.

    Parameters
    ----------
    fit : Fit
    level : float
        Confidence level of the interval for lambda (0.95 by default).
    bounds : (float, float)
        The range searched for lambda and for the interval's ends.

    Raises
    ------
    LevelwiseError
        A response value that is zero or negative (the transform needs positive values),
        or a fit without residual degrees of freedom.
    """
    from scipy import optimize  # imported here: slow to import, needed only here

    y = np.asarray(fit.y, dtype=float)
    if not 0 < level < 1:
        raise LevelwiseError(f"The 'level' parameter must be in the open interval (0, 1). Got {level!r} instead.")
    bad = np.flatnonzero(~(y > 0))
    if bad.size:
        run = fit.runs[bad[0]]
        raise LevelwiseError(
            f"The Box-Cox transform needs a positive response: every value of {fit.response!r} must be > 0. "
            f"Run {run!r} has {y[bad[0]]!r} ({bad.size} value(s) are not positive). "
            "Shift the response by a constant first if zero or negative values are meaningful."
        )
    if fit.df_resid <= 0:
        raise LevelwiseError(
            f"The Box-Cox analysis needs residual degrees of freedom; the model {fit.spec.formula!r} has "
            f"{fit.p} terms for {fit.n} runs. Drop terms first."
        )
    q, _ = scipy.linalg.qr(np.asarray(fit.X, dtype=float), mode="economic")
    n = len(y)
    sum_log = float(np.log(y).sum())

    def llf(lam: float) -> float:
        z = transform(y, lam)
        r = z - q @ (q.T @ z)
        return (lam - 1.0) * sum_log - 0.5 * n * np.log(float(r @ r) / n)

    lo, hi = float(bounds[0]), float(bounds[1])
    grid = np.linspace(lo, hi, 201)
    values = np.array([llf(v) for v in grid])
    k = int(np.nanargmax(values))
    left, right = grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)]
    best = optimize.minimize_scalar(lambda v: -llf(v), bounds=(left, right), method="bounded",
                                    options={"xatol": 1e-10})
    lam = float(best.x)
    top = llf(lam)
    cut = top - 0.5 * float(stats.chi2.ppf(level, 1))

    def crossing(a: float, b: float) -> float:
        return float(optimize.brentq(lambda v: llf(v) - cut, a, b, xtol=1e-12))

    ci_low = crossing(lo, lam) if llf(lo) < cut else float("-inf")
    ci_high = crossing(lam, hi) if llf(hi) < cut else float("inf")
    inside = [(value, words) for value, words in NAMED_POWERS if ci_low <= value <= ci_high]
    if ci_low <= 1.0 <= ci_high:
        suggested = 1.0
        suggestion = (
            f"No transformation is needed: lambda = 1 (the response as it is) lies inside the "
            f"{level:.0%} interval [{ci_low:.2f}, {ci_high:.2f}] around the best lambda {lam:.2f}."
        )
    elif inside:
        suggested, words = min(inside, key=lambda item: abs(item[0] - lam))
        suggestion = (
            f"Consider modelling {words} of {fit.response!r} (lambda = {suggested:g}): it lies inside the "
            f"{level:.0%} interval [{ci_low:.2f}, {ci_high:.2f}] around the best lambda {lam:.2f}, "
            "and lambda = 1 (no transformation) does not."
        )
    else:
        suggested = round(lam, 1)
        suggestion = (
            f"Consider the power y^{suggested:g} of {fit.response!r}: no usual power lies inside the "
            f"{level:.0%} interval [{ci_low:.2f}, {ci_high:.2f}] around the best lambda {lam:.2f}."
        )
    return BoxCoxResult(
        lam=lam,
        ci_low=ci_low,
        ci_high=ci_high,
        level=float(level),
        suggested_lambda=float(suggested),
        suggestion=suggestion,
        profile={"lambda": grid, "llf": values},
    )


__all__ = ["BoxCoxResult", "box_cox", "transform"]
