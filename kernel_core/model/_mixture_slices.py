"""What mixture views compute: a slider move along a Cox direction and a ternary slice of three components.

* :func:`move_component`: set one component's amount; the others keep their relative proportions (the Cox
  direction, Cox 1971, *Biometrika* 58, 155-159), so the blend still sums to the total. The amount is clipped
  to the range that keeps every bound and constraint.
* :func:`ternary_slice`: three chosen components vary over a triangular grid, the other components (and process
  factors) held at the reference blend; the mean and CI/PI half-widths come from the fit's engine. Grid points
  outside the region (bounds, constraints) are NaN.
"""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError, describe
from ..design._mixture_region import Mixture
from ._mixture import MixtureFit
from ._mixture_engine import _cox_interval
from ._mixture_ternary import ternary_axes

SQRT3_2 = np.sqrt(3.0) / 2.0


def move_component(mixture: Mixture, blend, component: str, amount: float) -> dict:
    """The blend after setting *component* to *amount* along its Cox direction.

    Parameters
    ----------
    mixture : Mixture
    blend : dict
        The current blend, ``{component: amount}`` for every component (extra keys, e.g. process factors, are
        passed through unchanged).
    component : str
    amount : float
        The new amount; clipped to the feasible range of the Cox direction.

    Returns
    -------
    dict
        The new blend (same keys), summing to the total.

    Examples
    --------
    >>> m = Mixture(3)
    >>> {k: round(v, 6) for k, v in move_component(m, {"A": 0.5, "B": 0.3, "C": 0.2}, "A", 0.75).items()}
    {'A': 0.75, 'B': 0.15, 'C': 0.1}
    """
    if not isinstance(mixture, Mixture):
        raise LevelwiseError(f"move_component needs a Mixture. Got {describe(mixture)}.")
    if component not in mixture.names:
        raise LevelwiseError(f"The 'component' must be one of {mixture.names}. Got {describe(component)}.")
    if isinstance(amount, bool) or not isinstance(amount, (int, float, np.integer, np.floating)) \
            or not np.isfinite(amount):
        raise LevelwiseError(f"The amount of {component!r} must be a finite number. Got {describe(amount)}.")
    r = mixture.amounts_from(blend, "blend")[0]
    i = mixture.names.index(component)
    a, b, lo, hi = _cox_interval(mixture, r, i)
    t = float(np.clip(amount, lo, hi))
    new = a + t * b
    new[i] = t
    out = dict(blend)
    out.update({n: float(v) for n, v in zip(mixture.names, new)})
    return out


def ternary_slice(fit: MixtureFit, axes, settings, points: int = 60, level=None) -> dict:
    """A ternary slice of a mixture fit: components *axes* = (a, b, c) vary, the rest held at *settings*.

    The three components share what the held components leave of the total, S = T - (held amounts). Grid points
    are ``(i, j, k) / n * S`` with i + j + k = n = *points* - 1. Coordinates: a at (0, 0), b at (1, 0), c at
    (1/2, sqrt(3)/2); a point's position is its barycentric mix of those corners.

    Returns
    -------
    dict
        ``x``, ``y`` (triangle coordinates), ``barycentric`` (m, 3), ``blends`` (m, q amounts), ``inside``
        (bool: within the bounds and constraints), ``mean``, ``ci_half``, ``pi_half`` (NaN outside),
        ``extrapolated`` (leverage beyond every run's; False outside), ``share`` (S).
    """
    if not isinstance(fit, MixtureFit):
        raise LevelwiseError(f"ternary_slice needs a mixture fit (fit_mixture). Got {describe(fit)}.")
    info = fit.mixture_info
    mixture = info.mixture
    idx = ternary_axes(mixture, axes)
    if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not 2 <= points <= 1000:
        raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 1000. Got {describe(points)}.")
    level = fit.level if level is None else level
    base = fit.engine.vector(settings)[None, :]  # checks the reference blend
    r = mixture.amounts_from(settings)[0]
    share = mixture.total - float(np.delete(r, idx).sum())
    n = int(points) - 1
    ij = np.array([(i, j) for i in range(n + 1) for j in range(n + 1 - i)], dtype=float)
    bary = np.column_stack([ij[:, 0], ij[:, 1], n - ij.sum(axis=1)]) / n
    blends = np.tile(r, (len(bary), 1))
    blends[:, idx] = bary * share
    blends[:, idx[2]] = share - blends[:, idx[0]] - blends[:, idx[1]]
    A, b = mixture._inequalities()
    inside = np.all(blends @ A.T <= b + 1e-9 * mixture.total, axis=1)
    mean = np.full(len(bary), np.nan)
    ci = np.full(len(bary), np.nan)
    pi = np.full(len(bary), np.nan)
    extrapolated = np.zeros(len(bary), dtype=bool)
    if inside.any():
        process = np.tile([f.to_natural(base[0, mixture.q + j]) for j, f in enumerate(info.process)],
                          (int(inside.sum()), 1)) if info.process else None
        variables = info.variables(blends[inside], process)
        m, c, p, h = fit.engine.bands(variables, level)
        mean[inside], ci[inside], pi[inside] = m, c, p
        extrapolated[inside] = fit.engine.extrapolated(variables, h)
    x = bary[:, 1] + 0.5 * bary[:, 2]
    y = SQRT3_2 * bary[:, 2]
    return {"x": x, "y": y, "barycentric": bary, "blends": blends, "inside": inside, "mean": mean,
            "ci_half": ci, "pi_half": pi, "extrapolated": extrapolated, "share": share}


__all__ = ["move_component", "ternary_slice"]
