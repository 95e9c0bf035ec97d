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

    def __post_init__(self):
        # Compile the exponent matrix once. v = [1, x, x^2, ..., x^top] (each power for every coded
        # variable) and every term is the product of at most F entries of v, picked by index.
        exponents = np.asarray(self.exponents)
        p, k = exponents.shape
        top = int(exponents.max(initial=0))
        width = max(1, int((exponents > 0).sum(axis=1).max(initial=0)))
        picks = np.zeros((width, p), dtype=np.intp)
        for j, row in enumerate(exponents):
            for slot, i in enumerate(np.flatnonzero(row)):
                picks[slot, j] = 1 + (row[i] - 1) * k + i
        inv_scale = 1.0 / np.asarray(self.scale, dtype=float)
        object.__setattr__(self, "_plan", (k, top, picks, inv_scale))

    def rows(self, natural: np.ndarray) -> np.ndarray:
        """Model rows for an (m, k) array of natural settings."""
        k, top, picks, inv_scale = self._plan
        if self.contrasts:
            coded = encode(natural, self.center, self.scale, self.contrasts)
        else:
            natural = np.asarray(natural, dtype=float)
            coded = (natural.reshape(1, -1) if natural.ndim == 1 else natural) - self.center
            coded *= inv_scale
        m = coded.shape[0]
        if m * picks.size > 2_000_000 or coded.shape[1] == 0:
            return monomials(coded, self.exponents)
        parts = [np.ones((m, 1)), coded]
        for _ in range(2, top + 1):
            parts.append(parts[-1] * coded)
        v = np.concatenate(parts, axis=1)
        x = v[:, picks[0]]
        for slot in range(1, len(picks)):
            x *= v[:, picks[slot]]
        return x

    def mean_and_leverage(self, natural: np.ndarray):
        """Predicted mean and leverage ``x (X'X)^-1 x'`` at each row of *natural*."""
        x = self.rows(natural)
        xr = x @ self.rinv
        return x @ self.beta, np.einsum("ij,ij->i", xr, xr)

    def intervals(self, natural: np.ndarray, level: float):
        """Mean, CI half-width and PI half-width at each row of *natural*."""
        mean, h = self.mean_and_leverage(natural)
        qs = self.t_of_level(level) * self.s
        return mean, qs * np.sqrt(h), qs * np.sqrt(1.0 + h)
