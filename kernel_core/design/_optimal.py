"""Optimal designs by coordinate exchange (Meyer & Nachtsheim 1995, *Technometrics* 37(1) 60-69).

Each run of a random starting design is changed one coordinate at a time to the level that improves the
criterion most, until a full pass over the runs changes nothing. The change of the criterion for every candidate
level is evaluated at once from rank-one update formulas, never by refitting:

* D: det(M') / det(M) = (1 + y'Ay)(1 - x'Ax) + (y'Ax)^2 for replacing model row x by y, A = M^-1
  (Fedorov 1972, *Theory of Optimal Experiments*, the exchange formula).
* I: the average prediction variance trace(A W) over the region (W = moment matrix of the model terms) after
  adding y and removing x, by two Sherman-Morrison updates.

Linear constraints such as ``"A + B <= 1.5"`` (natural units) restrict the region; along one coordinate the
feasible set is an interval, whose end points join the candidate levels, so runs can sit on the constraint.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._progress import Reporter
from ._design import Design, _check_count, _check_criterion, _check_enough_runs, _check_seed
from ._exchange import design_score, exchange_runs
from ._factors import as_factors
from ._region import check_region, moment_matrix, parse_constraints, sample_region

#: Passes over the runs per start, at most (keeps every search bounded).


# -- coordinate exchange ----------------------------------------------------------------------------------------
def _last_of(table, column, default):
    """Largest whole number in *column* of the fixed runs (*default* when the column is absent or not whole)."""
    if column not in table.columns or not len(table):
        return default
    values = pd.to_numeric(table[column], errors="coerce")
    if values.isna().any() or (values % 1 != 0).any():
        return default
    return int(values.max())


def _fixed_coded(fixed_runs, factors):
    """Coded settings of the fixed runs, with their last run id and last block (run ids continue after them)."""
    if fixed_runs is None:
        return np.zeros((0, len(factors))), 0, 0
    if isinstance(fixed_runs, Design):
        fixed_runs = fixed_runs.table
    if not isinstance(fixed_runs, pd.DataFrame):
        raise LevelwiseError(
            f"The 'fixed_runs' parameter must be a Design or a DataFrame with one column per factor. "
            f"Got {describe(fixed_runs)} instead."
        )
    missing = [f.name for f in factors if f.name not in fixed_runs.columns]
    if missing:
        raise LevelwiseError(f"The 'fixed_runs' table has no column for factor(s) {missing}.")
    cols = []
    for f in factors:
        if f.is_categorical:
            cols.append(f.to_coded(fixed_runs[f.name].to_numpy(dtype=object)))
            continue
        values = pd.to_numeric(fixed_runs[f.name], errors="coerce")
        if values.isna().any():
            row = int(np.flatnonzero(values.isna().to_numpy())[0])
            raise LevelwiseError(
                f"The 'fixed_runs' column {f.name!r} must hold numbers. Row {row + 1} holds "
                f"{describe(fixed_runs[f.name].iloc[row])} instead."
            )
        cols.append(f.to_coded(values.to_numpy(dtype=float)))
    return np.column_stack(cols), _last_of(fixed_runs, "run", len(fixed_runs)), _last_of(fixed_runs, "block", 1)


def _interval(G, h, point, j):
    """Feasible interval of coordinate j with the other coordinates of *point* fixed."""
    lo, hi = -1.0, 1.0
    if len(G):
        rest = h - G @ point + G[:, j] * point[j]
        for a, r in zip(G[:, j], rest):
            if a > 1e-12:
                hi = min(hi, r / a)
            elif a < -1e-12:
                lo = max(lo, r / a)
    return lo, hi


def _exchange(state, starts, G, h, E, runs, rng, grids, discrete, fixed, model_rows, W, criterion, reporter):
    """The random starts, each improved by coordinate exchange; the best so far is kept in *state*."""
    p, k = E.shape
    n_fixed = len(fixed)
    for start in range(starts):
        new = sample_region(G, h, k, runs, rng)
        # Start on the candidate levels where that stays feasible, so untouched coordinates are clean levels.
        snapped = np.column_stack([grids[j][np.abs(new[:, [j]] - grids[j][None, :]).argmin(axis=1)]
                                   for j in range(k)])
        feasible = np.all(snapped @ G.T <= h + 1e-12, axis=1) if len(G) else np.ones(runs, dtype=bool)
        new[feasible] = snapped[feasible]
        new[:, discrete] = np.where(new[:, discrete] < 0, -1.0, 1.0)
        points = np.vstack([fixed, new])

        def candidates(i, j, point):
            if discrete[j]:
                values = grids[j]
            else:
                lo, hi = _interval(G, h, point, j)
                g = grids[j]
                values = np.unique(np.concatenate([g[(g >= lo - 1e-12) & (g <= hi + 1e-12)], [lo, hi]]))
            values = values[values != point[j]]
            if not len(values):
                return None
            pw = point[None, :] ** E  # (p, k): each column's factor from every coordinate but j
            pw[:, j] = 1.0
            trial = np.repeat(point[None, :], len(values), axis=0)
            trial[:, j] = values
            return trial, pw.prod(axis=1)[None, :] * values[:, None] ** E[:, j][None, :]

        points, F = exchange_runs(points, model_rows(points), n_fixed, candidates, W, criterion)
        score, logdet, apv = design_score(F, W, criterion)
        if state["best"] is None or score < state["best"][0]:
            state["best"] = (score, points.copy(), logdet, apv)
        state["starts_run"] = start + 1
        if not reporter.report((start + 1) / starts, f"start {start + 1} of {starts}"):
            break


def optimal_design(factors, model, runs, criterion="D", constraints=None, fixed_runs=None, starts=10, seed=None,
                   progress=None, randomize=True, whole_plots=None, variance_ratio=1.0) -> Design:
    """D- or I-optimal design by coordinate exchange.

    Parameters
    ----------
    factors : list of Factor or int
        Continuous factors, or categorical factors with 2 levels (coded -1/+1, never in a squared term).
    model : str
        Wilkinson formula or a model preset (see :func:`levelwise.parse_model`).
    runs : int
        Number of new runs to choose (besides *fixed_runs*).
    criterion : {"D", "I"}, default "D"
        D: maximise det(X'X). I: minimise the average relative prediction variance over the region.
    constraints : str or list of str, optional
        Linear inequalities in natural units, e.g. ``["A + B <= 1.5", "A >= 0.2"]``.
    fixed_runs : Design or DataFrame, optional
        Runs already made (natural units, one column per factor): the new runs are chosen to augment them, and
        only the new runs are returned, as the next stage. Their run ids continue after the fixed runs' (the
        ``run`` column when there is one, else their count) and they form the block after the fixed runs' last.
        ``fixed.combine(new)`` gives both together when *fixed_runs* is a Design.
    starts : int, default 10
        Random starts; the best design is kept.
    seed : int, optional
        Seed of the random starts and of the run order.
    progress : None, bool or callable, optional
        None (default): a text line on standard error once the search has run for a second; False: silent;
        True: the text line at once; a callable is called as ``progress(fraction_done, message)`` after each
        start, and if it returns ``False`` the search stops and the best design so far is returned. Ctrl-C
        also returns the best design so far (with a :class:`levelwise.SearchStoppedWarning`).
    randomize : bool, default True
        Randomise the order of the new runs.
    whole_plots : int, optional
        A split-plot design in this many whole plots (factors with ``hard_to_change=True`` constant within
        each), by coordinate exchange over whole plots and sub-plots (``levelwise.design._splitplot_optimal``).
    variance_ratio : float, default 1
        Whole-plot variance / residual variance assumed by the split-plot criterion.

    Returns
    -------
    Design
        The new runs (role ``"optimal"``). ``metadata`` holds ``d_efficiency`` (100 det(X'X)^(1/p) / n, percent),
        ``average_prediction_variance`` (mean of x'(X'X)^-1 x over the region, in units of sigma^2), ``log_det``,
        ``criterion``, ``starts_run`` and ``fixed_runs``; with fixed runs the first three describe the fixed and
        new runs together (n of them), the design the search optimised.

    Raises
    ------
    LevelwiseError
        More model terms than runs, an empty constrained region, categorical factors, bad parameters.

    Examples
    --------
    >>> d = optimal_design(2, "A + B", runs=4, seed=1, randomize=False)
    >>> round(d.metadata["d_efficiency"], 6)
    100.0
    """
    from ._mixture_region import Component, Mixture

    if isinstance(factors, Mixture) or (isinstance(factors, (list, tuple))
                                        and any(isinstance(f, (Component, Mixture)) for f in factors)):
        from ._mixture_optimal import mixture_optimal_design  # mixtures (issue 12): Cox-direction exchange

        return mixture_optimal_design(factors, model, runs, criterion, constraints, fixed_runs, starts, seed,
                                      progress if callable(progress) else None, randomize)
    factors = as_factors(factors)
    if whole_plots is not None:  # split-plot designs (issue 13)
        if constraints is not None or fixed_runs is not None:
            raise LevelwiseError("A split-plot optimal design ('whole_plots') takes no 'constraints' or "
                                 "'fixed_runs' yet.")
        from ._splitplot_optimal import split_plot_optimal

        return split_plot_optimal(factors, model, runs, whole_plots, criterion, variance_ratio, starts, seed,
                                  progress if callable(progress) else None, randomize)
    from ._categorical_design import coordinate_exchange, has_many_levels
    from ._splitplot_checks import refuse_hard_to_change

    refuse_hard_to_change(factors, "optimal_design without 'whole_plots'")

    if has_many_levels(factors):  # categorical factors with more than 2 levels (issue 14)
        return coordinate_exchange(factors, model, runs, criterion, constraints, fixed_runs, starts, seed,
                                   progress if callable(progress) else None, randomize)
    for f in factors:
        if f.is_categorical and len(f.levels) != 2:
            raise LevelwiseError(
                f"optimal_design takes continuous factors and categorical factors with 2 levels; factor {f.name!r} "
                f"has {len(f.levels)} levels."
            )
    discrete = np.array([f.is_categorical for f in factors])
    runs = _check_count(runs, "runs", 1)
    starts = _check_count(starts, "starts", 1)
    seed = _check_seed(seed)
    _check_criterion(criterion)
    reporter = Reporter(progress, label=f"{criterion}-optimal search")
    from ..model import parse_model

    names = [f.name for f in factors]
    spec = parse_model(model, names)
    E = spec.exponents
    p, k = E.shape
    squared = [names[j] for j in range(k) if discrete[j] and E[:, j].max() > 1]
    if squared:
        raise LevelwiseError(
            f"The model {model!r} raises categorical factor(s) {squared} to a power; a two-level categorical "
            "factor has no curvature. Use a model without those terms."
        )
    fixed, last_run, last_block = _fixed_coded(fixed_runs, factors)
    n = _check_enough_runs(model, p, runs, len(fixed))
    G, h = parse_constraints(constraints, factors)
    check_region(G, h, constraints)
    rng = np.random.default_rng(seed)
    W = moment_matrix(E, G, h, np.random.default_rng(0), discrete)  # same sample as evaluate()
    grids = [np.array([-1.0, 1.0]) if E[:, j].max() <= 1 else np.array([-1.0, 0.0, 1.0]) for j in range(k)]
    if len(G):
        grids = [g if discrete[j] else np.union1d(g, np.linspace(-1, 1, 5)) for j, g in enumerate(grids)]

    def model_rows(points):
        return np.prod(points[:, None, :] ** E[None, :, :], axis=2)

    n_fixed = len(fixed)
    state = {"best": None, "starts_run": 0}
    try:
        _exchange(state, starts, G, h, E, runs, rng, grids, discrete, fixed, model_rows, W, criterion, reporter)
    except KeyboardInterrupt:
        if state["best"] is None:
            raise
        reporter.interrupted()
    reporter.finish(f"The {criterion}-optimal search")
    best, start = state["best"], state["starts_run"] - 1
    _, points, logdet, apv = best
    if not math.isfinite(logdet):
        raise LevelwiseError(
            f"No design found in which every term of the model {model!r} is estimable. "
            "Use more runs, a simpler model or a larger region."
        )
    d_eff = 100.0 * math.exp(logdet / p) / n
    meta = {
        "criterion": criterion,
        "model": spec.formula,
        "terms": list(spec.terms),
        "constraints": [constraints] if isinstance(constraints, str) else list(constraints or []),
        "d_efficiency": d_eff,
        "average_prediction_variance": apv,
        "log_det": logdet,
        "starts_run": start + 1,
        "fixed_runs": n_fixed,
        "search_complete": start + 1 == starts,
    }
    if reporter.stopped:
        meta["stopped"] = reporter.stopped
    design = Design(factors, points[n_fixed:], ["optimal"] * runs, [last_block + 1 if n_fixed else 1] * runs,
                    randomize=randomize, seed=seed, first_run=last_run + 1, kind=f"{criterion}-optimal",
                    metadata=meta)
    design._region = (G, h)
    return design


__all__ = ["optimal_design"]
