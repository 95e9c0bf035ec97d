"""Mixture designs: simplex lattice, simplex centroid, extreme vertices, mixture-process crossings.

* ``simplex_lattice``: the {q, m} lattice, proportions 0, 1/m, ..., 1 summing to 1, C(q + m - 1, m) points
  (Scheffé 1958, *JRSS B* 20, 344-360).
* ``simplex_centroid``: every non-empty subset of components in equal proportions, 2^q - 1 points
  (Scheffé 1963, *JRSS B* 25, 235-263).
* ``extreme_vertices``: every vertex of a bounded (and optionally constrained) region, centroids of its edges and
  faces by choice, and the overall centroid (McLean & Anderson 1966, *Technometrics* 8, 447-454).

With lower bounds only, the simplex designs are laid out in L-pseudo-components and mapped back. Each design's
table holds the component amounts (in the units of the mixture total) and the role of each point.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import Design, _check_count, _check_seed
from ._factors import Factor, as_factors
from ._mixture_region import Mixture, as_mixture


def _make_design(factors, coded, roles, *, kind, randomize, seed, metadata, block=None, first_run=1):
    return Design(factors, coded, role=np.asarray(roles, dtype=object), block=block, randomize=randomize, seed=seed,
                  first_run=first_run, kind=kind, metadata=metadata)


def role_column(design) -> str:
    """Name of the role column of a design table (``role`` after the issue-11 rename, ``point_type`` before)."""
    return "role" if "role" in design.table.columns else "point_type"


def _order_column(design) -> str:
    return "standard_order" if "standard_order" in design.table.columns else "std_order"


def mixture_design(mixture: Mixture, amounts, roles, *, process=(), process_coded=None, kind, randomize=True,
                   seed=None, metadata=None, block=None, first_run=1) -> Design:
    """A Design of blends (amounts, (n, q)) with optional process factors (coded settings, (n, k))."""
    amounts = np.atleast_2d(np.asarray(amounts, dtype=float))
    mixture.check_blends(amounts, "design point")
    comp_factors = mixture.factors()
    coded = np.column_stack([f.to_coded(amounts[:, j]) for j, f in enumerate(comp_factors)])
    factors = list(comp_factors) + list(process)
    if len(process):
        coded = np.hstack([coded, np.asarray(process_coded, dtype=float)])
    meta = {"mixture_components": mixture.names, "mixture_total": mixture.total,
            "mixture_constraints": list(mixture.constraint_text), **(metadata or {})}
    design = _make_design(factors, coded, roles, kind=kind, randomize=randomize, seed=seed, metadata=meta,
                          block=block, first_run=first_run)
    # The table holds the exact amounts (not amounts rebuilt from coded values).
    std = design.table[_order_column(design)].to_numpy() - 1
    for j, name in enumerate(mixture.names):
        design.table[name] = amounts[std, j]
    design.mixture = mixture
    return design


def _check_replicates(replicates):
    return _check_count(replicates, "replicates", 1)


def _interior_points(q):
    """Axial (interior check) points in pseudo-components: halfway from the centroid to each vertex,
    x_i = (q + 1) / (2q), the others 1 / (2q) (common practice)."""
    return np.full((q, q), 1.0 / (2 * q)) + np.eye(q) * (0.5)


def _simplex_region(mixture, design_name):
    if not mixture.is_simplex:
        raise LevelwiseError(
            f"{design_name} needs a region that is a simplex in L-pseudo-components (lower bounds only, no upper "
            f"bound or constraint cutting it). {mixture!r} is not; use extreme_vertices or optimal_design."
        )


def _finish(mixture, pseudo, roles, replicates, kind, randomize, seed, metadata):
    pseudo = np.vstack([pseudo] * replicates)
    roles = list(roles) * replicates
    amounts = mixture.from_pseudo(pseudo)
    # Exact zeros and exact totals where the pseudo value is 0 or 1 (no rounding from the mapping).
    return mixture_design(mixture, amounts, roles, kind=kind, randomize=randomize, seed=seed, metadata=metadata)


def simplex_lattice(components, degree, *, total=None, interior_check=False, overall_centroid=False,
                    replicates=1, randomize=True, seed=None) -> Design:
    """The {q, m} simplex-lattice design (Scheffé 1958).

    Parameters
    ----------
    components : list of Component, int, or Mixture
        With lower bounds only, the lattice is laid out in L-pseudo-components.
    degree : int
        m >= 1: proportions 0, 1/m, ..., 1; C(q + m - 1, m) points.
    total : float, optional
        Mixture total (default 1) when *components* is not a Mixture.
    interior_check : bool
        Add q axial points halfway from the overall centroid to each vertex (role ``interior_check``).
    overall_centroid : bool
        Add the overall centroid when the lattice does not contain it.
    replicates : int
        Copies of every point.

    Examples
    --------
    >>> len(simplex_lattice(3, 2, randomize=False))
    6
    """
    mixture = as_mixture(components, total)
    degree = _check_count(degree, "degree", 1)
    replicates = _check_replicates(replicates)
    _check_seed(seed)
    _simplex_region(mixture, "simplex_lattice")
    q = mixture.q
    count = math.comb(q + degree - 1, degree)
    if count > 100_000:
        raise LevelwiseError(f"The {{{q}, {degree}}} lattice has {count} points; the limit is 100000.")
    points = [np.array(c, dtype=float) / degree
              for c in itertools.product(range(degree + 1), repeat=q) if sum(c) == degree]
    points.sort(key=lambda z: (np.count_nonzero(z), tuple(-z)))
    pseudo = np.array(points)
    centre = np.full(q, 1.0 / q)
    roles = ["vertex" if np.count_nonzero(z) == 1 else "overall_centroid" if np.allclose(z, centre) else "lattice"
             for z in pseudo]
    if overall_centroid and "overall_centroid" not in roles:
        pseudo = np.vstack([pseudo, centre])
        roles.append("overall_centroid")
    if interior_check:
        pseudo = np.vstack([pseudo, _interior_points(q)])
        roles += ["interior_check"] * q
    return _finish(mixture, pseudo, roles, replicates, "simplex lattice", randomize, seed,
                   {"degree": degree, "lattice_points": count})


def simplex_centroid(components, *, total=None, interior_check=False, replicates=1, randomize=True,
                     seed=None) -> Design:
    """The simplex-centroid design: every non-empty subset of components in equal proportions, 2^q - 1 points
    (Scheffé 1963). Roles: ``vertex`` (pure blends), ``edge_centroid`` (two components), ``face_centroid``
    (3 .. q-1), ``overall_centroid``; ``interior_check`` for the optional axial points.

    Examples
    --------
    >>> len(simplex_centroid(4, randomize=False))
    15
    """
    mixture = as_mixture(components, total)
    replicates = _check_replicates(replicates)
    _check_seed(seed)
    _simplex_region(mixture, "simplex_centroid")
    q = mixture.q
    if q > 16:
        raise LevelwiseError(f"The simplex centroid of {q} components has {2**q - 1} points; the limit is 16 "
                             "components.")
    pseudo, roles = [], []
    for size in range(1, q + 1):
        for subset in itertools.combinations(range(q), size):
            z = np.zeros(q)
            z[list(subset)] = 1.0 / size
            pseudo.append(z)
            roles.append("vertex" if size == 1 else "edge_centroid" if size == 2 else
                         "overall_centroid" if size == q else "face_centroid")
    pseudo = np.array(pseudo)
    if interior_check:
        pseudo = np.vstack([pseudo, _interior_points(q)])
        roles += ["interior_check"] * q
    return _finish(mixture, pseudo, roles, replicates, "simplex centroid", randomize, seed, {})


def extreme_vertices(components, *, total=None, constraints=None, centroids=(), overall_centroid=True,
                     replicates=1, randomize=True, seed=None) -> Design:
    """Extreme-vertices design of a bounded mixture region (McLean & Anderson 1966).

    Parameters
    ----------
    components : list of Component, int, or Mixture
    total : float, optional
        Mixture total (default 1).
    constraints : str or list of str, optional
        Extra linear inequalities over the component amounts, e.g. ``"A + B <= 0.7"``.
    centroids : sequence of int
        Dimensions of the faces whose centroids are added: 1 for edges (role ``edge_centroid``), 2 .. q-2 for
        faces (role ``face_centroid``).
    overall_centroid : bool, default True
        Add the average of the vertices (role ``overall_centroid``).
    replicates : int
        Copies of every point.

    Examples
    --------
    >>> from levelwise import Component
    >>> d = extreme_vertices([Component("A", 0.1, 0.5), Component("B", 0.2, 0.6), Component("C", 0.1, 0.4)],
    ...                      randomize=False)
    >>> len(d)
    7
    """
    mixture = as_mixture(components, total, constraints)
    replicates = _check_replicates(replicates)
    _check_seed(seed)
    q = mixture.q
    if isinstance(centroids, (int, np.integer)):
        centroids = (centroids,)
    try:
        dims = sorted(set(centroids))
    except TypeError:
        raise LevelwiseError(f"The 'centroids' parameter must be a list of face dimensions (1 = edges, up to "
                             f"{q - 2}). Got {describe(centroids)}.") from None
    for d in dims:
        if isinstance(d, bool) or not isinstance(d, (int, np.integer)) or not 1 <= d <= q - 2:
            raise LevelwiseError(f"The 'centroids' parameter takes face dimensions from 1 (edges) to {q - 2} for "
                                 f"{q} components. Got {describe(centroids)}.")
    V = mixture.vertices()
    points, roles = [V], ["vertex"] * len(V)
    for d in dims:
        faces = mixture.faces(d)
        if faces:
            points.append(np.array([V[f].mean(axis=0) for f in faces]))
            roles += ["edge_centroid" if d == 1 else "face_centroid"] * len(faces)
    if overall_centroid:
        points.append(mixture.centroid()[None, :])
        roles.append("overall_centroid")
    amounts = np.vstack([np.vstack(points)] * replicates)
    return mixture_design(mixture, amounts, roles * replicates, kind="extreme vertices", randomize=randomize,
                          seed=seed, metadata={"vertices": len(V), "centroid_dimensions": dims})


def mixture_process(mixture_design_, process, *, randomize=True, seed=None) -> Design:
    """Cross a mixture design with process factors: every blend at every process run.

    Parameters
    ----------
    mixture_design_ : Design
        A mixture design (from simplex_lattice, simplex_centroid, extreme_vertices, ...).
    process : Design or list of Factor
        The process runs (a Design, e.g. a two-level factorial), or process factors for a two-level full
        factorial of them.

    Examples
    --------
    >>> from levelwise import Factor
    >>> len(mixture_process(simplex_centroid(3, randomize=False), [Factor("Temp", 150, 190)], randomize=False))
    14
    """
    mixture = getattr(mixture_design_, "mixture", None)
    if not isinstance(mixture_design_, Design) or mixture is None:
        raise LevelwiseError(f"The first parameter of mixture_process must be a mixture design. "
                             f"Got {describe(mixture_design_)}.")
    _check_seed(seed)
    from ._splitplot_checks import refuse_hard_to_change  # the crossing randomises every run (issue 13)

    refuse_hard_to_change(process.factors if isinstance(process, Design) else as_factors(process, "process"),
                          "mixture_process")
    if not isinstance(process, Design):
        from ._factorial import full_factorial

        process = full_factorial(as_factors(process, "process"), randomize=False)
    clash = sorted(set(process.factor_names) & set(mixture.names))
    if clash:
        raise LevelwiseError(f"Process factor names must differ from the component names. Both have {clash}.")
    mt = mixture_design_.table.sort_values(_order_column(mixture_design_))
    amounts = mt[mixture.names].to_numpy(dtype=float)
    roles = mt[role_column(mixture_design_)].to_list()
    pcoded = process.coded.to_numpy(dtype=float)[np.argsort(process.table[_order_column(process)].to_numpy())]
    n_m, n_p = len(amounts), len(pcoded)
    return mixture_design(
        mixture, np.repeat(amounts, n_p, axis=0), np.repeat(np.array(roles, dtype=object), n_p),
        process=process.factors, process_coded=np.tile(pcoded, (n_m, 1)), kind=f"{mixture_design_.kind} x process",
        randomize=randomize, seed=seed, metadata={"blends": n_m, "process_runs": n_p},
    )


def model_variables(design) -> tuple:
    """(names, values): the design's blends as proportions of the total and its process factors coded."""
    mixture = design.mixture
    names = design.factor_names
    values = design.coded.to_numpy(dtype=float).copy()
    for j, name in enumerate(names):
        if name in mixture.names:
            values[:, j] = design.table[name].to_numpy(dtype=float) / mixture.total
    return names, values


def evaluate_mixture(design, model, alias_terms=None, delta: float = 2.0, alpha: float = 0.05):
    """:func:`levelwise.evaluate` for a mixture design: the model over the proportions (components) and the
    coded process factors; the prediction variance over the mixture region (times the process cube)."""
    import dataclasses

    from ..model._formula import monomials
    from ..model._mixture_terms import formula_text, model_exponents, next_order
    from ._evaluation import evaluate

    mixture = design.mixture
    names, values = model_variables(design)
    process = [n for n in names if n not in mixture.names]
    order = mixture.names + process
    perm = [names.index(n) for n in order]
    E = model_exponents(model, mixture.names, process)
    left = next_order(model, mixture.names, process) if alias_terms is None else \
        model_exponents(alias_terms, mixture.names, process)
    left = np.array([r for r in left if not (E == r).all(axis=1).any()], dtype=int).reshape(-1, len(order))
    proxy = Design([Factor(n, -1.0, 1.0) for n in order], values[:, perm], ["run"] * len(values), randomize=False)
    formula = formula_text(E, order)
    ev = evaluate(proxy, formula, alias_terms=formula_text(left, order) if len(left) else formula, delta=delta,
                  alpha=alpha)
    X = monomials(values[:, perm], E)
    out = {"vif": ev.vif}
    if ev.rank == len(E):
        XtXi = np.linalg.inv(X.T @ X)
        # Uncentred VIF (the model has no intercept): C_jj * sum(x_j^2).
        out["vif"] = ev.vif.copy()
        out["vif"][:] = np.diag(XtXi) * np.einsum("ij,ij->j", X, X)
        # The region: the mixture's blends (times the process cube), inside any constraints the design was
        # built under (points in proportions and coded process settings).
        G, h = getattr(design, "_mixture_inequalities", (np.zeros((0, len(order))), np.zeros(0)))

        def region(count, rng):
            out, have = [], 0
            for _ in range(100):
                pts = mixture.sample(count, rng) / mixture.total
                if process:
                    pts = np.hstack([pts, rng.uniform(-1, 1, size=(len(pts), len(process)))])
                pts = pts[np.all(pts @ G.T <= h + 1e-9, axis=1)]
                out.append(pts)
                have += len(pts)
                if have >= count:
                    break
            return np.vstack(out)[:count]

        pts = region(4096, np.random.default_rng(0))
        if not process and not len(G):
            pts = np.vstack([pts, mixture.vertices() / mixture.total])
        F = monomials(pts, E)
        v = np.einsum("ij,jk,ik->i", F, XtXi, F)
        Fm = monomials(region(20000, np.random.default_rng(0)), E)
        W = Fm.T @ Fm / len(Fm)
        out["prediction_variance"] = {"min": float(v.min()), "mean": float(np.trace(XtXi @ W)),
                                      "max": float(v.max())}
    return dataclasses.replace(ev, **out)


__all__ = ["extreme_vertices", "mixture_process", "simplex_centroid", "simplex_lattice"]
