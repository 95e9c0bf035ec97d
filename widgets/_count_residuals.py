"""The residual inspector on a count response's fit (a ``GlmFit``): deviance and Pearson residuals.

The plots keep their meaning: the normal plot shows the standardized deviance residuals, the plots against fitted
value (the probability as a percentage, or the rate), run order and each factor show deviance residuals (or
Pearson residuals), and the leverage plot shows standardized Pearson residuals with the Cook's distance contours
(Cook's distance of a GLM: ``r_P^2 h / (p (1 - h))`` in the standardized Pearson residual ``r_P``, the same curve
as for least squares). Excluded runs are drawn with their residuals under the current fit.
"""

from __future__ import annotations

import html

import numpy as np

from . import _count_display as counts
from .style import fmt


def plot_options(factors) -> list:
    return [
        ("Normal probability of standardized deviance residuals", "normal"),
        ("Deviance residual against fitted value", "fitted"),
        ("Pearson residual against fitted value", "pearson"),
        ("Deviance residual against run order", "order"),
        *[(f"Deviance residual against {f.label}", f"factor:{f.name}") for f in factors],
        ("Leverage against standardized Pearson residual", "leverage"),
    ]


def frame(fit):
    """The diagnostics in the inspector's column names: ``fitted`` (shown units), ``residual`` (deviance),
    ``pearson``, ``studentized`` (standardized deviance; standardized Pearson for the leverage plot as
    ``leverage_y``), ``normal_quantile``, ``leverage``, ``cooks_distance``."""
    d = fit.diagnostics
    out = d[["normal_quantile", "leverage", "cooks_distance"]].copy()
    out["fitted"] = d["fitted_mean"] * counts.scale(fit)
    out["residual"] = d["deviance_residual"]
    out["pearson"] = d["pearson_residual"]
    out["studentized"] = d["standardized_deviance"]
    out["leverage_y"] = d["standardized_pearson"]
    return out


def excluded(fit, rows):
    """(fitted in shown units, deviance residual, Pearson residual) of excluded *rows* under *fit*."""
    if not len(rows):
        return np.array([]), np.array([]), np.array([])
    values = fit.residuals_of(rows)
    return (values["fitted_mean"].to_numpy() * counts.scale(fit), values["deviance_residual"].to_numpy(),
            values["pearson_residual"].to_numpy())


def labels(fit, shown_units: str) -> dict:
    unit = f" ({shown_units})" if shown_units else ""
    return {"normal": ("Standardized deviance residual", "Normal quantile"),
            "leverage": ("Leverage", "Standardized Pearson residual (dashed: Cook's distance 0.5 and 1)"),
            "residual": "Deviance residual", "pearson": "Pearson residual",
            "fitted": f"Fitted {'pass rate' if counts.family(fit) == 'binomial' else 'rate'}{unit}"}


def detail_lines(fit, d, shown_units: str) -> list:
    unit = f" {html.escape(shown_units)}" if shown_units else ""
    return [
        f"Fitted {'pass rate' if counts.family(fit) == 'binomial' else 'rate'}: "
        f"{fmt(d['fitted_mean'] * counts.scale(fit))}{unit} (expected count {fmt(d['fitted'])})",
        f"Deviance residual: {fmt(d['deviance_residual'])}; Pearson residual: {fmt(d['pearson_residual'])} "
        f"(standardized: {fmt(d['standardized_deviance'])} and {fmt(d['standardized_pearson'])})",
        f"Leverage: {fmt(d['leverage'])}; Cook's distance: {fmt(d['cooks_distance'])}",
    ]


def box_cox_html(fit) -> str:
    return ("<b>Power transformation (Box–Cox)</b>: does not apply to a count response; its "
            f"{html.escape(counts.family(fit))} variance is part of the model ({html.escape(fit.overdispersion)})")
