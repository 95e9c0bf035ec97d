"""The ternary slice on a rectangular grid (what a view draws as a heat map with contour lines).

Three components (a, b, c) share what the held components leave of the total, S = T - (held amounts); the other
components and the process factors stay at the reference blend. The triangle has a at (0, 0), b at (1, 0) and c at
(1/2, sqrt(3)/2). A point (x, y) of the plane has barycentric coordinates

    c = y / (sqrt(3)/2),   b = x - c / 2,   a = 1 - b - c,

and stands for the blend whose three amounts are L + (a, b, c) * (S - sum L), where L are the three components'
lower bounds (the triangle of their L-pseudo-components, McLean & Anderson 1966: every blend of the three
within their lower bounds; ``zoom=False`` draws the whole triangle, L = 0). Points outside the triangle, or whose
blend breaks a bound or constraint, are NaN. The mean and the CI/PI half-widths come from the fit's engine (one
``bands`` call), so the grid agrees with :meth:`Fit.predict` at every blend; the offline page repeats the same
arithmetic in its script.
"""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError, describe

SQRT3_2 = float(np.sqrt(3.0) / 2.0)


def ternary_axes(mixture, axes) -> list:
    """Positions of the three components *axes* in the mixture (a LevelwiseError names the allowed ones)."""
    try:
        axes = tuple(axes)
    except TypeError:
        axes = ()
    if len(axes) != 3 or len(set(axes)) != 3 or any(a not in mixture.names for a in axes):
        raise LevelwiseError(f"The 'axes' must be three different components of {mixture.names}. "
                             f"Got {describe(axes)}.")
    return [mixture.names.index(a) for a in axes]


def _corners(mixture, idx, r, zoom: bool) -> tuple:
    """(L, S, span): the three components' lower bounds (0 without zoom), their share S and S - sum L."""
    share = mixture.total - float(np.delete(r, idx).sum())
    lows = np.array([mixture.lows[i] for i in idx], dtype=float) if zoom else np.zeros(3)
    if lows.sum() >= share * (1.0 - 1e-9):  # the held components leave no room above the lower bounds
        lows = np.zeros(3)
    return lows, share, share - float(lows.sum())


def ternary_grid(fit, axes, settings, shape=(61, 53), level=None, zoom=True) -> dict:
    """The ternary slice of a mixture fit on a rectangular (ny, nx) grid of triangle coordinates.

    Parameters
    ----------
    fit : MixtureFit
    axes : three component names (a, b, c)
    settings : dict
        The reference blend (every component, and the process settings); the held components keep their amounts.
    shape : (nx, ny)
        Grid points across (x from 0 to 1) and up (y from 0 to sqrt(3)/2).
    zoom : bool, default True
        Draw the triangle of the three components' lower bounds (False: the whole triangle, from 0).

    Returns
    -------
    dict
        ``x`` (nx,), ``y`` (ny,), ``mean``, ``ci_half``, ``pi_half`` (ny, nx; NaN outside the triangle or the
        region), ``inside`` (ny, nx bool), ``extrapolated`` (ny, nx bool), ``share`` (S), ``lows`` (L),
        ``corners`` (the three corners' amounts of their own component), ``reference`` (the reference blend's x, y
        in the triangle).
    """
    from ._mixture import MixtureFit

    if not isinstance(fit, MixtureFit):
        raise LevelwiseError(f"ternary_grid needs a mixture fit (fit_mixture). Got {describe(fit)}.")
    info = fit.mixture_info
    mixture = info.mixture
    idx = ternary_axes(mixture, axes)
    try:
        nx, ny = (int(v) for v in shape)
    except (TypeError, ValueError):
        raise LevelwiseError(f"The 'shape' must be two integers (across, up). Got {describe(shape)}.") from None
    if not (2 <= nx <= 1000 and 2 <= ny <= 1000):
        raise LevelwiseError(f"The 'shape' must be two integers from 2 to 1000. Got {describe(shape)}.")
    level = fit.level if level is None else level
    base = fit.engine.vector(settings)  # checks the reference blend, naming the components
    r = mixture.amounts_from(settings)[0]
    lows, share, span = _corners(mixture, idx, r, bool(zoom))
    xs = np.linspace(0.0, 1.0, nx)
    ys = np.linspace(0.0, SQRT3_2, ny)
    gx, gy = np.meshgrid(xs, ys)
    c = gy / SQRT3_2
    b = gx - 0.5 * c
    a = 1.0 - b - c
    bary = np.stack([a.ravel(), b.ravel(), c.ravel()], axis=1)
    blends = np.tile(r, (len(bary), 1))
    blends[:, idx] = lows + bary * span
    A, h = mixture._inequalities()
    tol = 1e-9 * mixture.total
    in_triangle = (bary >= -1e-12).all(axis=1)
    inside = in_triangle & np.all(blends @ A.T <= h + tol, axis=1)
    size = len(bary)
    mean, ci, pi = (np.full(size, np.nan) for _ in range(3))
    extrapolated = np.zeros(size, dtype=bool)
    if inside.any():
        variables = np.empty((int(inside.sum()), len(base)))
        q = mixture.q
        m = blends[inside]
        variables[:, :q] = mixture.to_pseudo(m) if info.pseudo else mixture.to_proportions(m)
        variables[:, q:] = base[q:]
        mu, half_ci, half_pi, lev = fit.engine.bands(variables, level)
        mean[inside], ci[inside], pi[inside] = mu, half_ci, half_pi
        extrapolated[inside] = fit.engine.extrapolated(variables, lev)
    ref = (r[idx] - lows) / span
    shape2 = (ny, nx)
    return {"x": xs, "y": ys, "mean": mean.reshape(shape2), "ci_half": ci.reshape(shape2),
            "pi_half": pi.reshape(shape2), "inside": inside.reshape(shape2),
            "extrapolated": extrapolated.reshape(shape2), "share": share, "lows": lows,
            "corners": lows + span,
            "reference": (float(ref[1] + 0.5 * ref[2]), float(SQRT3_2 * ref[2]))}


def ternary_halfplanes(mixture, axes, settings, zoom=True) -> np.ndarray:
    """The region of the ternary slice in triangle coordinates: rows (a, b, c) meaning a x + b y <= c.

    The three sides of the triangle (each barycentric coordinate >= 0), then every bound and constraint of the
    mixture with the held components at *settings* (a view masks the outside of each half-plane). With
    c = y / (sqrt(3)/2), b = x - c/2, a = 1 - b - c, each amount L_k + bary_k (S - sum L) is linear in (x, y).
    """
    idx = ternary_axes(mixture, axes)
    r = mixture.amounts_from(settings)[0]
    lows, share, span = _corners(mixture, idx, r, bool(zoom))
    s = SQRT3_2
    # bary_k = p_k + qx_k x + qy_k y
    p = np.array([1.0, 0.0, 0.0])
    qx = np.array([-1.0, 1.0, 0.0])
    qy = np.array([-0.5 / s, -0.5 / s, 1.0 / s])
    rows = [(-qx[k], -qy[k], p[k]) for k in range(3)]  # bary_k >= 0
    A, h = mixture._inequalities()
    held = np.ones(mixture.q, dtype=bool)
    held[idx] = False
    for g, bound in zip(A, h):
        gk = g[idx]
        if not gk.any():
            continue
        constant = float(g[held] @ r[held]) + float(gk @ (lows + span * p))
        rows.append((span * float(gk @ qx), span * float(gk @ qy), float(bound) - constant))
    return np.array(rows, dtype=float)


def ternary_position(amounts, lows=(0.0, 0.0, 0.0)) -> tuple:
    """Triangle coordinates (x, y) of blends of three components (rows a, b, c): the amounts above the lower bounds
    *lows* (``ternary_grid``'s ``lows``), scaled to sum to 1 (runs whose held components differ are projected)."""
    amounts = np.atleast_2d(np.asarray(amounts, dtype=float)) - np.asarray(lows, dtype=float)
    total = amounts.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        bary = amounts / total[:, None]
    return bary[:, 1] + 0.5 * bary[:, 2], SQRT3_2 * bary[:, 2]


def ternary_blend(mixture, axes, settings, x: float, y: float, zoom=True) -> dict:
    """The blend at the point (x, y) of the ternary slice (the others held at *settings*), for a click.

    Raises a LevelwiseError when the point lies outside the triangle or the blend breaks a bound or constraint.
    """
    idx = ternary_axes(mixture, axes)
    r = mixture.amounts_from(settings)[0]
    lows, share, span = _corners(mixture, idx, r, bool(zoom))
    c = float(y) / SQRT3_2
    b = float(x) - 0.5 * c
    a = 1.0 - b - c
    if min(a, b, c) < -1e-9:
        raise LevelwiseError(f"The point ({x:.4g}, {y:.4g}) lies outside the triangle of {list(axes)}.")
    bary = np.clip([a, b, c], 0.0, None)
    amounts = r.copy()
    amounts[idx] = lows + bary / bary.sum() * span
    try:
        mixture.check_blends(amounts[None, :], "clicked blend", rows=["1"])
    except LevelwiseError as exc:
        raise LevelwiseError(str(exc).replace(" in row 1 ", " ", 1)) from None
    out = dict(settings)
    out.update({n: float(v) for n, v in zip(mixture.names, amounts)})
    return out


__all__ = ["ternary_blend", "ternary_grid", "ternary_halfplanes", "ternary_position"]
