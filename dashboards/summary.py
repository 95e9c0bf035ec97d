"""The study in words, for people who will not read a coefficient table.

Used by the read-only dashboard and the offline export, so both say the same thing.
Also the study fingerprint: a SHA-256 over the runs, the models and the exclusions, shown
on every published page so a reader can check which version of the study they are looking at.
"""

from __future__ import annotations

import hashlib
import html
import json

import numpy as np

#: The caution every stakeholder page carries.
CAUTION = (
    "<b>Caution.</b> Predictions hold only inside the tested region. Confirm with validation runs "
    "before changing a process. Defer to your site's safety review, local codes and licensed practice."
)


#: Inline style of the caution banner (a dashboard page has no stylesheet of ours).
CAUTION_STYLE = "background:#fff4e0;border-left:5px solid #E69F00;padding:0.5em 0.9em;margin:0.5em 0"


def caution_html() -> str:
    """The caution banner as an HTML block."""
    return f'<div class="lw-caution" style="{CAUTION_STYLE}">{CAUTION}</div>'


def _num(value: float, digits: int = 4) -> str:
    if value != value:
        return "not available"
    return f"{value:.{digits}g}"


def fingerprint(data, models: dict, exclusions: dict) -> str:
    """SHA-256 (first 16 hex digits) of the runs, the models and the exclusions.

    Any change to a value, a model or an exclusion changes it; moving the sliders does not.
    """
    digest = hashlib.sha256()
    digest.update(data.to_csv(index=True, float_format="%.17g").encode("utf-8"))
    digest.update(json.dumps({str(k): str(v) for k, v in sorted(models.items())}, sort_keys=True).encode())
    digest.update(json.dumps({str(k): str(v) for k, v in exclusions.items()}, sort_keys=True).encode())
    return digest.hexdigest()[:16]


def is_split_plot(fit) -> bool:
    """True for a split-plot (REML) fit, whose error has a whole-plot and a residual part."""
    return hasattr(fit, "variance_components") and hasattr(fit, "df_whole_plot")


def is_count(fit) -> bool:
    """True for a count response's fit (binomial or Poisson GLM)."""
    return getattr(fit, "kind", None) == "glm"


def error_numbers(fit) -> tuple[float, int]:
    """(s, df) of a fit for the pages: least squares: s and its df; split-plot: the SD of one new run (both
    variance components) and the whole-plot stratum df its intervals use; a count: the square root of the
    Pearson dispersion and the residual df."""
    if is_count(fit):
        return float(np.sqrt(fit.dispersion)), int(fit.df_resid)
    if is_split_plot(fit):
        return float(np.sqrt(fit.variance_components.sum())), int(fit.df_whole_plot)
    return float(fit.s), int(fit.df_resid)


def split_plot_words(fit, units: str = "") -> str:
    """A split-plot fit's error in plain words: the whole-plot and run-to-run scatter, the tests' strata."""
    unit = f" {units}" if units else ""
    comp = fit.variance_components
    zero = " (estimated at zero)" if "whole_plot" in fit.zero_components else ""
    return (
        f"Split-plot analysis (REML), because some factors were reset only between whole plots: whole plots "
        f"scatter with a standard deviation of {_num(float(np.sqrt(comp['whole_plot'])), 3)}{unit}{zero} and runs "
        f"within a whole plot with {_num(float(np.sqrt(comp['residual'])), 3)}{unit}; a new run carries both. "
        f"Terms of the hard-to-change factors are judged on {fit.df_whole_plot} whole-plot degrees of freedom, "
        f"the others on {fit.df_residual}."
    )


def count_words(fit) -> str:
    """A count fit in plain words: what the mean is, how its intervals are made, the overdispersion check."""
    kind = ("pass/fail counts (binomial): the mean is the pass rate, shown as a percentage" if fit.family == "binomial"
            else "counts (Poisson): the mean is the rate per unit of exposure")
    return (f"A generalised linear model for {kind}, with a {fit.link} link, fitted on {fit.n} runs (deviance "
            f"{_num(fit.deviance)} on {fit.df_resid} degrees of freedom). Its confidence intervals are made on the "
            f"link scale and transformed, so they never leave the valid range. {fit.overdispersion} "
            f"{fit.new_observation_note}")


def quality_words(fit, units: str = "") -> str:
    """Fit quality in plain words: share of variation explained, typical scatter of a new run."""
    unit = f" {units}" if units else ""
    if is_count(fit):
        return count_words(fit)
    if is_split_plot(fit):
        return split_plot_words(fit, units)
    if fit.df_resid <= 0:
        return (
            f"The model has as many terms as runs ({fit.n}), so there is nothing left to judge its error by: "
            "intervals cannot be given."
        )
    share = fit.r_squared
    if share >= 0.9:
        verdict = "describes the runs closely"
    elif share >= 0.7:
        verdict = "describes the runs fairly well"
    elif share >= 0.4:
        verdict = "describes the runs only roughly"
    else:
        verdict = "describes the runs poorly"
    return (
        f"The model {verdict}: it accounts for {share:.0%} of the run-to-run variation "
        f"({fit.r_squared_adj:.0%} after allowing for the number of terms). Runs scatter about the model with a "
        f"standard deviation of {_num(fit.s, 3)}{unit}, judged from {fit.df_resid} degrees of freedom."
    )


def goal_words(goal: dict | None) -> str:
    if not goal:
        return ""
    kind = str(goal.get("goal", ""))
    if kind.startswith("max"):
        return "goal: as high as possible"
    if kind.startswith("min"):
        return "goal: as low as possible"
    if kind.startswith("target") and goal.get("target") is not None:
        return f"goal: on target at {_num(float(goal['target']))}"
    return f"goal: {html.escape(kind)}" if kind else ""


def summary_html(shared, fits: dict) -> str:
    """The study summary of a shared model (a view over a Study): factors and their tested ranges, runs, each
    response's model and fit quality."""
    from .study_source import goals_of, is_invented

    source, study = shared, shared.study
    goals = goals_of(study)
    parts = []
    if is_invented(study):
        parts.append("<p><b>Invented data</b>, generated by a seeded script for demonstration. It describes no "
                     "real coating, powder, oven or process.</p>")
    factor_items = "".join(
        (f"<li><b>{html.escape(f.name)}</b>: tested at the levels "
         f"{html.escape(', '.join(str(level) for level in f.levels))}</li>") if getattr(f, "levels", ()) else
        f"<li><b>{html.escape(f.name)}</b>: tested from {_num(f.low)} to {_num(f.high)}"
        f"{' ' + html.escape(f.units) if f.units else ''}"
        f"{' (hard to change: held over whole plots)' if getattr(f, 'hard_to_change', False) else ''}</li>"
        for f in source.factors
    )
    n_runs = len(source.data)
    excluded = len(source.exclusions)
    runs = f"{n_runs} runs" + (f", of which {excluded} are left out of the fits with a recorded reason" if excluded
                               else "")
    stages = ""
    if "stage" in source.data.columns:
        counts = source.data["stage"].value_counts(sort=False)
        stages = " Runs by stage, in order: " + ", ".join(
            f"{html.escape(str(name))} ({count})" for name, count in counts.items()) + "."
    achieved = ""
    if study is not None:
        recorded = study.achieved()[[f.name for f in source.factors]].notna().any(axis=1).sum()
        if recorded:
            achieved = (f" {recorded} run(s) recorded an achieved setting that differs from the plan; the fits use "
                        "the achieved settings.")
    mixture = getattr(study, "mixture", None)
    if mixture is not None:  # a mixture study: the components, their bounds and the total come first
        unit = mixture.components[0].units
        factor_items = "".join(
            f"<li><b>{html.escape(c.name)}</b> (component): from {_num(lo)} to {_num(hi)}"
            f"{' ' + html.escape(c.units) if c.units else ''}</li>"
            for c, lo, hi in zip(mixture.components, mixture.declared_lows, mixture.declared_highs)) + factor_items
        parts.append(f"<p>{mixture.q} mixture components whose amounts sum to {_num(mixture.total)}"
                     f"{' ' + html.escape(unit) if unit else ''} in every blend, {len(source.factors)} process "
                     f"factors, {runs}.{stages}{achieved}</p><ul>{factor_items}</ul>")
    else:
        parts.append(f"<p>{len(source.factors)} factors, {runs}.{stages}{achieved}</p><ul>{factor_items}</ul>")
    for name in source.responses:
        fit = fits.get(name)
        units = source.units.get(name, "")
        goal = goal_words(goals.get(name))
        head = f"<b>{html.escape(name)}</b>{' (' + html.escape(units) + ')' if units else ''}"
        head += f", {goal}" if goal else ""
        if fit is None:
            parts.append(f"<p>{head}: no fit yet (too few runs with a value, or the model cannot be estimated).</p>")
            continue
        terms = [t for t in fit.terms if t != "Intercept"]
        model = ", ".join(html.escape(t) for t in terms) or "a constant only"
        missing = n_runs - fit.n - sum(1 for run in source.exclusions)
        gaps = f" {missing} run(s) have no recorded value and are not used." if missing > 0 else ""
        parts.append(
            f"<p>{head}: fitted on {fit.n} runs with the terms {model}.{gaps} "
            f"{html.escape(quality_words(fit, units))}</p>"
        )
    return "".join(parts)


def fit_numbers(fit) -> dict:
    """Plain numbers of a fit for machine checks (full precision)."""
    return {
        "terms": list(fit.terms),
        "beta": [float(b) for b in np.asarray(fit.beta)],
        "s": error_numbers(fit)[0],
        "n": int(fit.n),
    }
