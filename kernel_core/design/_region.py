"""The factor region of a design search: linear constraints in coded units, sampling and moment matrices.

Linear constraints such as ``"A + B <= 1.5"`` are written in natural units and turned into G x <= h over the coded
cube [-1, 1]^k. The optimal-design search and the design evaluation share the samples and moment matrices here.
"""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError
from ._constraints import parse_constraint


# -- constraints -----------------------------------------------------------------------------------------------
def parse_constraints(constraints, factors):
    """Linear constraints in natural units -> (G, h) with G x <= h in coded units.

    Parameters
    ----------
    constraints : str or list of str
        Each ``"<linear expression> <= <linear expression>"`` (or ``>=``), factor names as in formulas
        (backticks for names that are not identifiers).
    factors : tuple of Factor

    Returns
    -------
    G : (c, k) array, h : (c,) array
    """
    names = [f.name for f in factors]
    k = len(factors)
    if constraints is None:
        return np.zeros((0, k)), np.zeros(0)
    if isinstance(constraints, str):
        constraints = [constraints]
    rows, rhs = [], []
    center = np.array([0.0 if f.is_categorical else f.center for f in factors])
    half = np.array([1.0 if f.is_categorical else f.half_range for f in factors])
    for text in constraints:
        a, b = parse_constraint(text, names)  # a . x <= b, natural units
        named = [f.name for f, coef in zip(factors, a) if coef and f.is_categorical]
        if named:
            raise LevelwiseError(f"The constraint {text!r} names categorical factor(s) {named}; constraints must "
                                 "use continuous factors only.")
        # natural x = center + half * coded
        rows.append(a * half)
        rhs.append(b - a @ center)
    return np.array(rows), np.array(rhs)


def check_region(G, h, constraints=None):
    """Raise a LevelwiseError when {x in [-1, 1]^k : G x <= h} is empty (or has no interior)."""
    if not len(G):
        return
    from scipy.optimize import linprog

    k = G.shape[1]
    # Maximise the slack t in G x + t*|g| <= h: t > 0 means an interior point exists.
    norms = np.linalg.norm(G, axis=1)
    c = np.zeros(k + 1)
    c[-1] = -1.0
    res = linprog(c, A_ub=np.column_stack([G, norms]), b_ub=h, bounds=[(-1, 1)] * k + [(None, 1)], method="highs")
    if res.status != 0 or -res.fun <= 1e-9:
        raise LevelwiseError(
            f"The 'constraints' leave an empty region (no setting inside the factor ranges satisfies them all). "
            f"Got {constraints!r}."
        )


def sample_region(G, h, k, count, rng):
    """*count* points uniform over {x in [-1, 1]^k : G x <= h} (rejection, then LP vertices as a fallback)."""
    out = []
    have = 0
    for _ in range(60):
        batch = rng.uniform(-1, 1, size=(max(256, 4 * count), k))
        if len(G):
            batch = batch[np.all(batch @ G.T <= h + 1e-12, axis=1)]
        out.append(batch)
        have += len(batch)
        if have >= count:
            return np.vstack(out)[:count]
    # A very small region: convex combinations of vertices found by LPs in random directions.
    from scipy.optimize import linprog

    vertices = []
    for _ in range(4 * k + 4):
        res = linprog(rng.normal(size=k), A_ub=G, b_ub=h, bounds=[(-1, 1)] * k, method="highs")
        if res.status == 0:
            vertices.append(res.x)
    vertices = np.array(vertices)
    weights = rng.dirichlet(np.ones(len(vertices)), size=count)
    return weights @ vertices


def moment_matrix(exponents, G=None, h=None, rng=None, discrete=None):
    """W = average of f(x) f(x)' over the region: exact over the cube, Monte Carlo (20,000 points) when
    constrained. Columns flagged in *discrete* (two-level categorical factors) take -1 and +1 only."""
    p, k = exponents.shape
    discrete = np.zeros(k, dtype=bool) if discrete is None else np.asarray(discrete, dtype=bool)
    if G is None or not len(G):
        total = exponents[:, None, :] + exponents[None, :, :]
        # E[x^a] for x uniform on [-1, 1]: 0 for odd a, 1/(a+1) for even a; for x = +-1 with equal weight:
        # 0 for odd a, 1 for even a.
        moments = np.where(total % 2 == 0, np.where(discrete, 1.0, 1.0 / (total + 1.0)), 0.0)
        return moments.prod(axis=2)
    from ..model import monomials

    sample = sample_region(G, h, k, 20000, rng or np.random.default_rng(0))
    sample[:, discrete] = np.where(sample[:, discrete] < 0, -1.0, 1.0)
    f = monomials(sample, exponents)
    return f.T @ f / len(f)
