"""What a design can estimate: rank, aliasing, variance inflation, prediction variance and power."""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._stats import stats, t_ppf
from ._design import Design, _estimable
from ._region import moment_matrix, sample_region


@dataclass(frozen=True, eq=False)
class DesignEvaluation:
    """Result of :func:`evaluate`. Every table is indexed by term name.

    Attributes
    ----------
    terms : tuple of str
        Model terms.
    runs, rank, df_error : int
        Runs, rank of the model matrix, residual degrees of freedom (runs - rank).
    estimable : pandas.Series of bool
        Per term: True when it can be estimated together with the terms before it (column-pivoted QR).
    inestimable : tuple of str
    alias_matrix : pandas.DataFrame
        (X1'X1)^-1 X1'X2: how each left-out term (column) biases each model coefficient (row).
    vif : pandas.Series
        Variance inflation factor per non-intercept term (1 = orthogonal; inf when inestimable).
    correlation : pandas.DataFrame
        Correlation matrix of the non-intercept model columns.
    prediction_variance : dict
        ``min``, ``mean``, ``max`` of x'(X'X)^-1 x (relative to sigma^2) over the region; the mean is exact over
        the cube (moment matrix; Monte Carlo inside linear constraints), min and max are over a grid (5 levels per
        continuous factor, both levels of a categorical one, up to 15,625 points; else 4096 seeded random points plus
        the corners).
    second_order : SecondOrderAliasing or None
        The alias structure among the second-order terms (two-factor interactions and pure quadratics) and
        their correlations with the main effects (:func:`levelwise.second_order_aliasing`; up to 30 factors).
    power : pandas.Series
        Per non-intercept term: probability of detecting (two-sided t test, level *alpha*) a coefficient whose
        effect over the column's range in the design equals delta*sigma; NaN without error degrees of freedom.
    """

    terms: tuple
    runs: int
    rank: int
    df_error: int
    estimable: pd.Series
    inestimable: tuple
    alias_matrix: pd.DataFrame
    vif: pd.Series
    correlation: pd.DataFrame
    prediction_variance: dict
    power: pd.Series
    delta: float
    alpha: float
    second_order: object = None


    def _repr_html_(self) -> str:
        """Rich notebook output: rank, residual degrees of freedom, prediction variance, VIF and power per term."""
        import html as _html

        from .._html import format_number, html_table

        pv = self.prediction_variance
        table = pd.DataFrame({"VIF": self.vif, f"power (effect {format_number(self.delta)} sigma, alpha "
                                               f"{format_number(self.alpha)})": self.power})
        table.index.name = "term"
        missing = (f"<br>Cannot be estimated: {_html.escape(', '.join(self.inestimable))}."
                   if self.inestimable else "")
        return (f"<p><b>Design evaluation</b>: {self.runs} runs, rank {self.rank}, {self.df_error} residual "
                f"degrees of freedom. Relative prediction variance (units of sigma squared): min "
                f"{format_number(pv['min'])}, mean {format_number(pv['mean'])}, max {format_number(pv['max'])}."
                f"{missing}</p>" + html_table(table, index=True, digits=3))



def _second_order(design):
    """The alias structure among the second-order terms (``levelwise.second_order_aliasing``), up to 30 factors."""
    from ._definitive_screening import second_order_aliasing

    return second_order_aliasing(design) if 2 <= len(design.factors) <= 30 else None

def _default_left_out(spec, coded):
    k = coded.shape[1]
    rows = [tuple(r) for r in spec.exponents]
    eye = np.eye(k, dtype=int)
    degree = int(spec.exponents.sum(axis=1).max(initial=0))
    candidates = []
    if degree <= 1:
        candidates += [eye[i] + eye[j] for i in range(k) for j in range(i + 1, k)]
    else:
        candidates += [eye[i] + eye[j] for i in range(k) for j in range(i + 1, k)]
        candidates += [eye[i] + eye[j] + eye[m] for i, j, m in itertools.combinations(range(k), 3)]
    multi_level = [j for j in range(k) if len(np.unique(coded[:, j])) >= 3]
    candidates += [2 * eye[j] for j in multi_level]
    out = [c for c in candidates if tuple(c) not in rows]
    return np.array(out, dtype=int).reshape(-1, k)


def evaluate(design, model, alias_terms=None, delta: float = 2.0, alpha: float = 0.05) -> DesignEvaluation:
    """Evaluate what *design* can estimate for *model*.

    Parameters
    ----------
    design : Design
    model : str
        Wilkinson formula or preset.
    alias_terms : str, optional
        Formula of the left-out terms for the alias matrix. Default: two-factor interactions not in the model
        (and three-factor interactions when the model already has second-order terms), plus pure quadratics of
        factors the design sets at three or more levels.
    delta : float, default 2
        Effect size in units of sigma for the power (an effect is the change of the term's contribution over the
        column's range in the design; for a -1/+1 column that is twice the coefficient).
    alpha : float, default 0.05
        Level of the two-sided t test.

    Returns
    -------
    DesignEvaluation

    Examples
    --------
    >>> from levelwise import full_factorial
    >>> ev = evaluate(full_factorial(3, randomize=False), "A + B + C")
    >>> ev.rank, ev.df_error, round(float(ev.vif["A"]), 9)
    (4, 4, 1.0)
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    if getattr(design, "mixture", None) is not None:  # mixture designs (issue 12): proportions, mixture region
        from ._mixture import evaluate_mixture

        return evaluate_mixture(design, model, alias_terms, delta, alpha)
    if not (isinstance(alpha, float | int) and 0 < alpha < 1):
        raise LevelwiseError(f"The 'alpha' parameter must be in (0, 1). Got {describe(alpha)} instead.")
    if not (isinstance(delta, float | int) and delta > 0):
        raise LevelwiseError(f"The 'delta' parameter must be a positive number. Got {describe(delta)} instead.")
    from ._categorical_design import evaluate_levels, has_many_levels

    if has_many_levels(design.factors):  # categorical factors with more than 2 levels (issue 14)
        return evaluate_levels(design, model, alias_terms, delta, alpha)
    from ..model import monomials, parse_model, term_name

    names = design.factor_names
    spec = parse_model(model, names)
    coded = design.coded.to_numpy(dtype=float)
    X = monomials(np.asarray(coded, dtype=float), spec.exponents)
    n, p = X.shape
    if p > n:
        raise LevelwiseError(f"The model {model!r} has {p} terms but the design has only {n} runs.")
    terms = list(spec.terms)
    rank, estimable = _estimable(X)
    est = pd.Series(estimable, index=terms, name="estimable")
    # Left-out terms
    if alias_terms is None:
        left = _default_left_out(spec, coded)
    else:
        extra = parse_model(alias_terms, names).exponents
        rows = {tuple(r_) for r_ in spec.exponents}
        left = np.array([e for e in extra if tuple(e) not in rows and e.any()], dtype=int).reshape(-1, len(names))
    left_names = [term_name(e, names) for e in left]
    X1 = X[:, estimable]
    X2 = monomials(coded, left) if len(left) else np.zeros((n, 0))
    alias = np.linalg.lstsq(X1, X2, rcond=None)[0] if len(left) else np.zeros((X1.shape[1], 0))
    alias[np.abs(alias) < 1e-10] = 0.0
    alias_df = pd.DataFrame(alias, index=[t for t, e in zip(terms, estimable) if e], columns=left_names)
    # Correlation and VIF (non-intercept columns)
    body = [j for j in range(p) if spec.exponents[j].any()]
    body_names = [terms[j] for j in body]
    Z = X[:, body]
    sd = Z.std(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        C = np.corrcoef(Z, rowvar=False) if len(body) > 1 else np.ones((len(body), len(body)))
    C = np.atleast_2d(C)
    C[:, sd == 0] = np.nan
    C[sd == 0, :] = np.nan
    corr = pd.DataFrame(C, index=body_names, columns=body_names)
    vif = np.full(len(body), np.inf)
    if rank == p and np.all(sd > 0):
        try:
            vif = np.diag(np.linalg.inv(C)).copy()
        except np.linalg.LinAlgError:
            pass
    vif_s = pd.Series(vif, index=body_names, name="vif")
    # Prediction variance and power need a full-rank model.
    df_error = n - rank
    if rank < p:
        pv = {"min": np.inf, "mean": np.inf, "max": np.inf}
        power = pd.Series(np.nan, index=body_names, name="power")
    else:
        XtXi = np.linalg.inv(X.T @ X)
        region = getattr(design, "_region", None)
        k = len(names)
        discrete = np.array([f.is_categorical for f in design.factors])
        rng = np.random.default_rng(0)
        if region is not None and len(region[0]):
            G, h = region
            pts = sample_region(G, h, k, 4096, rng)
            W = moment_matrix(spec.exponents, G, h, np.random.default_rng(0), discrete)
        else:
            levels = [np.array([-1.0, 1.0]) if d else np.linspace(-1, 1, 5) for d in discrete]
            if np.prod([len(v) for v in levels]) <= 15625:
                pts = np.array(list(itertools.product(*levels)))
            else:
                pts = rng.uniform(-1, 1, size=(4096, k))
                if k <= 12:
                    pts = np.vstack([pts, np.array(list(itertools.product((-1.0, 1.0), repeat=k)))])
            W = moment_matrix(spec.exponents, discrete=discrete)
        pts[:, discrete] = np.where(pts[:, discrete] < 0, -1.0, 1.0)
        F = monomials(np.asarray(pts, dtype=float), spec.exponents)
        v = np.einsum("ij,jk,ik->i", F, XtXi, F)
        pv = {"min": float(v.min()), "mean": float(np.trace(XtXi @ W)), "max": float(v.max())}
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
        terms=tuple(terms), runs=n, rank=rank, df_error=df_error, estimable=est,
        inestimable=tuple(t for t, e in zip(terms, estimable) if not e), alias_matrix=alias_df, vif=vif_s,
        correlation=corr, prediction_variance=pv, power=power, delta=float(delta), alpha=float(alpha),
        second_order=_second_order(design),
    )


__all__ = ["DesignEvaluation", "evaluate"]
