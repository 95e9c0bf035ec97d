"""Whole-term tests for fits with categorical factors, backward elimination by term, and the curvature indicator.

* **Term tests.** A term of a categorical factor with L levels has L - 1 contrast columns (more for its
  interactions); it is tested as one term by the partial F of the ANOVA: after every term that does not
  contain it (the hierarchy rule of :mod:`levelwise.model._anova`, often called "type II").
* **Backward elimination by term** (:func:`reduce_terms`): the removable term with the largest partial-F
  p-value leaves as a whole, all its columns at once; for a one-column term the partial F is t^2 and the
  p-value that of the t test, so the order is the one :func:`levelwise.reduce` uses on continuous models.
* **Curvature indicator** (:func:`centre_indicator`): runs at the centre (coded 0) of every continuous factor
  that has centre runs, the other runs at the corners (+-1) of those factors. Continuous factors never set at
  0 (discrete two-level settings) and categorical factors may take any level at the centre runs, so centre runs
  replicated at each level of a discrete factor still give the 1-df test of the indicator.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe


def term_tests(fit) -> pd.DataFrame:
    """The partial F test of every model term (intercept excluded) as one term.

    Returns
    -------
    pandas.DataFrame
        Indexed by term: ``df`` (its columns), ``sum_sq``, ``mean_sq``, ``F``, ``p_value`` (the term rows of
        :attr:`Fit.anova`).
    """
    labels = [label for label, _ in fit.groups]
    return fit.anova.loc[labels, ["df", "sum_sq", "mean_sq", "F", "p_value"]].copy()


def _frame(fit, data):
    """Settings (natural units; level labels for categorical factors) and response of the fit's runs."""
    names = list(fit.factor_names)
    if data is not None:
        from ._inputs import _run_ids

        position = pd.Series(np.arange(len(data)), index=_run_ids(data))
        frame = data.iloc[position.loc[fit.runs].to_numpy()][[n for n in names if n in data.columns]].copy()
    else:
        settings = np.asarray(fit.run_settings)
        frame = pd.DataFrame(index=fit.runs)
        for j, name in enumerate(names):
            if name in fit.categories:
                levels = np.array(fit.categories[name], dtype=object)
                frame[name] = levels[settings[:, j].astype(int)]
            else:
                frame[name] = settings[:, j]
    frame[fit.response] = np.asarray(fit.y, dtype=float)
    frame["run"] = np.asarray(fit.runs)  # the refit names its runs by the same run ids
    return frame


def refit_terms(fit, group_rows, data=None):
    """Refit *fit* keeping the terms of ``fit.groups`` at positions *group_rows* (and the intercept if any)."""
    from ..design import Factor
    from ._fit import fit as fit_model
    from ._reduce import formula_of

    names = list(fit.factor_names)
    rows = [np.asarray(fit.group_exponents[g], dtype=int) for g in group_rows]
    if fit.spec.has_intercept:
        rows = [np.zeros(len(names), dtype=int)] + rows
    factors, natural_units = [], False
    for j, name in enumerate(names):
        if name in fit.categories:
            factors.append(Factor(name, levels=list(fit.categories[name])))
            continue
        low, high = float(fit.coding.low[j]), float(fit.coding.high[j])
        if not low < high:
            raise LevelwiseError(f"Cannot refit: factor {name!r} has no range (low >= high) in the fit's coding.")
        factors.append(Factor(name, low, high))
        if not np.isclose(fit.coding.scale[j], (high - low) / 2, rtol=1e-12, atol=0):
            natural_units = True
    return fit_model(_frame(fit, data), fit.response, formula_of(rows, names), factors=factors,
                     coding="none" if natural_units else "auto", level=fit.level)


def _contains(big, small) -> bool:
    return bool(np.all(small <= big) and np.any(small < big))


def reduce_terms(fit, alpha: float = 0.05, hierarchy: bool = True, data=None):
    """Backward elimination of whole terms by partial F (see the module docstring).

    Returns a :class:`levelwise.reduce.Reduction`; its ``steps`` have the columns of :func:`levelwise.reduce`
    (``estimate`` and ``t`` are NaN for a term of several columns) plus ``df`` and ``F`` of the term.
    """
    from ._reduce import Reduction

    if isinstance(alpha, bool) or not isinstance(alpha, (int, float, np.floating)) or not 0 < alpha < 1:
        raise LevelwiseError(
            f"The 'alpha' parameter of reduce must be a number in the open interval (0, 1). Got {describe(alpha)} "
            "instead."
        )
    if fit.df_resid <= 0:
        raise LevelwiseError(
            f"The model {fit.spec.formula!r} has no residual degrees of freedom ({fit.n} runs, {fit.p} terms), "
            "so terms have no p-values to eliminate by. Use Lenth's method (lenth) or drop terms by hand."
        )
    current = fit
    rows = []
    while True:
        exps = np.asarray(current.group_exponents, dtype=int)
        candidates = [g for g in range(len(exps))
                      if not (hierarchy and any(_contains(exps[h], exps[g]) for h in range(len(exps)) if h != g))]
        if not candidates:
            break
        tests = term_tests(current)
        pvalues = tests["p_value"].to_numpy()[candidates]
        if np.all(np.isnan(pvalues)):
            break
        worst = int(np.nanargmax(pvalues))
        g = candidates[worst]
        if not pvalues[worst] > alpha:
            break
        label, cols = current.groups[g]
        coef = current.coefficients
        single = len(cols) == 1
        rows.append({
            "step": len(rows) + 1,
            "term": label,
            "estimate": float(coef["estimate"].iloc[cols[0]]) if single else np.nan,
            "t": float(coef["t"].iloc[cols[0]]) if single else np.nan,
            "p_value": float(pvalues[worst]),
            "df_resid": int(current.df_resid),
            "s": float(current.s),
            "remaining": tuple(lab for h, (lab, _) in enumerate(current.groups) if h != g),
            "df": len(cols),
            "F": float(tests["F"].iloc[g]),
        })
        current = refit_terms(current, [h for h in range(len(exps)) if h != g], data=data)
    steps = pd.DataFrame(rows, columns=["step", "term", "estimate", "t", "p_value", "df_resid", "s", "remaining",
                                        "df", "F"])
    return Reduction(fit=current, steps=steps, initial=fit, alpha=float(alpha), hierarchy=bool(hierarchy))


def centre_indicator(fit):
    """The centre-run indicator of *fit* when the curvature test applies (see the module docstring), else None.

    It applies when the model has an intercept, every continuous factor in the model is at coded -1, 0 or +1
    in every run, each run is at 0 in all of the centred factors or in none of them, no centred factor is
    squared in the model, and the indicator is not already a combination of the model columns.
    """
    if not fit.spec.has_intercept or not len(fit.group_exponents):
        return None
    exps = np.asarray(fit.group_exponents)
    used = exps.any(axis=0)
    continuous = [j for j, name in enumerate(fit.factor_names) if used[j] and name not in fit.categories]
    if not continuous:
        return None
    settings = np.asarray(fit.run_settings, dtype=float)
    coded = (settings[:, continuous] - fit.coding.center[continuous]) / fit.coding.scale[continuous]
    at_zero = np.abs(coded) < 1e-9
    at_one = np.abs(np.abs(coded) - 1.0) < 1e-9
    if not np.all(at_zero | at_one):
        return None
    centred = at_zero.any(axis=0)
    if not centred.any() or (exps[:, np.asarray(continuous)[centred]] > 1).any():
        return None
    zero = at_zero[:, centred]
    centre = zero.all(axis=1)
    if not np.all(centre | ~zero.any(axis=1)) or not centre.any() or centre.all():
        return None
    X = np.asarray(fit.X, dtype=float)
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    Xs = X / norms
    with_indicator = np.column_stack([Xs, centre / np.sqrt(centre.sum())])
    if np.linalg.matrix_rank(with_indicator) <= np.linalg.matrix_rank(Xs):
        return None
    return centre


__all__ = ["centre_indicator", "reduce_terms", "refit_terms", "term_tests"]
