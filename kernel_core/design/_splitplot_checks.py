"""Checks around split-plot designs: designs that cannot restrict their run order, and too few whole plots.

Only ``full_factorial`` and ``fractional_factorial`` (two-level) and ``optimal_design(..., whole_plots=N)`` build
whole plots. Every other design family refuses hard-to-change factors with an error rather than ignoring the
flag: a completely randomised run order would reset the hard-to-change factor on every run, which is exactly
what the flag says the process cannot do.

A whole-plot term (one constant within every whole plot) is tested against the whole-plot stratum, whose degrees
of freedom are the number of whole plots minus the rank of [block indicators, whole-plot model columns] (the
between-within rule of ``levelwise.model._mixed``). A design that leaves none cannot test those terms; it is
made, with a :class:`~levelwise.LevelwiseWarning` that says so.
"""

from __future__ import annotations

import warnings

import numpy as np

from .._errors import LevelwiseError, LevelwiseWarning

#: The design functions that make split-plot designs, as the refusal names them.
SPLIT_PLOT_DESIGNS = ("full_factorial and fractional_factorial (two-level factors), and "
                      "optimal_design(..., whole_plots=N)")


def refuse_hard_to_change(factors, design_name: str) -> None:
    """Raise when a factor of *factors* is hard to change: the *design_name* family has no whole plots."""
    hard = [f.name for f in factors if getattr(f, "hard_to_change", False)]
    if not hard:
        return
    raise LevelwiseError(
        f"{design_name} cannot hold hard-to-change factors over whole plots; got hard_to_change=True for "
        f"{hard}. Split-plot designs (whole plots with a restricted run order) are made by {SPLIT_PLOT_DESIGNS}. "
        f"For a design with every run reset independently, declare {hard} with hard_to_change=False."
    )


def whole_plot_df(rows, plots, blocks=None) -> int:
    """Whole-plot stratum df: whole plots - rank of [block indicators, columns of *rows* constant in each plot].

    *rows* is the model matrix (one row per run, the intercept included or not); *plots* labels each run's
    whole plot; *blocks* (optional) each run's block.
    """
    rows = np.asarray(rows, dtype=float)
    _, codes = np.unique(np.asarray(plots), return_inverse=True)
    W = int(codes.max()) + 1
    constant = []
    for j in range(rows.shape[1]):
        col = rows[:, j]
        lo = np.full(W, np.inf)
        hi = np.full(W, -np.inf)
        np.minimum.at(lo, codes, col)
        np.maximum.at(hi, codes, col)
        if np.all(hi - lo <= 1e-9 * max(1.0, float(np.abs(col).max(initial=0.0)))):
            constant.append(col)
    if blocks is None:
        blocks = np.ones(len(codes))
    _, bcodes = np.unique(np.asarray(blocks), return_inverse=True)
    Zb = (bcodes[:, None] == np.arange(int(bcodes.max()) + 1)[None, :]).astype(float)
    M = np.column_stack([Zb, *constant]) if constant else Zb
    return W - int(np.linalg.matrix_rank(M))


def _two_level_rows(coded, max_order):
    """Main effects (and two-factor interactions when *max_order* is 2) of coded columns, no intercept."""
    import itertools

    k = coded.shape[1]
    cols = [coded[:, j] for j in range(k)]
    if max_order >= 2:
        cols += [coded[:, a] * coded[:, b] for a, b in itertools.combinations(range(k), 2)]
    return np.column_stack(cols)


def warn_few_whole_plots(design, rows=None, model_text=None, stacklevel=3) -> None:
    """Warn when *design*'s whole plots leave no degrees of freedom for testing its whole-plot terms.

    With *rows* (the model matrix of the model the design was made for, named *model_text*) that model is
    judged; otherwise the model of main effects and two-factor interactions, and the main effects alone.
    """
    table = design.table
    plots = table["whole_plot"].to_numpy()
    blocks = table["block"].to_numpy() if "block" in table.columns else None
    W = len(np.unique(plots))
    if rows is not None:
        df = whole_plot_df(rows, plots, blocks)
        if df >= 1:
            return
        detail = f"the model {model_text!r} leaves {df} degrees of freedom for the whole-plot error"
    else:
        coded = design.coded.to_numpy(dtype=float)
        df2 = whole_plot_df(_two_level_rows(coded, 2), plots, blocks)
        if df2 >= 1:
            return
        df1 = whole_plot_df(_two_level_rows(coded, 1), plots, blocks)
        terms = design.metadata.get("whole_plot_effects") or []
        detail = (f"a model of main effects and two-factor interactions leaves {max(df2, 0)} degrees of freedom "
                  f"for the whole-plot error (whole-plot terms: {terms}); main effects alone leave {max(df1, 0)}")
    hard = design.metadata.get("hard_to_change") or [f.name for f in design.factors if f.hard_to_change]
    warnings.warn(
        f"This split-plot design has only {W} whole plots: {detail}, so the whole-plot terms (of the "
        f"hard-to-change factors {hard}) cannot all be tested: their F tests, and the REML estimate of the "
        "whole-plot variance, need at least 1 whole-plot error degree of freedom. Add replicates or whole plots.",
        LevelwiseWarning,
        stacklevel=stacklevel,
    )
