"""The effects view on a count response's fit (a ``GlmFit``): effects as changes in pass rate (or rate) at the
centre and on the link scale, likelihood-ratio tests, link-scale coefficients with odds or rate ratios, and the
overdispersion check in words. Lenth's method and the half-normal plot are for least-squares effects; the view
says so instead of drawing them.
"""

from __future__ import annotations

import html

from . import _count_display as counts

LINK_SCALE = {"logit": "log-odds", "probit": "probit (normal quantile)", "log": "log rate"}


def effects_html(fit) -> str:
    """The effects at the centre in words and a table: each coded variable from -1 to +1, the others at 0."""
    from .effects_view import table_html

    k = counts.scale(fit)
    unit = "percentage points" if counts.family(fit) == "binomial" else counts.units(fit, "")
    table = fit.effects.copy()
    for column in ("at_low", "at_centre", "at_high", "change"):
        table[column] = table[column] * k
    table = table.rename(columns={"link_effect": f"effect ({LINK_SCALE[fit.link]})", "at_low": "at low",
                                  "at_centre": "at centre", "at_high": "at high", "change": f"change ({unit})"})
    what = "pass rate (%)" if counts.family(fit) == "binomial" else "rate"
    return (f"<b>Effects at the centre</b>: the {what} with one factor at its low and high end and every other "
            f"at its centre, and the change; the link-scale effect is twice the coefficient. "
            f"Half-normal plot and Lenth's method: for least-squares effects only; judge the terms of this "
            f"{html.escape(counts.family(fit))} fit by the likelihood-ratio tests below."
            + table_html(table, "lw-table lw-count-effects"))


def bars(fit, measure: str):
    """(values, axis label) of the ranked chart: |change| at the centre in shown units, or |z|."""
    if measure == "effect":
        unit = "percentage points" if counts.family(fit) == "binomial" else "rate"
        return (fit.effects["change"] * counts.scale(fit)).abs(), f"|change at the centre| ({unit})"
    return fit.coefficients["z"].drop(index="Intercept", errors="ignore").abs(), "|z|"


def anova_html(fit) -> str:
    from .effects_view import table_html

    frame = fit.anova.rename(columns={"df": "df", "lr_chi2": "likelihood-ratio chi-square", "p_value": "p"})
    return ("<b>Likelihood-ratio (deviance) tests</b> (each term after every term that does not contain it) "
            f"<p class='lw-overdispersion'>{html.escape(fit.overdispersion)}</p>"
            + table_html(frame, "lw-table lw-anova-table"))


def coefficients_html(fit) -> str:
    from .effects_view import table_html

    frame = fit.coefficients.rename(columns={
        "estimate": "estimate (coded)", "std_error": "std. error", "p_value": "p", "ci_low": "95% CI low",
        "ci_high": "95% CI high", "odds_ratio": "odds ratio", "odds_ratio_low": "OR 95% low",
        "odds_ratio_high": "OR 95% high", "rate_ratio": "rate ratio", "rate_ratio_low": "RR 95% low",
        "rate_ratio_high": "RR 95% high"})
    ratio = {"logit": " and odds ratios per coded unit", "log": " and rate ratios per coded unit"}.get(fit.link, "")
    notes = "".join(f"<p class='lw-fit-note'>{html.escape(n)}</p>" for n in getattr(fit, "notes", ()))
    return (f"<b>Coefficients</b> ({LINK_SCALE[fit.link]} scale, coded units: -1 at low, +1 at high{ratio}; Wald z "
            "tests and intervals)" + notes + table_html(frame, "lw-table lw-coefficient-table"))
