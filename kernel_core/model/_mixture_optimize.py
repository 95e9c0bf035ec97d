"""Desirability optimisation over a mixture region (and process factors): :func:`levelwise.optimize` calls
:func:`optimize_mixture` when the fits are mixture fits.

The search variables are the component amounts (summing to the total, inside the bounds and constraints) and the
process settings in natural units. As in :func:`levelwise.optimize`: many random blends of the region are
screened, the best are polished by SLSQP (the total as an equality constraint, bounds, linear constraints) and
the best local optimum wins.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ._mixture import MixtureFit


def _weight(goal) -> float:
    # ``importance`` is renamed ``weight`` by issue 11; read whichever the Goal has.
    return float(getattr(goal, "weight", getattr(goal, "importance", 1.0)))


def optimize_mixture(fits: dict, goals: dict, region=None, constraints=None, starts: int = 20, seed=None,
                     progress=None):
    """Maximise the overall desirability of mixture fits that share one mixture.

    Parameters are those of :func:`levelwise.optimize`; *region* may narrow the process factors' ranges
    (``{factor: (low, high)}``); *constraints* are linear inequalities over amounts and process settings.
    """
    from scipy import optimize as sopt

    from ..design import parse_constraint
    from ._optimize import Optimum, as_goal, overall_desirability

    if not isinstance(fits, dict) or not fits or not all(isinstance(f, MixtureFit) for f in fits.values()):
        raise LevelwiseError(f"optimize over a mixture needs every fit to be a mixture fit. Got {describe(fits)}.")
    if not isinstance(goals, dict) or not goals:
        raise LevelwiseError(f"The 'goals' parameter must be a non-empty dict of response -> goal. Got "
                             f"{describe(goals)} instead.")
    unknown = [r for r in goals if r not in fits]
    if unknown:
        raise LevelwiseError(f"The 'goals' name response(s) {unknown} that have no fit. Fitted: {list(fits)}.")
    if isinstance(starts, bool) or not isinstance(starts, (int, np.integer)) or starts < 1:
        raise LevelwiseError(f"The 'starts' parameter must be an integer >= 1. Got {describe(starts)} instead.")
    infos = [f.mixture_info for f in fits.values()]
    mixture = infos[0].mixture
    for info in infos[1:]:
        m = info.mixture
        if m.names != mixture.names or m.total != mixture.total:
            raise LevelwiseError("The mixture fits must share one mixture (the same components and total). Got "
                                 f"{mixture.names} (total {mixture.total:g}) and {m.names} (total {m.total:g}).")
    process = {}
    for info in infos:
        for f in info.process:
            lo, hi = process.get(f.name, (f.low, f.high))
            process[f.name] = (max(lo, f.low), min(hi, f.high))
    for name, bounds in (region or {}).items():
        if name not in process:
            raise LevelwiseError(f"The 'region' names {name!r}, which is not a process factor of the fits "
                                 f"{list(process)} (component bounds belong to the Components).")
        process[name] = (float(bounds[0]), float(bounds[1]))
    pnames = list(process)
    q, k, T = mixture.q, len(pnames), mixture.total
    names = mixture.names + pnames
    lower = np.concatenate([mixture.lows, [process[n][0] for n in pnames]])
    upper = np.concatenate([mixture.highs, [process[n][1] for n in pnames]])
    if np.any(lower > upper):
        raise LevelwiseError(f"The process ranges {process} are empty.")
    texts = [constraints] if isinstance(constraints, str) else list(constraints or [])
    parsed = [parse_constraint(c, names) for c in texts]
    A = np.vstack([np.hstack([mixture.G, np.zeros((len(mixture.G), k))])]
                  + [a[None, :] for a, _ in parsed]).reshape(-1, q + k)
    b = np.concatenate([mixture.h, [c for _, c in parsed]])
    goal_objects = {r: as_goal(g, r) for r, g in goals.items()}
    responses = list(goal_objects)
    weights = np.array([_weight(goal_objects[r]) for r in responses])
    columns = {r: [names.index(n) for n in fits[r].mixture_info.names] for r in responses}

    def means(v):
        out = []
        for r in responses:
            info = fits[r].mixture_info
            sub = v[:, columns[r]]
            variables = info.variables(sub[:, :q], sub[:, q:] if info.process else None)
            out.append(fits[r].engine.mean_and_leverage(variables)[0])
        return np.column_stack(out)

    def overall(v):
        v = np.atleast_2d(v)
        d = np.column_stack([goal_objects[r](means(v)[:, i]) for i, r in enumerate(responses)])
        return overall_desirability(d, weights)

    rng = np.random.default_rng(seed)
    count = max(200 * (q + k), 50 * int(starts))
    screen = mixture.sample(count, rng)
    if k:
        screen = np.hstack([screen, lower[q:] + rng.random((len(screen), k)) * (upper[q:] - lower[q:])])
    if len(b):
        screen = screen[np.all(screen @ A.T <= b + 1e-12, axis=1)]
    if not len(screen):
        raise LevelwiseError(f"The constraints {texts} leave no blend inside the mixture region.")
    scores = overall(screen)
    candidates = screen[np.argsort(-scores, kind="stable")[: int(starts)]]
    scale = np.where(upper > lower, upper - lower, 1.0)
    cons = [{"type": "eq", "fun": lambda u: np.array([(lower[:q] + u[:q] * scale[:q]).sum() - T]) / T}]
    if len(b):
        cons.append({"type": "ineq", "fun": lambda u: (b - A @ (lower + u * scale)) / max(1.0, T)})
    from .._progress import Reporter

    reporter = Reporter(progress, "Optimisation starts")
    results = []
    for i, start in enumerate(candidates):
        best_so_far = max((v for v, _ in results), default=float(scores.max()))
        try:
            if not reporter.report(i / len(candidates), f"start {i + 1} of {len(candidates)}, best overall "
                                                        f"desirability so far {best_so_far:.3g}"):
                break
        except KeyboardInterrupt:
            reporter.interrupted()
            break
        u0 = (start - lower) / scale
        found = sopt.minimize(lambda u: -overall(lower + u * scale)[0], u0, method="SLSQP",
                              bounds=[(0.0, 1.0)] * (q + k), constraints=cons,
                              options={"maxiter": 200, "ftol": 1e-12})
        v = lower + np.clip(found.x, 0.0, 1.0) * scale
        v[:q] *= T / v[:q].sum()
        inside = np.all(v[:q] >= mixture.declared_lows - 1e-9 * T) and np.all(v[:q] <= mixture.declared_highs
                                                                                 + 1e-9 * T)
        if not inside or (len(b) and np.any(A @ v > b + 1e-9 * max(1.0, T))):
            v = start
        value = float(overall(v)[0])
        if float(overall(start)[0]) > value:
            v, value = start, float(overall(start)[0])
        results.append((value, v))
    if not results:  # stopped before the first local search: the best screened blend
        results = [(float(overall(candidates[0])[0]), candidates[0])]
    if reporter.stopped is None:
        reporter.report(1.0, "done")
    reporter.finish("The optimisation")
    results.sort(key=lambda item: -item[0])
    best_value, best = results[0]
    settings = {n: float(x) for n, x in zip(names, best)}
    rows = []
    for response, fit in fits.items():
        rows.append(fit.predict({n: settings[n] for n in fit.mixture_info.names}).iloc[0].rename(response))
    predictions = pd.DataFrame(rows)
    predictions.index.name = "response"
    d = pd.Series({r: float(goal_objects[r](predictions.loc[r, "mean"])) for r in responses}, name="d")
    table = pd.DataFrame([v for _, v in results], columns=names)
    table["overall_D"] = [value for value, _ in results]
    return Optimum(settings=settings, predictions=predictions, desirability=d, overall=float(best_value),
                   starts=table, search_complete=reporter.stopped is None, stopped=reporter.stopped)


__all__ = ["optimize_mixture"]
