"""Backward elimination of model terms, keeping the model hierarchical, and refits on a subset of terms."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ._fitview import require_continuous


def _term_formula(row, names) -> str:
    parts = []
    for name, power in zip(names, row):
        if power == 1:
            parts.append(f"`{name}`")
        elif power > 1:
            parts.append(f"I(`{name}`**{int(power)})")
    return ":".join(parts)


def formula_of(exponents, names) -> str:
    """A Wilkinson formula for the terms in *exponents* (rows over *names*), backticks around every name.

    Examples
    --------
    >>> formula_of([[0, 0], [1, 0], [1, 1], [2, 0]], ["A", "B"])
    '`A` + `A`:`B` + I(`A`**2)'
    """
    rows = [np.asarray(r, dtype=int) for r in exponents]
    has_intercept = any(not r.any() for r in rows)
    parts = [_term_formula(r, names) for r in rows if r.any()]
    if not parts:
        return "1" if has_intercept else "0"
    return " + ".join(parts) if has_intercept else "0 + " + " + ".join(parts)


def _natural_settings(fit) -> pd.DataFrame:
    """The natural settings of the fit's runs: stored on the fit, or read back from its linear columns."""
    exponents = np.asarray(fit.spec.exponents)
    names = list(fit.factor_names)
    stored = getattr(fit, "settings", None)
    if isinstance(stored, np.ndarray) and stored.shape == (len(fit.runs), len(names)):
        return pd.DataFrame(stored, columns=names, index=fit.runs).assign(run=np.asarray(fit.runs))
    columns = {}
    for j, name in enumerate(names):
        unit = np.zeros(len(names), dtype=int)
        unit[j] = 1
        match = np.flatnonzero((exponents == unit).all(axis=1))
        if exponents[:, j].any() and match.size == 0:
            raise LevelwiseError(
                f"Cannot refit without the original data: factor {name!r} has no linear term in the model "
                f"{fit.spec.formula!r}, so its settings cannot be read back. Pass the data with data=..."
            )
        if match.size:
            coded = np.asarray(fit.X, dtype=float)[:, match[0]]
            columns[name] = coded * fit.coding.scale[j] + fit.coding.center[j]
    return pd.DataFrame(columns, index=fit.runs).assign(run=np.asarray(fit.runs))


def refit(fit, exponents, data: pd.DataFrame | None = None):
    """Fit the model with the terms in *exponents* (rows over the fit's factors) to the same runs.

    The coding (factor ranges), the response, the runs used and the confidence level are kept.

    Parameters
    ----------
    fit : Fit
    exponents : array-like (p', k)
    data : pandas.DataFrame, optional
        The original data. Without it, the settings are read back from the fit's linear columns.
    """
    from ..design import Factor
    from ._fit import fit as fit_model

    require_continuous(fit, "Refitting on a subset of terms")
    names = list(fit.factor_names)
    if data is None:
        frame = _natural_settings(fit)
    else:
        from ._inputs import _run_ids

        position = pd.Series(np.arange(len(data)), index=_run_ids(data))
        frame = data.iloc[position.loc[fit.runs].to_numpy()][[n for n in names if n in data.columns]].copy()
    frame[fit.response] = np.asarray(fit.y, dtype=float)
    frame["run"] = np.asarray(fit.runs)  # the refit names its runs by the same run ids
    low, high = np.asarray(fit.coding.low, float), np.asarray(fit.coding.high, float)
    center, scale = np.asarray(fit.coding.center, float), np.asarray(fit.coding.scale, float)
    # coding="none" stores centre 0 and scale 1; "auto" stores the factor's centre and half-range.
    natural_units = not np.allclose([center, scale], [(low + high) / 2, (high - low) / 2], rtol=1e-12, atol=0)
    if np.any(low >= high):
        bad = names[int(np.flatnonzero(low >= high)[0])]
        raise LevelwiseError(f"Cannot refit: factor {bad!r} has no range (low >= high) in the fit's coding.")
    factors = [Factor(name, lo, hi) for name, lo, hi in zip(names, low, high)]
    formula = formula_of(exponents, names)
    return fit_model(frame, fit.response, formula, factors=factors, coding="none" if natural_units else "auto",
                     level=fit.level)


def _contains(big, small) -> bool:
    """True when term *small* is a proper part of term *big* (A in A:B, A in A^2)."""
    return bool(np.all(small <= big) and np.any(small < big))


@dataclass(frozen=True, eq=False)
class Reduction:
    """The result of :func:`reduce`: the final fit and one row per removed term.

    Unpacks as ``final_fit, steps = reduce(...)``.

    Attributes
    ----------
    fit : Fit
        The final model.
    steps : pandas.DataFrame
        Per removal: ``step``, ``term``, ``estimate``, ``t``, ``p_value`` (in the model it was
        removed from), ``df_resid`` and ``s`` of that model, and ``remaining`` (the terms left).
    initial : Fit
    alpha : float
    hierarchy : bool
    """

    fit: object
    steps: pd.DataFrame
    initial: object
    alpha: float
    hierarchy: bool

    def __iter__(self):
        return iter((self.fit, self.steps))


def reduce(fit, alpha: float = 0.05, hierarchy: bool = True, data: pd.DataFrame | None = None) -> Reduction:
    """Backward elimination: drop the least significant term while its p-value exceeds *alpha*.

    At each step the removable term with the largest p-value (t test on the current fit) is
    dropped and the model is refitted. With ``hierarchy=True`` a term is removable only
    when no remaining term contains it (A stays while A:B or A^2 stays). The intercept is
    never removed. With categorical factors each term is tested as one term by its partial F
    and leaves with all its columns (``levelwise.model._term_tests.reduce_terms``).

    Parameters
    ----------
    fit : Fit
    alpha : float
        Terms with p <= alpha stay.
    hierarchy : bool
    data : pandas.DataFrame, optional
        The original data, needed only when a factor has no linear term in the model.

    Raises
    ------
    LevelwiseError
        A bad *alpha*, or a fit with no residual degrees of freedom (use Lenth's method there).
    """
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float, np.floating)) or not 0 < alpha < 1:
        raise LevelwiseError(
            f"The 'alpha' parameter of reduce must be a number in the open interval (0, 1). Got {describe(alpha)} "
            "instead."
        )
    if getattr(fit, "kind", None) in ("glm", "mixed"):  # likelihood-ratio (issue 15) / stratum F tests (issue 13)
        final, steps = fit.reduce(alpha, hierarchy)
        return Reduction(fit=final, steps=steps, initial=fit, alpha=float(alpha), hierarchy=bool(hierarchy))
    if getattr(fit, "contrasts", ()):  # categorical factors: whole terms by partial F (issue 14)
        from ._term_tests import reduce_terms

        return reduce_terms(fit, alpha, hierarchy, data)
    require_continuous(fit, "Backward elimination (reduce)")
    if fit.df_resid <= 0:
        raise LevelwiseError(
            f"The model {fit.spec.formula!r} has no residual degrees of freedom ({fit.n} runs, {fit.p} terms), "
            "so terms have no p-values to eliminate by. Use Lenth's method (lenth) or drop terms by hand."
        )
    base = _natural_settings(fit) if data is None else data
    current = fit
    rows = []
    while True:
        exponents = np.asarray(current.spec.exponents)
        coef = current.coefficients
        candidates = []
        protected = set(getattr(current, "protected_terms", ()))  # mixture fits keep every linear blending term
        for i, row in enumerate(exponents):
            if not row.any() or current.spec.terms[i] in protected:
                continue
            if hierarchy and any(_contains(other, row) for k, other in enumerate(exponents) if k != i):
                continue
            candidates.append(i)
        if not candidates:
            break
        pvalues = coef["p_value"].to_numpy()[candidates]
        worst = int(np.argmax(pvalues))
        i = candidates[worst]
        if not pvalues[worst] > alpha:
            break
        keep = np.delete(exponents, i, axis=0)
        term = current.spec.terms[i]
        rows.append(
            {
                "step": len(rows) + 1,
                "term": term,
                "estimate": float(coef["estimate"].iloc[i]),
                "t": float(coef["t"].iloc[i]),
                "p_value": float(pvalues[worst]),
                "df_resid": int(current.df_resid),
                "s": float(current.s),
                "remaining": tuple(t for k, t in enumerate(current.spec.terms) if k != i),
            }
        )
        refit_terms = getattr(current, "refit_terms", None)  # mixture fits refit themselves
        current = refit_terms(keep) if refit_terms is not None else refit(current, keep, data=base)
    steps = pd.DataFrame(
        rows, columns=["step", "term", "estimate", "t", "p_value", "df_resid", "s", "remaining"]
    )
    return Reduction(fit=current, steps=steps, initial=fit, alpha=float(alpha), hierarchy=bool(hierarchy))


__all__ = ["Reduction", "formula_of", "reduce", "refit"]
