"""Surface slices: the predicted mean and interval half-widths over two factors, the rest held.

For a polynomial model, fixing every factor but the two slice factors u and v (coded) turns each
model column into ``c_j u^a_j v^b_j``, so the mean is a polynomial in (u, v) and the variance
factor ``h = ||x F||^2`` one of twice the degree. The prediction engine evaluates both on the
tensor grid by two small Vandermonde products (exact, not an approximation); models with
categorical factors are evaluated point by point. Either way the numbers come from the one engine
(:mod:`levelwise.model._engine`), the same as ``Fit.refresh`` and ``Fit.predict``.
"""

from __future__ import annotations


def slice_grid(fit, x: str, y: str, settings=None, shape=(100, 100), level: float | None = None) -> dict:
    """Predicted mean and interval half-widths over a grid of two factors, the rest held fixed.

    Parameters
    ----------
    fit : Fit
    x, y : str
        The factors on the horizontal and vertical axes.
    settings : dict
        Natural settings of the other factors the model uses (the slice factors may be left out).
    shape : (int, int)
        Number of grid points along x and along y, spanning each factor's range.
    level : float, optional
        Confidence level of the intervals (the fit's level by default).

    Returns
    -------
    dict
        ``x`` (nx,) and ``y`` (ny,) in natural units; ``mean``, ``ci_half`` and ``pi_half``
        of shape (ny, nx), where ``[i, j]`` is the value at (x[j], y[i]).

    Examples
    --------
    >>> import pandas as pd
    >>> from levelwise import fit
    >>> d = pd.DataFrame({"A": [-1, 1, -1, 1, 0], "B": [-1, -1, 1, 1, 0], "y": [1.0, 3.0, 2.0, 4.5, 2.4]})
    >>> grid = slice_grid(fit(d, "y", "A + B"), "A", "B", {}, shape=(3, 2))
    >>> grid["mean"].shape
    (2, 3)
    """
    return fit.engine.slice(x, y, {} if settings is None else settings, shape, level)


__all__ = ["slice_grid"]
