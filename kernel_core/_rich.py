"""Rich notebook output of fits, studies and their tables: rounded HTML with units (``_repr_html_``).

* :class:`ResultTable` -- the ANOVA and coefficient tables of a fit: a pandas DataFrame in every way, whose
  ``_repr_html_`` rounds to four significant digits (p-values to three) and writes units in the headers
  (``estimate [J]``). Anything derived from it (``.copy()``, a slice, arithmetic) is a plain DataFrame.
* :func:`fit_html` -- ``Fit``, ``MixedFit`` and ``GlmFit``: the model, the runs, the summary statistics and
  both tables.
* :func:`study_html` -- ``Study``: title, factors with their ranges and units, responses with units and goals,
  stages and runs.

Units: a fit made by :meth:`levelwise.Study.fit` knows the study's units (:func:`with_units`); any other fit
shows the units of the :class:`levelwise.Factor` objects it was given, and none for the response.
"""

from __future__ import annotations

import html

import pandas as pd

from ._html import format_number, html_table

#: Columns in the units of the response (coefficients in coded units are in the response's units).
_RESPONSE_UNIT_COLUMNS = ("estimate", "std_error", "ci_low", "ci_high")
_SQUARED_COLUMNS = ("sum_sq", "mean_sq")


class ResultTable(pd.DataFrame):
    """A DataFrame that shows itself rounded, with units (``attrs["units"]``) and a caption (``attrs["caption"]``)."""

    @property
    def _constructor(self):
        return pd.DataFrame  # derived frames are plain

    def _repr_html_(self) -> str:
        frame = pd.DataFrame(self)
        digits = {c: 3 if c.startswith("p_value") or c == "p" else 4 for c in frame.columns}
        shown = frame.copy()
        for column, d in digits.items():
            if pd.api.types.is_float_dtype(shown[column]):
                shown[column] = [format_number(v, d) if pd.notna(v) else "" for v in shown[column]]
        return html_table(shown, units=self.attrs.get("units"), caption=self.attrs.get("caption", ""), index=True,
                          max_rows=None)


def result_table(frame: pd.DataFrame, caption: str, units: dict | None = None) -> ResultTable:
    out = ResultTable(frame)
    out.attrs = {"caption": caption, "units": {k: v for k, v in (units or {}).items() if v}}
    return out


def _units(fit) -> dict:
    return dict(getattr(fit, "display_units", None) or {})


def coefficient_table(fit, frame: pd.DataFrame) -> ResultTable:
    """The coefficient table of *fit*, captioned, estimates in the response's units."""
    unit = _units(fit).get(fit.response, "")
    scale = getattr(fit, "response_scale", None)
    if getattr(fit, "kind", "") == "glm":
        caption = f"Coefficients of {fit.response} on the link scale ({scale}), coded units"
        unit = ""
    else:
        caption = f"Coefficients of {fit.response} (coded units: -1 to +1 over each factor's range)"
    return result_table(frame, caption, {c: unit for c in _RESPONSE_UNIT_COLUMNS})


def anova_frame(fit, frame: pd.DataFrame) -> ResultTable:
    """The ANOVA table of *fit*, captioned, sums of squares in the response's units squared."""
    unit = _units(fit).get(fit.response, "")
    squared = f"({unit})²" if unit and " " in unit else (f"{unit}²" if unit else "")
    return result_table(frame, f"Analysis of variance of {fit.response}", {c: squared for c in _SQUARED_COLUMNS})


def with_units(fit, units: dict):
    """Give *fit* the study's units for its rich output (the response's and the factors')."""
    try:
        object.__setattr__(fit, "display_units", dict(units))
    except (AttributeError, TypeError):
        return fit
    for name in ("coefficients", "anova"):  # tables made before the units were known are made again
        fit.__dict__.pop(name, None)
    return fit


def _statistic(fit, name):
    try:
        value = getattr(fit, name)
    except Exception:  # noqa: BLE001 - a statistic a family does not define is left out
        return None
    return value if isinstance(value, (int, float)) else None


def fit_html(fit) -> str:
    """The whole fit: model, runs, statistics, coefficients and ANOVA (rounded, with units)."""
    units = _units(fit)
    unit = units.get(fit.response, "")
    formula = getattr(getattr(fit, "spec", None), "formula", None) or " + ".join(fit.terms)
    kind = {"mixed": "split-plot fit (REML)", "glm": "generalised linear fit"}.get(getattr(fit, "kind", ""),
                                                                                 "least-squares fit")
    runs = len(fit.runs)
    lines = [f"<b>{html.escape(str(fit.response))}</b> ~ {html.escape(str(formula))}: {kind} of {runs} runs, "
             f"{fit.p} terms"]
    stats = []
    for name, label, with_unit in (("s", "residual standard deviation s", True), ("r_squared", "R²", False),
                                   ("r_squared_adj", "adjusted R²", False), ("r_squared_pred", "predicted R²", False),
                                   ("deviance", "deviance", False), ("dispersion", "dispersion", False)):
        value = _statistic(fit, name)
        if value is not None:
            stats.append(f"{label} = {format_number(value)}" + (f" {html.escape(unit)}" if with_unit and unit else ""))
    factors = []
    coding = getattr(fit, "coding", None)
    for name in getattr(fit, "factor_names", ()):
        if coding is not None and name in getattr(coding, "names", ()):
            j = list(coding.names).index(name)
            span = f" {format_number(coding.low[j])} to {format_number(coding.high[j])}"
        else:
            span = ""
        factor_unit = units.get(name, "")
        factors.append(html.escape(f"{name}{span}" + (f" {factor_unit}" if factor_unit else "")))
    head = "<br>".join([lines[0], "; ".join(stats)] + (["Factors: " + "; ".join(factors)] if factors else []))
    excluded = getattr(fit, "exclusions", ())
    if excluded:
        head += "<br>Excluded runs: " + html.escape(", ".join(str(run) for run, *_ in excluded))
    return (f'<div class="lw-fit"><p>{head}</p>{fit.coefficients._repr_html_()}'
            f"{fit.anova._repr_html_() if hasattr(fit.anova, '_repr_html_') else ''}</div>")


def study_html(study) -> str:
    """A study at a glance: title, factors, responses with goals, stages, runs and how many have results."""
    factors = pd.DataFrame([
        {"factor": f.name, "range": (", ".join(map(str, f.levels)) if getattr(f, "levels", ())
                                     else f"{format_number(f.low)} to {format_number(f.high)}"),
         "units": f.units, "hard to change": "yes" if getattr(f, "hard_to_change", False) else ""}
        for f in study.factors])
    data = study.data(apply_exclusions=False)
    responses = pd.DataFrame([
        {"response": name, "units": spec.units, "goal": spec.goal,
         "target": spec.target if spec.target is not None else float("nan"),
         "runs with a value": int(data[name].notna().sum()) if name in data else 0,
         "model": study.models.get(name, "")}
        for name, spec in study.responses.items()])
    stages = ", ".join(f"{s.name} ({n} runs)" for s, n in zip(study.stages, _stage_sizes(study)))
    title = html.escape(study.title or "Untitled study")
    return (f'<div class="lw-study"><p><b>{title}</b>: {len(study.run_ids)} runs'
            + (f" in stages {html.escape(stages)}" if stages else "") + "</p>"
            + html_table(factors, caption="Factors") + (html_table(responses, caption="Responses")
                                                        if len(responses) else "<p>No responses yet.</p>")
            + "</div>")


def _stage_sizes(study):
    table = study.table()
    return [int((table["stage"] == s.name).sum()) for s in study.stages] if "stage" in table else []


__all__ = ["ResultTable", "anova_frame", "coefficient_table", "fit_html", "result_table", "study_html",
           "with_units"]
