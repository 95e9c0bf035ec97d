"""Effects of two-level terms, Lenth's method and half-normal plot coordinates.

These work on saturated fits too (no residual degrees of freedom), which is the
usual case for an unreplicated two-level factorial fitted with every effect.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from .._stats import stats, t_ppf
from ._fitview import categorical_names


def _two_level_rows(fit) -> np.ndarray:
    """Indices of model columns that are products of distinct factors (no powers), intercept excluded.

    A term spread over several columns (a categorical factor with more than two levels) has no
    single effect and is left out.
    """
    exponents = np.asarray(fit.spec.exponents)
    keep = exponents.any(axis=1) & (exponents.max(axis=1, initial=0) <= 1)
    for _, columns in getattr(fit, "groups", None) or ():
        if len(columns) > 1:
            keep[list(columns)] = False
    return np.flatnonzero(keep)


def effects(fit) -> pd.Series:
    """Effects of the two-level terms: 2 x the coded coefficient.

    An effect is the change in the mean response from a term's low (-1) to its high
    (+1) level. Only terms that are products of distinct factors count; the intercept
    and squared terms are left out.

    Parameters
    ----------
    fit : Fit
        A fit in coded units.

    Returns
    -------
    pandas.Series
        Indexed by term in model order, named ``"effect"``.

    Examples
    --------
    >>> import pandas as pd
    >>> from levelwise import fit
    >>> d = pd.DataFrame({"A": [-1, 1, -1, 1], "B": [-1, -1, 1, 1], "y": [1.0, 3.0, 2.0, 4.5]})
    >>> effects(fit(d, "y", "A + B")).round(3).to_dict()
    {'A': 2.25, 'B': 1.25}
    """
    coding = fit.coding
    continuous = [name not in categorical_names(fit) for name in coding.names]
    low, high = np.asarray(coding.low, float)[continuous], np.asarray(coding.high, float)[continuous]
    center, scale = np.asarray(coding.center, float)[continuous], np.asarray(coding.scale, float)[continuous]
    if not np.allclose([center, scale], [(low + high) / 2, (high - low) / 2], rtol=1e-12, atol=0):
        raise LevelwiseError(
            "Effects need a fit in coded units (-1 at each factor's low, +1 at its high); this fit was made with "
            "coding='none'. Refit with coding='auto'."
        )
    rows = _two_level_rows(fit)
    terms = [fit.spec.terms[i] for i in rows]
    values = 2.0 * np.asarray(fit.beta, dtype=float)[rows]
    return pd.Series(values, index=pd.Index(terms, name="term"), name="effect")


@dataclass(frozen=True, eq=False)
class LenthResult:
    """Lenth's (1989) analysis of the effects of an unreplicated two-level design.

    Attributes
    ----------
    effects : pandas.Series
        The effects analysed (see :func:`effects`).
    s0 : float
        Initial scale estimate, 1.5 x median |effect|.
    pse : float
        Pseudo standard error, 1.5 x median of the |effects| below 2.5 s0.
    d : float
        Degrees of freedom, m / 3 for m effects.
    me, sme : float
        Margin of error and simultaneous margin of error.
    alpha : float
    table : pandas.DataFrame
        Per effect: ``effect``, ``abs_effect``, ``t_pse`` (effect / PSE), ``active`` (|effect| > ME),
        ``active_simultaneous`` (|effect| > SME).
    """

    effects: pd.Series
    s0: float
    pse: float
    d: float
    me: float
    sme: float
    alpha: float
    table: pd.DataFrame

    @property
    def active(self) -> tuple:
        """Terms whose |effect| exceeds the margin of error ME."""
        return tuple(self.table.index[self.table["active"]])

    @property
    def active_simultaneous(self) -> tuple:
        """Terms whose |effect| exceeds the simultaneous margin of error SME."""
        return tuple(self.table.index[self.table["active_simultaneous"]])


def lenth(fit, alpha: float = 0.05) -> LenthResult:
    """Lenth's (1989) pseudo standard error and margins of error for the effects of *fit*.

    With m effects c_j: s0 = 1.5 median|c_j|; PSE = 1.5 median{|c_j| : |c_j| < 2.5 s0};
    d = m/3; ME = t(1 - alpha/2; d) PSE; SME = t(gamma; d) PSE with
    gamma = (1 + (1 - alpha)^(1/m)) / 2 (Lenth 1989, Technometrics 31(4) 469-473).

    Parameters
    ----------
    fit : Fit
    alpha : float
        Error rate, in (0, 1); 0.05 gives the published 95 % margins.

    Raises
    ------
    LevelwiseError
        Fewer than three effects, all effects zero, or a bad *alpha*.
    """
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float, np.floating)) or not 0 < alpha < 1:
        raise LevelwiseError(
            "The 'alpha' parameter of lenth must be a number in the open interval (0, 1). "
            f"Got {describe(alpha)} instead."
        )
    eff = effects(fit)
    m = len(eff)
    if m < 3:
        raise LevelwiseError(
            f"Lenth's method needs at least 3 effects of two-level terms; the model {fit.spec.formula!r} has {m}."
        )
    absolute = np.abs(eff.to_numpy())
    s0 = 1.5 * float(np.median(absolute))
    small = absolute[absolute < 2.5 * s0]
    if s0 == 0 or small.size == 0:
        raise LevelwiseError(
            "Lenth's method cannot estimate a pseudo standard error: more than half of the effects are exactly 0."
        )
    pse = 1.5 * float(np.median(small))
    d = m / 3.0
    me = float(t_ppf(1.0 - alpha / 2.0, d)) * pse
    gamma = (1.0 + (1.0 - alpha) ** (1.0 / m)) / 2.0
    sme = float(t_ppf(gamma, d)) * pse
    table = pd.DataFrame(
        {
            "effect": eff.to_numpy(),
            "abs_effect": absolute,
            "t_pse": eff.to_numpy() / pse,
            "active": absolute > me,
            "active_simultaneous": absolute > sme,
        },
        index=eff.index,
    )
    return LenthResult(effects=eff, s0=s0, pse=pse, d=d, me=me, sme=sme, alpha=float(alpha), table=table)


def half_normal(fit) -> pd.DataFrame:
    """Half-normal plot coordinates of the effects of *fit*.

    The m absolute effects are sorted ascending; the i-th (i = 1..m) is plotted against
    the half-normal quantile Phi^-1(0.5 + 0.5 p_i) = ``scipy.stats.halfnorm.ppf(p_i)`` at the
    plotting position p_i = (i - 0.5) / m. That position is the usual (Hazen) choice for
    probability plots (common practice); half-normal plots of effects are due to Daniel
    (1959), Technometrics 1(4) 311-341 (citation from memory).

    Returns
    -------
    pandas.DataFrame
        Columns ``term``, ``effect``, ``abs_effect``, ``position`` (p_i) and ``quantile``,
        sorted by ``abs_effect``.
    """
    eff = effects(fit)
    m = len(eff)
    if m == 0:
        raise LevelwiseError(f"The model {fit.spec.formula!r} has no two-level terms to plot.")
    order = np.argsort(np.abs(eff.to_numpy()), kind="stable")
    position = (np.arange(1, m + 1) - 0.5) / m
    return pd.DataFrame(
        {
            "term": eff.index[order],
            "effect": eff.to_numpy()[order],
            "abs_effect": np.abs(eff.to_numpy()[order]),
            "position": position,
            "quantile": stats.halfnorm.ppf(position),
        }
    )


__all__ = ["LenthResult", "effects", "half_normal", "lenth"]
