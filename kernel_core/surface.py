"""Surface slices: the predicted mean and interval half-widths over two factors.

For a polynomial model, fixing every factor but the two slice factors u and v (coded)
turns each model column into c_j u^a_j v^b_j. So the mean is a polynomial in (u, v)
and the variance factor h = x (X'X)^-1 x' = ||x R^-1||^2 is a polynomial of twice the
degree. Both are evaluated on the tensor grid by two small Vandermonde products, which
is exact (not an approximation) and far cheaper than building the full model matrix at
every grid point. The coefficients are small enough to hand to a browser, so an offline
page can redraw the slice in JavaScript (see :func:`slice_polynomials`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ._errors import LevelwiseError, describe
from ._fitview import categorical_names


def _check_shape(shape) -> tuple[int, int]:
    try:
        nx, ny = (int(v) for v in shape)
    except (TypeError, ValueError):
        raise LevelwiseError(
            f"The 'shape' parameter must be a pair of integers (nx, ny), each >= 2. Got {describe(shape)} instead."
        ) from None
    if nx < 2 or ny < 2 or (nx, ny) != tuple(shape):
        raise LevelwiseError(
            f"The 'shape' parameter must be a pair of integers (nx, ny), each >= 2. Got {describe(shape)} instead."
        )
    return nx, ny


def _check_level(fit, level) -> float:
    if level is None:
        return float(fit.level)
    if isinstance(level, bool) or not isinstance(level, (int, float, np.floating)) or not 0 < level < 1:
        raise LevelwiseError(
            f"The 'level' parameter must be a number in the open interval (0, 1). Got {describe(level)} instead."
        )
    return float(level)


def _slice_factors(fit, x, y) -> tuple[int, int]:
    names = list(fit.factor_names)
    for parameter, value in (("x", x), ("y", y)):
        if value not in names:
            raise LevelwiseError(
                f"The '{parameter}' parameter must be one of the model's factors {names}. "
                f"Got {describe(value)} instead."
            )
    if x == y:
        raise LevelwiseError(f"The 'x' and 'y' parameters must name two different factors. Got {x!r} twice.")
    for parameter, value in (("x", x), ("y", y)):
        if value in categorical_names(fit):
            raise LevelwiseError(
                f"The '{parameter}' parameter must be a continuous factor; {value!r} is categorical. "
                "Slice over two continuous factors and set the categorical one in 'settings'."
            )
    return names.index(x), names.index(y)


def _base_settings(fit, settings) -> np.ndarray:
    """Natural settings of every factor (the slice factors' values are ignored).

    Checked by hand rather than through a DataFrame: this runs on every slider event.
    """
    if settings is None:
        settings = {}
    if not isinstance(settings, dict):
        raise LevelwiseError(
            f"The 'settings' parameter must be a dict of factor -> natural setting. Got {describe(settings)} instead."
        )
    base = np.empty(len(fit.factor_names))
    for j, name in enumerate(fit.factor_names):
        value = settings.get(name, (fit.coding.low[j] + fit.coding.high[j]) / 2.0)
        try:
            number = float(np.asarray(value, dtype=float).reshape(-1)[0])
        except (TypeError, ValueError, IndexError):
            number = float("nan")
        if not np.isfinite(number):
            raise LevelwiseError(
                f"The setting for factor {name!r} must be a finite number. Got {describe(value)} instead."
            )
        base[j] = number
    return base


def _is_polynomial(fit) -> bool:
    """True when the model is a polynomial in the factors (one exponent column per factor)."""
    exponents = getattr(fit.spec, "exponents", None)
    return (
        not categorical_names(fit)
        and exponents is not None
        and np.ndim(exponents) == 2
        and np.shape(exponents) == (len(fit.beta), len(fit.factor_names))
        and hasattr(fit, "rinv")
    )


def slice_polynomials(fit, x: str, y: str, settings=None, level: float | None = None) -> dict:
    """Polynomial coefficients of a surface slice, in the coded slice variables.

    With u = (x_natural - center_x) / scale_x and v likewise for *y*:

    - mean(u, v) = sum_ab mean_coef[a, b] u^a v^b
    - h(u, v) = sum_ab var_coef[a, b] u^a v^b  (the variance factor x (X'X)^-1 x')
    - CI half-width = t * s * sqrt(h); PI half-width = t * s * sqrt(1 + h).

    Parameters
    ----------
    fit : Fit
    x, y : str
        The two slice factors.
    settings : dict, optional
        Natural settings of the other factors; a factor left out sits at the centre of its range (a
        categorical factor at its first level). Categorical factors are held at their level.
    level : float, optional
        Confidence level of ``t``; defaults to the fit's level.

    Returns
    -------
    dict
        ``mean_coef`` (dx+1, dy+1), ``var_coef`` (2dx+1, 2dy+1), ``t``, ``s``, and
        ``x_center``, ``x_scale``, ``y_center``, ``y_scale`` for the coding, where dx and dy are
        the largest powers of the slice factors in the model.
    """
    level = _check_level(fit, level)
    ix, iy = _slice_factors(fit, x, y)
    if categorical_names(fit):  # held at their levels in settings: a polynomial in the rest (issue 14)
        from ._categorical_search import hold_levels

        fit, settings = hold_levels(fit, settings)
        ix, iy = _slice_factors(fit, x, y)
    if not _is_polynomial(fit):
        raise LevelwiseError(
            f"The model {fit.spec.formula!r} is not a polynomial in the factors, so it has no slice polynomials."
        )
    base = _base_settings(fit, settings)
    center, scale = np.asarray(fit.coding.center, float), np.asarray(fit.coding.scale, float)
    coded = (base - center) / scale
    exponents = np.asarray(fit.spec.exponents)
    a, b = exponents[:, ix], exponents[:, iy]
    others = exponents.copy()
    others[:, [ix, iy]] = 0
    # Each column's constant factor from the fixed factors.
    const = np.prod(np.where(others > 0, coded[None, :] ** others, 1.0), axis=1)
    dx, dy = int(a.max(initial=0)), int(b.max(initial=0))
    beta = np.asarray(fit.beta, dtype=float)
    mean_coef = np.zeros((dx + 1, dy + 1))
    np.add.at(mean_coef, (a, b), const * beta)
    # W[a, b, :] is the model row's coefficient vector of u^a v^b; Z = W R^-1.
    weights = np.zeros((dx + 1, dy + 1, len(beta)))
    weights[a, b, np.arange(len(beta))] = const
    z = weights.reshape(-1, len(beta)) @ np.asarray(fit.rinv, dtype=float)
    gram = z @ z.T
    pa, pb = np.divmod(np.arange((dx + 1) * (dy + 1)), dy + 1)
    var_coef = np.zeros((2 * dx + 1, 2 * dy + 1))
    np.add.at(var_coef, (pa[:, None] + pa[None, :], pb[:, None] + pb[None, :]), gram)
    return {
        "mean_coef": mean_coef,
        "var_coef": var_coef,
        "t": float(fit.t_quantile(level)),
        "s": float(fit.s),
        "x_center": float(center[ix]),
        "x_scale": float(scale[ix]),
        "y_center": float(center[iy]),
        "y_scale": float(scale[iy]),
    }


def evaluate_polynomials(poly: dict, x_natural, y_natural) -> dict:
    """Evaluate :func:`slice_polynomials` output on the tensor grid of *x_natural* by *y_natural*.

    Returns ``mean``, ``ci_half``, ``pi_half``, each of shape (len(y), len(x)): row i, column j
    is the value at (x[j], y[i]).
    """
    u = (np.asarray(x_natural, float) - poly["x_center"]) / poly["x_scale"]
    v = (np.asarray(y_natural, float) - poly["y_center"]) / poly["y_scale"]
    mc, vc = poly["mean_coef"], poly["var_coef"]
    vu1, vv1 = np.vander(u, mc.shape[0], increasing=True), np.vander(v, mc.shape[1], increasing=True)
    vu2, vv2 = np.vander(u, vc.shape[0], increasing=True), np.vander(v, vc.shape[1], increasing=True)
    mean = vv1 @ (mc.T @ vu1.T)
    h = vv2 @ (vc.T @ vu2.T)
    np.maximum(h, 0.0, out=h)  # a sum of squares; clip rounding below zero
    ts = poly["t"] * poly["s"]
    # In place: this runs on every slider event over the whole grid.
    ci_half = np.sqrt(h)
    ci_half *= ts
    h += 1.0
    pi_half = np.sqrt(h, out=h)
    pi_half *= ts
    return {"mean": mean, "ci_half": ci_half, "pi_half": pi_half}


def slice_grid(fit, x: str, y: str, settings=None, shape=(100, 100), level: float | None = None) -> dict:
    """Predicted mean and interval half-widths over a grid of two factors, the rest held fixed.

    Parameters
    ----------
    fit : Fit
    x, y : str
        The factors on the horizontal and vertical axes.
    settings : dict, optional
        Natural settings of the other factors (factors left out sit at their centre).
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
    >>> grid = slice_grid(fit(d, "y", "A + B"), "A", "B", shape=(3, 2))
    >>> grid["mean"].shape
    (2, 3)
    """
    nx, ny = _check_shape(shape)
    ix, iy = _slice_factors(fit, x, y)
    xs = np.linspace(fit.coding.low[ix], fit.coding.high[ix], nx)
    ys = np.linspace(fit.coding.low[iy], fit.coding.high[iy], ny)
    plan = getattr(fit, "interactive_plan", None)
    if plan is not None:
        # The same cached evaluation as Fit.refresh (the interactive path), so both agree exactly.
        level = _check_level(fit, level)
        out = plan.slice(plan.powers(_base_settings(fit, settings)), fit.t_quantile(level) * fit.s, ix, iy, (nx, ny))
        return {"x": out["x"], "y": out["y"], "mean": out["mean"], "ci_half": out["ci_half"],
                "pi_half": out["pi_half"]}
    if _is_polynomial(fit):
        out = evaluate_polynomials(slice_polynomials(fit, x, y, settings, level), xs, ys)
    else:
        # Not a plain polynomial (e.g. categorical terms): point predictions on the grid.
        given = dict(settings or {})
        xx, yy = np.meshgrid(xs, ys)
        frame = pd.DataFrame(index=range(nx * ny))
        for j, name in enumerate(fit.factor_names):
            if name == x:
                frame[name] = xx.ravel()
            elif name == y:
                frame[name] = yy.ravel()
            elif name in given:
                frame[name] = [given[name]] * (nx * ny)
            elif name in categorical_names(fit):
                raise LevelwiseError(
                    f"The 'settings' parameter must give a level of categorical factor {name!r}. Got none."
                )
            else:
                frame[name] = (fit.coding.low[j] + fit.coding.high[j]) / 2.0
        points = fit.predict(frame, level=_check_level(fit, level))
        mean = points["mean"].to_numpy()
        out = {
            "mean": mean.reshape(ny, nx),
            "ci_half": (points["ci_high"].to_numpy() - mean).reshape(ny, nx),
            "pi_half": (points["pi_high"].to_numpy() - mean).reshape(ny, nx),
        }
    return {"x": xs, "y": ys, **out}


__all__ = ["evaluate_polynomials", "slice_grid", "slice_polynomials"]
