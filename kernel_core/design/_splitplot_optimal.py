"""D- and I-optimal split-plot designs by coordinate exchange over whole plots and sub-plots.

The search follows Goos & Vandebroek (2001), "Optimal split-plot designs", *Journal of Quality Technology*
33(4) 436-450, and Jones & Goos (2007), "A candidate-set-free algorithm for generating D-optimal split-plot
designs", *Applied Statistics* 56(3) 347-364: a hard-to-change factor's coordinate is changed for a whole
plot at once, an easy factor's coordinate for one run, each to the level that improves the criterion most.

With the variance ratio eta = sigma2_wp / sigma2_e, the information matrix (in units of 1/sigma2_e) is
``M = X' V^-1 X`` with ``V = I + eta Z Z'``; whole plot j of m_j runs contributes
``X_j' X_j - c_j s_j s_j'``, ``c_j = eta / (1 + m_j eta)``, ``s_j`` the column sums of ``X_j``. A change inside
whole plot j changes only its own contribution, which is recomputed for every candidate level at once.
D maximises log det M; I minimises the average prediction variance trace(M^-1 W) over the cube.
"""

from __future__ import annotations

import math

import numpy as np

from .._errors import LevelwiseError, describe
from ._exchange import MAX_PASSES
from ._splitplot import hard_to_change_factors, split_plot_order


def _contribution(rows, c):
    s = rows.sum(axis=-2)
    return np.swapaxes(rows, -1, -2) @ rows - c * s[..., :, None] * s[..., None, :]


def _score(M, W, criterion):
    """Criterion to minimise (-log det, or trace(M^-1 W)) for a stack of information matrices."""
    sign, logdet = np.linalg.slogdet(M)
    if criterion == "D":
        return np.where(sign > 0, -logdet, np.inf)
    with np.errstate(invalid="ignore"):
        inv = np.linalg.pinv(M)
    trace = np.einsum("...ij,ji->...", inv, W)
    return np.where(sign > 0, trace, np.inf)


def split_plot_optimal(factors, model, runs, whole_plots, criterion="D", variance_ratio=1.0, starts=10, seed=None,
                       progress=None, randomize=True):
    """D- or I-optimal split-plot design; see :func:`levelwise.optimal_design` (``whole_plots=``)."""
    from ..model import parse_model
    from ._design import Design, _check_count, _check_criterion, _check_seed
    from ._factors import as_factors
    from ._region import moment_matrix

    factors = as_factors(factors)
    hard = hard_to_change_factors(factors)
    if not hard or len(hard) == len(factors):
        raise LevelwiseError(
            "A split-plot optimal design needs at least one factor with hard_to_change=True and at least one "
            f"without. Got hard-to-change factors {hard} of {[f.name for f in factors]}."
        )
    for f in factors:
        if f.is_categorical and len(f.levels) != 2:
            raise LevelwiseError(f"optimal_design takes categorical factors with 2 levels only; factor {f.name!r} "
                                 f"has {len(f.levels)} levels.")
    runs = _check_count(runs, "runs", 2)
    whole_plots = _check_count(whole_plots, "whole_plots", 2)
    starts = _check_count(starts, "starts", 1)
    seed = _check_seed(seed)
    if whole_plots > runs:
        raise LevelwiseError(f"The 'whole_plots' parameter ({whole_plots}) must not exceed 'runs' ({runs}).")
    _check_criterion(criterion)
    if isinstance(variance_ratio, bool) or not isinstance(variance_ratio, (int, float)) or not (
            math.isfinite(variance_ratio) and variance_ratio >= 0):
        raise LevelwiseError(f"The 'variance_ratio' parameter (whole-plot / residual variance) must be a finite "
                             f"number >= 0. Got {describe(variance_ratio)} instead.")
    names = [f.name for f in factors]
    spec = parse_model(model, names)
    E = spec.exponents
    p, k = E.shape
    if runs < p:
        raise LevelwiseError(f"The model {model!r} has {p} terms; 'runs' ({runs}) must be at least {p}.")
    discrete = np.array([f.is_categorical for f in factors])
    hard_cols = np.array([f.name in hard for f in factors])
    sizes = np.full(whole_plots, runs // whole_plots)
    sizes[: runs % whole_plots] += 1
    plot = np.repeat(np.arange(whole_plots), sizes)
    members = [np.flatnonzero(plot == j) for j in range(whole_plots)]
    c = variance_ratio / (1.0 + sizes * variance_ratio)
    W = moment_matrix(E, discrete=discrete)
    grids = [np.array([-1.0, 1.0]) if discrete[j] or E[:, j].max() <= 1 else np.array([-1.0, 0.0, 1.0])
             for j in range(k)]
    rng = np.random.default_rng(seed)

    def rows_of(points):
        return np.prod(points[..., None, :] ** E, axis=-1)

    best = None
    for start in range(starts):
        points = np.column_stack([rng.choice(grids[j], size=runs) for j in range(k)])
        for j in np.flatnonzero(hard_cols):
            points[:, j] = rng.choice(grids[j], size=whole_plots)[plot]
        parts = np.stack([_contribution(rows_of(points[m]), c[w]) for w, m in enumerate(members)])
        M = parts.sum(axis=0)
        current = float(_score(M[None], W, criterion)[0])
        for _ in range(MAX_PASSES):
            changed = False
            for w, m in enumerate(members):
                # Whole-plot coordinates (every run of the plot), then each run's easy coordinates.
                moves = [(m, j) for j in np.flatnonzero(hard_cols)]
                moves += [(np.array([i]), j) for i in m for j in np.flatnonzero(~hard_cols)]
                for idx, j in moves:
                    values = grids[j][grids[j] != points[idx[0], j]]
                    trial = np.repeat(points[m][None], len(values), axis=0)
                    trial[:, np.isin(m, idx), j] = values[:, None]
                    new_parts = _contribution(rows_of(trial), c[w])
                    scores = _score(M[None] - parts[w][None] + new_parts, W, criterion)
                    b = int(np.argmin(scores))
                    if scores[b] < current - 1e-10 * max(1.0, abs(current)):
                        points[idx, j] = values[b]
                        M = M - parts[w] + new_parts[b]
                        parts[w] = new_parts[b]
                        current = float(scores[b])
                        changed = True
            if not changed:
                break
        M = sum(_contribution(rows_of(points[m]), c[w]) for w, m in enumerate(members))
        score = float(_score(M[None], W, criterion)[0])
        if best is None or score < best[0]:
            best = (score, points.copy(), M)
        if progress is not None and progress((start + 1) / starts, f"start {start + 1} of {starts}") is False:
            break
    score, points, M = best
    sign, logdet = np.linalg.slogdet(M)
    if sign <= 0:
        raise LevelwiseError(f"No split-plot design found in which every term of the model {model!r} is "
                             "estimable. Use more runs or whole plots, or a simpler model.")
    meta = {"criterion": criterion, "model": spec.formula, "terms": list(spec.terms),
            "variance_ratio": float(variance_ratio), "log_det": float(logdet),
            "average_prediction_variance": float(np.trace(np.linalg.solve(M, W))), "starts_run": start + 1,
            "information": "X' V^-1 X with V = I + variance_ratio Z Z' (units of 1 / residual variance)"}
    design = Design(factors, points, ["optimal"] * runs, None, randomize=False, seed=seed,
                    kind=f"{criterion}-optimal split-plot", metadata=meta)
    result = split_plot_order(design, randomize=randomize, seed=seed, plots=plot + 1)
    from ._splitplot_checks import warn_few_whole_plots

    warn_few_whole_plots(result, rows_of(result.coded.to_numpy(dtype=float)), spec.formula, stacklevel=4)
    return result
