"""How the views show a count response's fit (a ``GlmFit``): probabilities as percentages, rates per unit of
exposure, bands from the intervals made on the link scale and transformed (asymmetric), no prediction interval.

Every view asks here instead of testing the fit's type: :func:`scale` is the factor from the kernel's numbers to
the shown ones (100 for a probability), :func:`units` the shown units, :func:`bands` the lower and upper edges of
a trace's confidence and prediction bands (None where a fit gives no prediction interval).
"""

from __future__ import annotations

import html

import numpy as np


def family(fit) -> str | None:
    """``"binomial"`` or ``"poisson"`` for a count fit, None for a measured response."""
    return getattr(fit, "family", None) if getattr(fit, "kind", None) == "glm" else None


def scale(fit) -> float:
    """Kernel number -> shown number: 100 for a probability (shown as a percentage), else 1."""
    return 100.0 if family(fit) == "binomial" else 1.0


def units(fit, recorded: str = "") -> str:
    """The units a view shows for *fit*'s predictions: ``%`` for a probability, the count per unit of exposure
    for a rate, else the response's *recorded* units."""
    kind = family(fit)
    if kind == "binomial":
        return "%"
    if kind == "poisson":
        exposure = getattr(fit, "exposure_name", None)
        what = recorded or "count"
        return f"{what} per unit of {exposure}" if exposure else f"{what} per run"
    return recorded


def quantity(fit) -> str:
    """What the mean is, in words."""
    kind = family(fit)
    if kind == "binomial":
        return "expected pass rate (probability of a pass)"
    if kind == "poisson":
        return "expected rate"
    return "expected mean"


def bands(fit, curve: dict):
    """(mean, ci_low, ci_high, pi_low, pi_high) of a refresh trace or slice, in shown units; the PI edges are
    None when the fit gives no prediction interval (a count)."""
    k = scale(fit)
    mean = np.asarray(curve["mean"], dtype=float) * k
    if "ci_low" in curve:  # a count: made on the link scale and transformed, so not symmetric
        return mean, np.asarray(curve["ci_low"]) * k, np.asarray(curve["ci_high"]) * k, None, None
    ci, pi = np.asarray(curve["ci_half"]) * k, np.asarray(curve["pi_half"]) * k
    return mean, mean - ci, mean + ci, mean - pi, mean + pi


def slice_quantity(fit, grid: dict, quantity: str) -> np.ndarray:
    """A slice's ``mean``, ``ci_half`` or ``pi_half`` grid in shown units; for a count the CI half-width is half
    the width of the transformed interval and there is no PI (NaN: the view says why)."""
    if family(fit) is None:
        return grid[quantity]
    k = scale(fit)
    if quantity == "mean":
        return np.asarray(grid["mean"]) * k
    if quantity == "ci_half":
        return (np.asarray(grid["ci_high"]) - np.asarray(grid["ci_low"])) * (k / 2.0)
    return np.full(np.shape(grid["mean"]), np.nan)


def shown_responses(study) -> tuple:
    """The study's responses the views show: all but the trials or exposure of a count response (recorded
    columns that the count's fit uses, not responses with a model of their own)."""
    partners = {getattr(spec, key) for spec in study.responses.values() for key in ("trials", "exposure")}
    return tuple(name for name in study.response_names if name not in partners)


def response_family(shared, response: str) -> str | None:
    """The family the study records for *response* (None: a measurement), whether or not it has a fit."""
    study = getattr(shared, "study", None)
    spec = study.responses.get(response) if study is not None else None
    return getattr(spec, "family", None)


def response_scale(shared, response: str) -> float:
    """:func:`scale` of a response by its recorded family: the goal editors show a pass rate in %."""
    return 100.0 if response_family(shared, response) == "binomial" else 1.0


def observed_means(shared, response: str):
    """The recorded values of *response* on the scale of its fit's mean: passes / trials for a binomial
    response, count / exposure for a Poisson one with exposure, else the values (NaN where missing)."""
    data = shared.data
    values = data[response].to_numpy(dtype=float)
    study = getattr(shared, "study", None)
    spec = study.responses.get(response) if study is not None else None
    size = getattr(spec, "trials", None) or getattr(spec, "exposure", None)
    if size and size in data:
        with np.errstate(divide="ignore", invalid="ignore"):
            values = values / data[size].to_numpy(dtype=float)
    return values


def shown(fit, values):
    """*values* (a number or an array of kernel numbers) in shown units."""
    return np.asarray(values, dtype=float) * scale(fit) if np.ndim(values) else float(values) * scale(fit)


def no_interval_html(fit) -> str:
    """Why a count fit's prediction interval for one new run is not given (for a readout or a table note)."""
    note = getattr(fit, "new_observation_note", "")
    return f'<span class="lw-no-pi" title="{html.escape(note)}">not given for a count (see the note)</span>'


def note_html(fit) -> str:
    """The words under a count response's readout: the scale, the transformed intervals, no new-run interval."""
    kind = family(fit)
    if kind is None:
        return ""
    what = ("probability that a trial passes, shown as a percentage" if kind == "binomial"
            else "rate per unit of exposure")
    return (f'<div class="lw-count-note">A {kind} fit ({html.escape(fit.link)} link): the mean is the {what}. '
            "Its confidence interval is made on the link scale and transformed, so it never leaves the valid "
            f"range. {html.escape(getattr(fit, 'new_observation_note', ''))}</div>")
