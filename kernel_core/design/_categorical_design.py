"""Optimal designs and design evaluation with categorical factors of any number of levels.

Model columns
-------------
A term is a product over its factors of one *component* per factor: a power x^e of a continuous factor's coded
setting, or one sum-to-zero contrast column of a categorical factor (the coding of :func:`levelwise.fit`: level
l > 0 has a column that is 1 at level l, -1 at the first level, 0 elsewhere). A term with a categorical factor
of L levels has L - 1 columns (times those of any other categorical factor in it). In a design table a
categorical factor is held as its level position on [-1, +1] (see :class:`levelwise.Factor`).

Exchange
--------
Candidate-free coordinate exchange (Meyer & Nachtsheim 1995, Technometrics 37(1) 60-69): each coordinate of each
run moves to the best of its candidate settings, a categorical factor's candidates being its levels and a
continuous factor's the levels -1, +1 (and 0 when it is squared in the model, or its ``n_levels`` settings).
The change of det(X'X) for every candidate comes from the rank-one exchange formula
det(M')/det(M) = (1 + y'Ay)(1 - x'Ax) + (y'Ax)^2, A = M^-1 (Fedorov 1972); the I criterion by two
Sherman-Morrison updates of trace(A W).

Moment matrix
-------------
W = E[f(x) f(x)'] over the region (continuous factors uniform on [-1, 1], categorical levels equally likely)
factorises over the factors because each column is a product of one component per factor, so it is exact:
E[x^a] = 1/(a+1) for even a (0 for odd a), and the mean over the levels of a product of contrast columns.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._stats import stats, t_ppf
from ..model import parse_model, term_name
from ._design import (
    Design,
    _check_count,
    _check_criterion,
    _check_enough_runs,
    _check_progress,
    _check_seed,
    _estimable,
)
from ._exchange import design_score, exchange_runs
from ._factors import as_factors


def _contrast(levels: int) -> np.ndarray:
    return np.vstack([-np.ones((1, levels - 1)), np.eye(levels - 1)])


@dataclass(frozen=True, eq=False)
class ModelColumns:
    """Model columns of a term list over factors with categorical ones of any number of levels."""

    names: tuple  # column names, e.g. "Supplier[b]", "A:Supplier[b]"
    components: np.ndarray  # (p, k): exponent (continuous) or contrast column + 1 (categorical), 0 = absent
    groups: tuple  # (term name, column positions)
    group_exponents: np.ndarray  # (g, k)
    levels: tuple  # per factor: L for categorical, 0 for continuous

    def values(self, points: np.ndarray) -> np.ndarray:
        """Model matrix at *points* (n, k): continuous coded settings, categorical level positions."""
        points = np.atleast_2d(np.asarray(points, dtype=float))
        n, p = len(points), len(self.names)
        out = np.ones((n, p))
        for j, L in enumerate(self.levels):
            comp = self.components[:, j]
            if not comp.any():
                continue
            x = points[:, j]
            if L:
                index = np.rint((x + 1.0) * (L - 1) / 2.0).astype(int)
                table = np.column_stack([np.ones(L), _contrast(L)])  # (L, L): component 0 = 1
                out *= table[index][:, comp]
            else:
                out *= x[:, None] ** comp[None, :]
        return out

    def moment_matrix(self) -> np.ndarray:
        """Exact E[f f'] over the cube (continuous uniform) and equally likely levels (see the module docstring)."""
        p = len(self.names)
        W = np.ones((p, p))
        for j, L in enumerate(self.levels):
            a = self.components[:, j][:, None]
            b = self.components[:, j][None, :]
            if L:
                table = np.column_stack([np.ones(L), _contrast(L)])
                W *= np.einsum("la,lb->ab", table, table)[a, b] / L
            else:
                total = a + b
                W *= np.where(total % 2 == 0, 1.0 / (total + 1.0), 0.0)
        return W


def model_columns(spec, factors) -> ModelColumns:
    """Expand the terms of *spec* (a ModelSpec over *factors*) into model columns.

    A preset model leaves out the powers of categorical factors; a formula that asks for one is refused.
    """
    from ..model import PRESETS

    levels = tuple(len(f.levels) if f.is_categorical else 0 for f in factors)
    names_f = [f.name for f in factors]
    rows, labels, groups, group_exp = [], [], [], []
    exponents = spec.exponents
    if isinstance(spec.formula, str) and spec.formula.strip() in PRESETS:
        exponents = np.array([e for e in exponents if not any(L and e[j] > 1 for j, L in enumerate(levels))],
                             dtype=int).reshape(-1, len(factors))
    for term in exponents:
        for j, L in enumerate(levels):
            if L and term[j] > 1:
                raise LevelwiseError(
                    f"The model {spec.formula!r} raises categorical factor {names_f[j]!r} to a power; a categorical "
                    "factor has no curvature. Use a model without that term."
                )
        choices = [range(1, L) if (L and term[j]) else [int(term[j])] for j, L in enumerate(levels)]
        start = len(rows)
        for combo in itertools.product(*choices):
            rows.append(combo)
            parts = []
            for j, c in enumerate(combo):
                if not c:
                    continue
                if levels[j]:
                    parts.append(f"{names_f[j]}[{factors[j].levels[c]}]")
                else:
                    parts.append(names_f[j] if c == 1 else f"{names_f[j]}^{c}")
            labels.append(":".join(parts) if parts else "Intercept")
        if term.any():
            groups.append((term_name(term, names_f), tuple(range(start, len(rows)))))
            group_exp.append(term)
    return ModelColumns(tuple(labels), np.array(rows, dtype=int).reshape(len(rows), len(factors)), tuple(groups),
                        np.array(group_exp, dtype=int).reshape(len(group_exp), len(factors)), levels)


def has_many_levels(factors) -> bool:
    """True when some factor is categorical with more than 2 levels (the case this module handles)."""
    return any(f.is_categorical and len(f.levels) > 2 for f in factors)


def _candidate_grids(factors, spec):
    grids = []
    for j, f in enumerate(factors):
        if f.is_categorical:
            grids.append(np.array(f.coded_levels))
        elif f.n_levels is not None:
            grids.append(np.array(f.coded_levels))
        elif spec.exponents[:, j].max(initial=0) > 1:
            grids.append(np.array([-1.0, 0.0, 1.0]))
        else:
            grids.append(np.array([-1.0, 1.0]))
    return grids


def coordinate_exchange(factors, model, runs, criterion="D", constraints=None, fixed_runs=None, starts=10,
                        seed=None, progress=None, randomize=True) -> Design:
    """D- or I-optimal design with categorical factors of any number of levels (see the module docstring).

    Parameters and result as :func:`levelwise.optimal_design`; ``metadata["d_efficiency"]`` is
    100 det(X'X)^(1/p) / n over the model columns (contrast columns included).
    """
    from ._optimal import _fixed_coded, _interval
    from ._region import check_region, parse_constraints, sample_region

    factors = as_factors(factors)
    runs = _check_count(runs, "runs", 1)
    starts = _check_count(starts, "starts", 1)
    seed = _check_seed(seed)
    _check_criterion(criterion)
    _check_progress(progress)
    names = [f.name for f in factors]
    spec = parse_model(model, names)
    cols = model_columns(spec, factors)
    p, k = len(cols.names), len(factors)
    fixed, last_run, last_block = _fixed_coded(fixed_runs, factors)
    n = _check_enough_runs(model, p, runs, len(fixed), "columns")
    G, h = parse_constraints(constraints, factors)
    check_region(G, h, constraints)
    W = cols.moment_matrix()
    grids = _candidate_grids(factors, spec)
    categorical = np.array([f.is_categorical for f in factors])
    rng = np.random.default_rng(seed)
    best = None
    n_fixed = len(fixed)
    for start in range(starts):
        new = sample_region(G, h, k, runs, rng)
        snapped = np.column_stack([grids[j][np.abs(new[:, [j]] - grids[j][None, :]).argmin(axis=1)]
                                   for j in range(k)])
        feasible = np.all(snapped @ G.T <= h + 1e-12, axis=1) if len(G) else np.ones(runs, dtype=bool)
        new[feasible] = snapped[feasible]
        for j in np.flatnonzero(categorical):
            new[:, j] = rng.choice(grids[j], size=runs)
        points = np.vstack([fixed, new])

        def candidates(i, j, point):
            g = grids[j]
            if categorical[j] or not len(G):
                values = g
            else:
                lo, hi = _interval(G, h, point, j)
                values = np.unique(np.concatenate([g[(g >= lo - 1e-12) & (g <= hi + 1e-12)], [lo, hi]]))
            values = values[np.abs(values - point[j]) > 1e-12]
            if not len(values):
                return None
            trial = np.repeat(point[None, :], len(values), axis=0)
            trial[:, j] = values
            return trial, cols.values(trial)

        points, F = exchange_runs(points, cols.values(points), n_fixed, candidates, W, criterion)
        score, logdet, apv = design_score(F, W, criterion)
        if best is None or score < best[0]:
            best = (score, points.copy(), logdet, apv)
        if progress is not None and progress((start + 1) / starts, f"start {start + 1} of {starts}") is False:
            break
    _, points, logdet, apv = best
    if not math.isfinite(logdet):
        raise LevelwiseError(
            f"No design found in which every term of the model {model!r} is estimable. "
            "Use more runs, a simpler model or a larger region."
        )
    meta = {
        "criterion": criterion,
        "model": spec.formula,
        "terms": list(spec.terms),
        "columns": list(cols.names),
        "constraints": [constraints] if isinstance(constraints, str) else list(constraints or []),
        "d_efficiency": 100.0 * math.exp(logdet / p) / n,
        "average_prediction_variance": apv,
        "log_det": logdet,
        "starts_run": start + 1,
        "fixed_runs": n_fixed,
    }
    # Only the new runs, as the next stage (as levelwise.optimal_design does).
    design = Design(factors, points[n_fixed:], ["optimal"] * runs, [last_block + 1 if n_fixed else 1] * runs,
                    randomize=randomize, seed=seed, first_run=last_run + 1, kind=f"{criterion}-optimal",
                    metadata=meta)
    design._region = (G, h)
    return design


def evaluate_levels(design, model, alias_terms=None, delta: float = 2.0, alpha: float = 0.05):
    """:func:`levelwise.evaluate` for designs with categorical factors of any number of levels.

    Tables are indexed by model column (``Supplier[b]``, ...); the rest is as in :func:`levelwise.evaluate`,
    with the prediction variance over every level of each categorical factor (5 levels per continuous factor,
    up to 15,625 points; else 4096 seeded random points) and the exact moment matrix for its mean.
    """
    from ._evaluation import DesignEvaluation, _second_order

    if not (isinstance(alpha, float | int) and 0 < alpha < 1):
        raise LevelwiseError(f"The 'alpha' parameter must be in (0, 1). Got {describe(alpha)} instead.")
    if not (isinstance(delta, float | int) and delta > 0):
        raise LevelwiseError(f"The 'delta' parameter must be a positive number. Got {describe(delta)} instead.")
    factors = design.factors
    names = design.factor_names
    spec = parse_model(model, names)
    cols = model_columns(spec, factors)
    coded = design.coded.to_numpy(dtype=float)
    X = cols.values(coded)
    n, p = X.shape
    if p > n:
        raise LevelwiseError(f"The model {model!r} has {p} columns but the design has only {n} runs.")
    terms = list(cols.names)
    rank, estimable = _estimable(X)
    # Left-out terms: two-factor interactions not in the model, pure quadratics of continuous factors set at
    # three or more levels (or the terms of alias_terms).
    k = len(names)
    in_model = {tuple(row) for row in spec.exponents}
    if alias_terms is None:
        eye = np.eye(k, dtype=int)
        left = [eye[a] + eye[b] for a, b in itertools.combinations(range(k), 2)]
        left += [2 * eye[j] for j in range(k)
                 if not factors[j].is_categorical and len(np.unique(coded[:, j])) >= 3]
    else:
        left = list(parse_model(alias_terms, names).exponents)
    left = [e for e in left if e.any() and tuple(e) not in in_model]
    if left:
        from ..model import ModelSpec

        left_cols = model_columns(ModelSpec("alias", tuple(names), np.array(left, dtype=int),
                                            tuple(term_name(e, names) for e in left)), factors)
        X2 = left_cols.values(coded)
        X1 = X[:, estimable]
        alias = np.linalg.lstsq(X1, X2, rcond=None)[0]
        alias[np.abs(alias) < 1e-10] = 0.0
        alias_df = pd.DataFrame(alias, index=[t for t, e in zip(terms, estimable) if e], columns=left_cols.names)
    else:
        alias_df = pd.DataFrame(index=[t for t, e in zip(terms, estimable) if e])
    body = [j for j in range(p) if cols.components[j].any()]
    body_names = [terms[j] for j in body]
    Z = X[:, body]
    sd = Z.std(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        C = np.atleast_2d(np.corrcoef(Z, rowvar=False)) if len(body) > 1 else np.ones((len(body), len(body)))
    C[:, sd == 0] = np.nan
    C[sd == 0, :] = np.nan
    vif = np.full(len(body), np.inf)
    if rank == p and np.all(sd > 0):
        try:
            vif = np.diag(np.linalg.inv(C)).copy()
        except np.linalg.LinAlgError:
            pass
    df_error = n - rank
    if rank < p:
        pv = {"min": np.inf, "mean": np.inf, "max": np.inf}
        power = pd.Series(np.nan, index=body_names, name="power")
    else:
        XtXi = np.linalg.inv(X.T @ X)
        grids = [np.array(f.coded_levels) if f.is_categorical else np.linspace(-1, 1, 5) for f in factors]
        if np.prod([len(g) for g in grids]) <= 15625:
            pts = np.array(list(itertools.product(*grids)))
        else:
            rng = np.random.default_rng(0)
            pts = np.column_stack([rng.choice(g, size=4096) if f.is_categorical else rng.uniform(-1, 1, 4096)
                                   for f, g in zip(factors, grids)])
        Fp = cols.values(pts)
        v = np.einsum("ij,jk,ik->i", Fp, XtXi, Fp)
        pv = {"min": float(v.min()), "mean": float(np.trace(XtXi @ cols.moment_matrix())), "max": float(v.max())}
        if df_error > 0:
            t_crit = t_ppf(1 - alpha / 2, df_error)
            se = np.sqrt(np.diag(XtXi)[body])
            ranges = Z.max(axis=0) - Z.min(axis=0)
            nc = (delta / ranges) / se
            power_v = stats.nct.sf(t_crit, df_error, nc) + stats.nct.cdf(-t_crit, df_error, nc)
        else:
            power_v = np.full(len(body), np.nan)
        power = pd.Series(power_v, index=body_names, name="power")
    return DesignEvaluation(
        terms=tuple(terms), runs=n, rank=rank, df_error=df_error,
        estimable=pd.Series(estimable, index=terms, name="estimable"),
        inestimable=tuple(t for t, e in zip(terms, estimable) if not e), alias_matrix=alias_df,
        vif=pd.Series(vif, index=body_names, name="vif"), correlation=pd.DataFrame(C, index=body_names,
                                                                                   columns=body_names),
        prediction_variance=pv, power=power, delta=float(delta), alpha=float(alpha),
        second_order=_second_order(design),
    )


__all__ = ["ModelColumns", "coordinate_exchange", "evaluate_levels", "has_many_levels", "model_columns"]
