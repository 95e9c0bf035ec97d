"""Several responses: one fit per response, desirability optimisation and the path of steepest ascent.

Desirability functions are those of Derringer & Suich (1980), *J. Quality Technology* 12(4)
214-219, as printed in the NIST/SEMATECH e-Handbook, section 5.5.3.2.2. The overall
desirability is the weighted geometric mean D = (prod d_i^w_i)^(1 / sum w_i), w_i the relative
weight of response i in D (all 1: the plain geometric mean).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._progress import Reporter
from ..design import parse_constraint
from ._desirability import Goal, as_goal, maximize, minimize, overall_desirability, target
from ._steepest import SteepestPath, steepest_path


# ----- one model per response ----------------------------------------------------------------
def fit_responses(data, models: dict, factors=None, **options) -> dict:
    """Fit one model per response.

    Parameters
    ----------
    data : pandas.DataFrame
    models : dict
        Response column -> model (formula or preset), e.g. ``{"Y1": "full_second_order", "Y3": "main_effects"}``.
    factors : list of Factor, optional
        Shared coding ranges.
    **options
        Passed on to :func:`levelwise.fit.fit` (``coding``, ``level``).

    Returns
    -------
    dict
        Response -> Fit, in the order of *models*.

    Raises
    ------
    LevelwiseError
        The message of any failed fit, prefixed with the response it belongs to.
    """
    from ._fit import fit as fit_model

    if not isinstance(models, dict) or not models:
        raise LevelwiseError(
            "The 'models' parameter must be a non-empty dict of response column -> model. "
            f"Got {describe(models)} instead."
        )
    fits = {}
    for response, model in models.items():
        try:
            fits[response] = fit_model(data, response, model, factors=factors, **options)
        except LevelwiseError as exc:
            raise LevelwiseError(f"Response {response!r}: {exc}") from None
    return fits


# ----- optimisation ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Optimum:
    """The best settings found by :func:`optimize`.

    Attributes
    ----------
    settings : dict
        Factor -> natural setting.
    predictions : pandas.DataFrame
        Per response: ``mean``, ``ci_low``, ``ci_high``, ``pi_low``, ``pi_high``, ``extrapolated``.
    desirability : pandas.Series
        Individual d per response.
    overall : float
        The overall desirability D.
    starts : pandas.DataFrame
        The local optimum reached from each start (settings and ``overall_D``), best first.
    search_complete : bool
        False when the search was stopped (``progress`` returned False, or Ctrl-C) before every start ran.
    stopped : str or None
        ``"cancelled"`` or ``"interrupted"`` when stopped; the result is then the best found so far.
    """

    settings: dict
    predictions: pd.DataFrame
    desirability: pd.Series
    overall: float
    starts: pd.DataFrame
    search_complete: bool = True
    stopped: str | None = None


def _factor_union(fits: dict) -> tuple[list[str], dict]:
    names, ranges = [], {}
    for fit in fits.values():
        for j, name in enumerate(fit.factor_names):
            lo, hi = float(fit.coding.low[j]), float(fit.coding.high[j])
            if name not in ranges:
                names.append(name)
                ranges[name] = (lo, hi)
            else:
                ranges[name] = (max(ranges[name][0], lo), min(ranges[name][1], hi))
    return names, ranges


def _mean_function(fit, names: list[str]):
    """Mean prediction from an (m, k_all) array of natural settings, through the fit's prediction engine."""
    columns = [names.index(n) for n in fit.factor_names]
    if callable(getattr(fit, "mean_at", None)):  # GLM fits: the mean on the response scale (issue 15)
        return lambda natural: fit.mean_at(natural[:, columns])
    engine = fit.engine
    return lambda natural: engine.mean_and_leverage(natural[:, columns])[0]


def optimize(fits: dict, goals: dict, region=None, constraints=None, starts: int = 20, seed=None,
             progress=None) -> Optimum:
    """Maximise the overall desirability of several fitted responses.

    A bounded multi-start search: many random points in the region are screened, the best
    *starts* of them (plus the region's centre) are polished by SLSQP under the bounds and
    linear constraints, and the best local optimum wins.

    Parameters
    ----------
    fits : dict
        Response -> Fit (e.g. from :func:`fit_responses`).
    goals : dict
        Response -> :class:`Goal` (or a dict like ``{"goal": "target", "lower_limit": 400, "target": 500,
        "upper_limit": 600}``). Responses without a goal are predicted but do not count.
    region : dict, optional
        Factor -> (low, high) in natural units. By default each factor's range in the fits.
    constraints : list of str, optional
        Linear constraints in natural units, e.g. ``["A + B <= 1.5"]``.
    starts : int
        Number of local searches.
    seed : int, optional
        Seed of the random starting points, for repeatable results.
    progress : None, bool or callable
        As for the design searches (:mod:`levelwise._progress`): None, a text line on standard error once the
        starts have run a second; False, silent; True, the line from the start; or ``progress(fraction,
        message)``, which stops the search by returning False. Stopped (or Ctrl-C), the result is the best
        found so far with ``search_complete`` False and ``stopped`` set.

    Raises
    ------
    LevelwiseError
        A goal for a response without a fit, a bad region, or constraints no setting in the region meets.
    """
    from scipy import optimize as sopt  # imported here: it is slow to import and only needed here

    if isinstance(fits, dict) and fits and any(hasattr(f, "mixture_info") for f in fits.values()):
        from ._mixture_optimize import optimize_mixture  # mixtures (issue 12): blends summing to the total

        return optimize_mixture(fits, goals, region, constraints, starts, seed, progress=progress)
    if not isinstance(fits, dict) or not fits:
        raise LevelwiseError(
            f"The 'fits' parameter must be a non-empty dict of response -> Fit. Got {describe(fits)} instead."
        )
    if not isinstance(goals, dict) or not goals:
        raise LevelwiseError(
            f"The 'goals' parameter must be a non-empty dict of response -> goal. Got {describe(goals)} instead."
        )
    unknown = [r for r in goals if r not in fits]
    if unknown:
        raise LevelwiseError(f"The 'goals' name response(s) {unknown} that have no fit. Fitted: {list(fits)}.")
    if isinstance(starts, bool) or not isinstance(starts, (int, np.integer)) or starts < 1:
        raise LevelwiseError(f"The 'starts' parameter must be an integer >= 1. Got {describe(starts)} instead.")
    if any(getattr(fit, "categories", None) for fit in fits.values()):  # over categorical levels (issue 14)
        from ._categorical_search import optimize_levels

        return optimize_levels(fits, goals, region, constraints, starts, seed, progress=progress)
    goal_objects = {r: as_goal(g, r) for r, g in goals.items()}
    names, ranges = _factor_union(fits)
    if region is not None:
        if not isinstance(region, dict):
            raise LevelwiseError(
                f"The 'region' parameter must be a dict of factor -> (low, high). Got {describe(region)} instead."
            )
        for name, bounds in region.items():
            if name not in ranges:
                raise LevelwiseError(f"The 'region' names {name!r}, which is not a factor. Known factors: {names}.")
            try:
                lo, hi = (float(v) for v in bounds)
            except (TypeError, ValueError):
                raise LevelwiseError(
                    f"The region of {name!r} must be a pair (low, high) of numbers. Got {describe(bounds)} instead."
                ) from None
            if not (np.isfinite(lo) and np.isfinite(hi) and lo <= hi):
                raise LevelwiseError(
                    f"The region of {name!r} must be finite with low <= high. Got ({lo!r}, {hi!r}) instead."
                )
            ranges[name] = (lo, hi)
    for name in names:
        if ranges[name][0] > ranges[name][1]:
            raise LevelwiseError(
                f"The fits disagree on the range of {name!r}: their ranges do not overlap. Give a 'region'."
            )
    lower = np.array([ranges[n][0] for n in names])
    upper = np.array([ranges[n][1] for n in names])
    if isinstance(constraints, str):
        constraints = [constraints]
    parsed = [parse_constraint(c, names) for c in constraints or ()]
    a_ub = np.array([a for a, _ in parsed]).reshape(len(parsed), len(names))
    b_ub = np.array([b for _, b in parsed])
    if parsed:
        feasible = sopt.linprog(np.zeros(len(names)), A_ub=a_ub, b_ub=b_ub, bounds=list(zip(lower, upper)),
                                method="highs")
        if feasible.status != 0:
            raise LevelwiseError(
                f"The constraints {list(constraints)} leave no setting inside the region "
                f"{ {n: ranges[n] for n in names} }: the search region is empty."
            )
    responses = list(goal_objects)
    means = {r: _mean_function(fits[r], names) for r in responses}
    weight = np.array([goal_objects[r].weight for r in responses])

    def overall(natural: np.ndarray) -> np.ndarray:
        d = np.column_stack([goal_objects[r](means[r](natural)) for r in responses])
        return overall_desirability(d, weight)

    # Work in [0, 1]^k so that step sizes are comparable across factors (a factor fixed by the region
    # has span 0 and stays put).
    span = upper - lower
    to_natural = lambda u: lower + np.atleast_2d(u) * span  # noqa: E731
    rng = np.random.default_rng(seed)
    screen = rng.random((max(200 * len(names), 50 * int(starts)), len(names)))
    if parsed:
        ok = (to_natural(screen) @ a_ub.T <= b_ub + 1e-12).all(axis=1)
        screen = screen[ok]
        if len(screen) < starts:  # a thin feasible region: add a feasible point found by linear programming
            centre = sopt.linprog(np.zeros(len(names)), A_ub=a_ub * span, b_ub=b_ub - a_ub @ lower,
                                  bounds=[(0, 1)] * len(names), method="highs").x
            screen = np.vstack([screen, centre[None, :]])
    scores = overall(to_natural(screen))
    order = np.argsort(-scores, kind="stable")
    candidates = screen[order[: int(starts)]]
    middle = np.full((1, len(names)), 0.5)
    if not parsed or (to_natural(middle) @ a_ub.T <= b_ub).all():
        candidates = np.vstack([middle, candidates])
    slsqp_constraints = [
        {"type": "ineq", "fun": (lambda u, a=a, b=b: b - to_natural(u)[0] @ a)} for a, b in parsed
    ]
    reporter = Reporter(progress, "Optimisation starts")
    results = []
    try:
        for i, start in enumerate(candidates):
            best = max((v for v, _ in results), default=float(scores[order[0]]))
            if not reporter.report(i / len(candidates), f"start {i + 1} of {len(candidates)}, best overall "
                                                        f"desirability so far {best:.3g}"):
                break
            results.append(_polish(start, overall, to_natural, names, parsed, a_ub, b_ub, slsqp_constraints))
    except KeyboardInterrupt:
        reporter.interrupted()
    if not results:  # stopped before the first local search: the best screened point
        results = [(float(scores[order[0]]), screen[order[0]])]
    if reporter.stopped is None:
        reporter.report(1.0, "done")
    reporter.finish("The optimisation")
    results.sort(key=lambda item: -item[0])
    return _optimum(fits, responses, goal_objects, names, to_natural, results, reporter.stopped)


def _polish(start, overall, to_natural, names, parsed, a_ub, b_ub, slsqp_constraints):
    """One local search (SLSQP) from *start*; returns ``(overall D, point in [0, 1]^k)``."""
    from scipy import optimize as sopt

    found = sopt.minimize(lambda u: -overall(to_natural(u))[0], start, method="SLSQP",
                          bounds=[(0.0, 1.0)] * len(names), constraints=slsqp_constraints,
                          options={"maxiter": 200, "ftol": 1e-12})
    u = np.clip(found.x, 0.0, 1.0)
    if parsed and (to_natural(u) @ a_ub.T > b_ub + 1e-9).any():
        u = start  # the local search left the feasible set: keep its feasible start
    value = float(overall(to_natural(u))[0])
    start_value = float(overall(to_natural(start))[0])
    if start_value > value:
        u, value = start, start_value
    return value, u


def _optimum(fits, responses, goal_objects, names, to_natural, results, stopped) -> Optimum:
    best_value, best_u = results[0]
    best = to_natural(best_u)[0]
    settings = {n: float(v) for n, v in zip(names, best)}
    rows = []
    for response, fit in fits.items():
        frame = pd.DataFrame({n: [settings[n]] for n in fit.factor_names})
        rows.append(fit.predict(frame).iloc[0].rename(response))
    predictions = pd.DataFrame(rows)
    predictions.index.name = "response"
    d = pd.Series({r: float(goal_objects[r](predictions.loc[r, "mean"])) for r in responses}, name="d")
    table = pd.DataFrame([to_natural(u)[0] for _, u in results], columns=names)
    table["overall_D"] = [v for v, _ in results]
    return Optimum(settings=settings, predictions=predictions, desirability=d, overall=float(best_value),
                   starts=table, search_complete=stopped is None, stopped=stopped)


__all__ = [
    "Goal",
    "Optimum",
    "SteepestPath",
    "as_goal",
    "fit_responses",
    "maximize",
    "minimize",
    "optimize",
    "overall_desirability",
    "parse_constraint",
    "steepest_path",
    "target",
]
