"""The cached predictor used on the interactive path.

Everything that does not depend on the setting is computed once at fit time:
the exponent matrix, the coefficients, ``M = R^-1`` (any square root of
``(X'X)^-1``, so that ``x (X'X)^-1 x' = ||x M||^2``), s, and the t quantiles per
confidence level. A slider event is then a few small array products.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .formula import monomials


def encode(natural: np.ndarray, center: np.ndarray, scale: np.ndarray, contrasts: tuple = ()) -> np.ndarray:
    """Map natural settings (m, k) to the model's coded variables.

    Continuous factors become ``(x - center) / scale``. A categorical factor's column holds
    the index of its level, which becomes a row of its contrast matrix (``contrasts[j]``, an
    (L, L-1) array); ``contrasts`` is empty when every factor is continuous (the fast path).
    """
    natural = np.atleast_2d(np.asarray(natural, dtype=float))
    if not contrasts:
        return (natural - center) / scale
    parts = []
    for j, contrast in enumerate(contrasts):
        if contrast is None:
            parts.append(((natural[:, j] - center[j]) / scale[j])[:, None])
        else:
            parts.append(contrast[natural[:, j].astype(int)])
    return np.hstack(parts) if parts else np.empty((len(natural), 0))


@dataclass(frozen=True, eq=False)
class Predictor:
    """Compiled model: settings in natural units -> mean, CI and PI half-widths.

    Attributes
    ----------
    exponents : (p, k') int ndarray
        One row per model column over the coded variables.
    beta : (p,) ndarray
    rinv : (p, p) ndarray
        A square root of ``(X'X)^-1``.
    center, scale : (k,) ndarray
        Coding of each factor (categorical factors: 0 and 1).
    s : float
        Residual standard deviation.
    t_of_level : callable
        Cached two-sided t quantile for a confidence level.
    contrasts : tuple
        Per factor, None or the contrast matrix of a categorical factor; empty when all continuous.
    max_leverage : float
        Largest leverage among the runs of the fit (for the extrapolation flag).
    """

    exponents: np.ndarray
    beta: np.ndarray
    rinv: np.ndarray
    center: np.ndarray
    scale: np.ndarray
    s: float
    t_of_level: Callable[[float], float]
    contrasts: tuple = ()
    max_leverage: float = np.inf

    def rows(self, natural: np.ndarray) -> np.ndarray:
        """Model rows for an (m, k) array of natural settings."""
        return monomials(encode(natural, self.center, self.scale, self.contrasts), self.exponents)

    def mean_and_leverage(self, natural: np.ndarray):
        """Predicted mean and leverage ``x (X'X)^-1 x'`` at each row of *natural*."""
        x = self.rows(natural)
        return x @ self.beta, np.square(x @ self.rinv).sum(axis=1)

    def intervals(self, natural: np.ndarray, level: float):
        """Mean, CI half-width and PI half-width at each row of *natural*."""
        mean, h = self.mean_and_leverage(natural)
        q = self.t_of_level(level)
        ci_half = q * self.s * np.sqrt(h)
        pi_half = q * self.s * np.sqrt(1.0 + h)
        return mean, ci_half, pi_half
