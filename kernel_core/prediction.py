"""The cached predictor used on the interactive path.

Everything that does not depend on the setting is computed once at fit time:
the exponent matrix, the coefficients, ``M = P R^-1`` from the pivoted QR (so that
``x (X'X)^-1 x' = ||x M||^2``), s, and the t quantiles per confidence level.
A slider event is then a few small array products.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .formula import monomials


@dataclass(frozen=True, eq=False)
class Predictor:
    exponents: np.ndarray
    beta: np.ndarray
    rinv: np.ndarray
    center: np.ndarray
    scale: np.ndarray
    s: float
    t_of_level: Callable[[float], float]

    def rows(self, natural: np.ndarray) -> np.ndarray:
        """Model rows for an (m, k) array of natural settings."""
        return monomials((np.atleast_2d(natural) - self.center) / self.scale, self.exponents)

    def intervals(self, natural: np.ndarray, level: float):
        """Mean, CI half-width and PI half-width at each row of *natural*."""
        x = self.rows(natural)
        mean = x @ self.beta
        h = np.square(x @ self.rinv).sum(axis=1)
        q = self.t_of_level(level)
        ci_half = q * self.s * np.sqrt(h)
        pi_half = q * self.s * np.sqrt(1.0 + h)
        return mean, ci_half, pi_half
