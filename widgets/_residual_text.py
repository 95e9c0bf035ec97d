"""The residual inspector's text blocks: the runs left out, and the power-transformation (Box–Cox) suggestion."""

from __future__ import annotations

import html

from levelwise import LevelwiseError

from . import _count_display as counts
from . import _count_residuals as count_residuals
from .style import fmt


def exclusions_html(exclusions: dict) -> str:
    items = sorted(exclusions.items(), key=lambda kv: str(kv[0]))
    if not items:
        return "No runs left out."
    rows = "".join(f"<li>Run {html.escape(str(r))}: {html.escape(why)}</li>" for r, why in items)
    return f"<b>Runs left out of every fit</b><ul>{rows}</ul>"


def box_cox_html(fit) -> str:
    """``Fit.box_cox`` in words; a count fit says why it does not apply, a fit without it why not."""
    if fit is None:
        return ""
    if counts.family(fit):
        return count_residuals.box_cox_html(fit)
    try:
        result = fit.box_cox()
    except LevelwiseError as exc:
        return f"<b>Power transformation (Box–Cox)</b>: not available ({html.escape(str(exc))})"
    return (
        f"<b>Power transformation (Box–Cox)</b>: best λ = {fmt(result.lam, 3)} "
        f"({result.level:.0%} interval {fmt(result.ci_low, 3)} to {fmt(result.ci_high, 3)}). "
        f"{html.escape(result.suggestion)}"
    )
