"""D- and I-optimal designs on a mixture region (and mixture x process regions) by mixture coordinate exchange.

The coordinate exchange of :mod:`levelwise.optimal` changes one coordinate of a run at a time inside a box; a
blend cannot move one component alone (the sum must stay at the total). Here a component's coordinate moves along
its Cox direction instead: component j is set to t and the other components keep their relative proportions,
``x_k = x_k (1 - t) / (1 - x_j)`` in proportions (Piepel, Cooley & Jones 2005, *Quality Engineering* 17,
579-594, the mixture coordinate-exchange algorithm). Along that line every bound and linear constraint is linear
in t, so the feasible set is an interval; a grid over it and its end points are the candidate values. Process
factors move one coded coordinate at a time as in :mod:`levelwise.optimal`. Candidates are scored with the same
rank-one exchange formulas (D: Fedorov's det ratio; I: two Sherman-Morrison updates of trace(A W)), written out
here because that module keeps them inside its search loop.
"""

from __future__ import annotations

import math

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import _check_count, _check_criterion, _check_progress, _check_seed
from ._exchange import design_score, exchange_runs
from ._factors import Factor
from ._mixture import mixture_design
from ._mixture_region import Component, Mixture, as_mixture
from ._optimal import _last_of

GRID = 11


def _split(factors, constraints):
    """(Mixture, process factors) from a Mixture, a list of Component / Factor, or a list with one Mixture."""
    if isinstance(factors, Mixture):
        return as_mixture(factors), [], constraints
    items = list(factors)
    mixtures = [f for f in items if isinstance(f, Mixture)]
    comps = [f for f in items if isinstance(f, Component)]
    process = [f for f in items if isinstance(f, Factor)]
    other = [f for f in items if not isinstance(f, (Mixture, Component, Factor))]
    if other or (mixtures and comps) or len(mixtures) > 1:
        raise LevelwiseError("The 'factors' of a mixture optimal design must be Components (or one Mixture) and "
                             f"optional process Factors. Got {describe(factors)}.")
    for f in process:
        if f.is_categorical:
            raise LevelwiseError(f"Process factor {f.name!r} is categorical; mixture optimal designs take "
                                 "continuous process factors.")
    mixture = mixtures[0] if mixtures else Mixture(comps)
    return mixture, process, constraints


def _fixed_variables(fixed_runs, mixture, process):
    """Fixed runs as model variables (proportions, coded process settings), checked."""
    import pandas as pd

    from ._design import Design

    if fixed_runs is None:
        return np.zeros((0, mixture.q + len(process))), 0, 1
    table = fixed_runs.table if isinstance(fixed_runs, Design) else fixed_runs
    if not isinstance(table, pd.DataFrame):
        raise LevelwiseError(f"The 'fixed_runs' parameter must be a Design or a DataFrame of component amounts "
                             f"(and process settings). Got {describe(fixed_runs)} instead.")
    amounts = mixture.amounts_from(table, "fixed_runs")
    cols = [amounts / mixture.total]
    for f in process:
        if f.name not in table.columns:
            raise LevelwiseError(f"The 'fixed_runs' table has no column for process factor {f.name!r}.")
        values = pd.to_numeric(table[f.name], errors="coerce").to_numpy(dtype=float)
        if not np.isfinite(values).all():
            raise LevelwiseError(f"The 'fixed_runs' column {f.name!r} must hold numbers.")
        cols.append(f.to_coded(values)[:, None])
    return np.hstack(cols), _last_of(table, "run", len(table)), _last_of(table, "block", 1)


def _line_interval(G, h, a, b):
    """Interval of t with G (a + b t) <= h."""
    lo, hi = -np.inf, np.inf
    slope = G @ b
    rest = h - G @ a
    pos, neg = slope > 1e-12, slope < -1e-12
    if np.any((np.abs(slope) <= 1e-12) & (rest < -1e-9)):
        return None
    if pos.any():
        hi = float(np.min(rest[pos] / slope[pos]))
    if neg.any():
        lo = float(np.max(rest[neg] / slope[neg]))
    return (lo, hi) if lo <= hi + 1e-12 else None


def _candidates(G, h, v, j, q, k):
    """Candidate points for coordinate j of point v: a grid (and the end points) of each feasible line.

    Component j moves along its Cox direction (the others keep their relative proportions) and against each
    other component alone (so components sitting on a bound stay there and vertices can be reached); a process
    factor moves alone."""
    lines = []
    if j < q:
        a, b = v.copy(), np.zeros(q + k)
        rest = 1.0 - v[j]
        a[:q] = v[:q] / rest if rest > 1e-12 else (1.0 - np.eye(q)[j]) / (q - 1)
        a[j] = 0.0
        b[:q] = -a[:q]
        b[j] = 1.0
        lines.append((a, b))
        for other in range(q):
            if other != j:
                a, b = v.copy(), np.zeros(q + k)
                a[j], a[other] = 0.0, v[j] + v[other]
                b[j], b[other] = 1.0, -1.0
                lines.append((a, b))
    else:
        a, b = v.copy(), np.zeros(q + k)
        a[j], b[j] = 0.0, 1.0
        lines.append((a, b))
    out = []
    for a, b in lines:
        span = _line_interval(G, h, a, b)
        if span is None or span[1] - span[0] < 1e-9:
            continue
        ts = np.linspace(span[0], span[1], GRID)
        if j >= q and span[0] < 0 < span[1]:
            ts = np.append(ts, 0.0)
        ts = ts[np.abs(ts - v[j]) > 1e-9]
        out.append(a[None, :] + ts[:, None] * b[None, :])
    return np.vstack(out) if out else np.zeros((0, q + k))


def mixture_optimal_design(factors, model, runs, criterion="D", constraints=None, fixed_runs=None, starts=10,
                           seed=None, progress=None, randomize=True):
    """D- or I-optimal design over a mixture region, optionally crossed with process factors.

    Called by :func:`levelwise.optimal_design` when its factors hold Components or a Mixture. *model* is a
    Scheffé preset, a pair (Scheffé preset, process model) or a formula over the components and process factors
    (no intercept). *constraints* are linear inequalities over component amounts and process settings in natural
    units. *fixed_runs* (a Design or DataFrame with the component amounts and process settings): the new runs
    augment them and only the new runs are returned, as the next stage (run ids after the fixed runs', the block
    after their last), as :func:`levelwise.optimal_design` does.
    """
    from ..model._formula import monomials
    from ..model._mixture_terms import model_exponents
    from ._constraints import parse_constraint

    mixture, process, constraints = _split(factors, constraints)
    runs = _check_count(runs, "runs", 1)
    starts = _check_count(starts, "starts", 1)
    seed = _check_seed(seed)
    _check_criterion(criterion)
    _check_progress(progress)
    q, k = mixture.q, len(process)
    names = mixture.names + [f.name for f in process]
    E = model_exponents(model, mixture.names, [f.name for f in process])
    p = len(E)
    fixed, last_run, last_block = _fixed_variables(fixed_runs, mixture, process)
    n_fixed = len(fixed)
    if runs + n_fixed < p:
        raise LevelwiseError(f"The model {model!r} has {p} terms but the design would have only {runs + n_fixed} "
                             f"runs ({runs} new + {n_fixed} fixed); 'runs' must be at least {p - n_fixed}.")
    T = mixture.total
    # Every inequality over v = [proportions, coded process]: G v <= h.
    eye = np.eye(q + k)
    rows = [-eye[:q], eye[:q], np.hstack([mixture.G * T, np.zeros((len(mixture.G), k))])]
    rhs = [-mixture.declared_lows / T, mixture.declared_highs / T, mixture.h]
    if k:
        rows += [-eye[q:], eye[q:]]
        rhs += [np.ones(k), np.ones(k)]
    texts = [constraints] if isinstance(constraints, str) else list(constraints or [])
    centre = np.array([f.center for f in process])
    half = np.array([f.half_range for f in process])
    for text in texts:
        a, b = parse_constraint(text, names)
        rows.append(np.concatenate([a[:q] * T, a[q:] * half])[None, :])
        rhs.append([b - a[q:] @ centre])
    G, h = np.vstack(rows), np.concatenate([np.atleast_1d(r) for r in rhs])

    def feasible(v):
        return np.all(v @ G.T <= h + 1e-9, axis=-1)

    def sample(count, rng):
        out, have = [], 0
        for _ in range(200):
            m = mixture.sample(max(256, 2 * count), rng) / T
            v = np.hstack([m, rng.uniform(-1, 1, size=(len(m), k))]) if k else m
            v = v[feasible(v)]
            out.append(v)
            have += len(v)
            if have >= count:
                return np.vstack(out)[:count]
        raise LevelwiseError(f"The 'constraints' {texts} leave (almost) no room inside the mixture region.")

    W = None
    if criterion == "I":
        s = sample(20000, np.random.default_rng(0))
        F = monomials(s, E)
        W = F.T @ F / len(F)
    rng = np.random.default_rng(seed)
    best = None
    start = 0
    for start in range(starts):
        points = np.vstack([fixed, sample(runs, rng)])

        def candidates(i, j, point):
            cand = _candidates(G, h, point, j, q, k)
            return (cand, monomials(cand, E)) if len(cand) else None

        points, F = exchange_runs(points, monomials(points, E), n_fixed, candidates, W, criterion)
        score, logdet, _ = design_score(monomials(points, E), W, criterion)
        if best is None or score < best[0]:
            best = (score, points.copy(), logdet)
        if progress is not None and progress((start + 1) / starts, f"start {start + 1} of {starts}") is False:
            break
    _, points, logdet = best
    if not math.isfinite(logdet):
        raise LevelwiseError(f"No design found in which every term of the model {model!r} is estimable. "
                             "Use more runs or a simpler model.")
    amounts = points[:, :q] * T
    amounts[:, -1] = T - amounts[:, :-1].sum(axis=1)  # the sum exactly at the total
    amounts = np.clip(amounts, mixture.declared_lows, mixture.declared_highs)[n_fixed:]
    meta = {"criterion": criterion, "model": model if isinstance(model, str) else list(model),
            "constraints": texts, "d_efficiency": 100.0 * math.exp(logdet / p) / (runs + n_fixed), "log_det": logdet,
            "starts_run": start + 1, "fixed_runs": n_fixed}
    design = mixture_design(mixture, amounts, ["optimal"] * runs, process=process,
                            process_coded=points[n_fixed:, q:] if k else None, kind=f"{criterion}-optimal mixture",
                            block=[last_block + 1 if n_fixed else 1] * runs, first_run=last_run + 1,
                            randomize=randomize, seed=seed, metadata=meta)
    design._mixture_inequalities = (G, h)
    return design


__all__ = ["mixture_optimal_design"]
