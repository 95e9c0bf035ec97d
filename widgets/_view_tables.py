"""The tables each view shows, as DataFrames for "Export table (CSV, XLSX)" (see ``_exports``).

Each function returns ``{file name: (frame, units)}``: *units* maps a column to its units, written in the
header as ``name [units]``. The numbers are levelwise's own (``Fit.anova``, ``Fit.coefficients``,
``Fit.diagnostics``, ``Fit.predict``, the study's run table), unrounded.
"""

from __future__ import annotations

import pandas as pd


def _response_units(shared, response=None) -> str:
    return shared.units.get(response or shared.response, "") if hasattr(shared, "units") else ""


def _factor_units(shared) -> dict:
    return {f.name: f.units for f in shared.factors if getattr(f, "units", "")}


def effects_tables(view) -> dict:
    """The ANOVA and the coefficient table of the displayed fit (units from the table's own attrs)."""
    fit = view.shared.fit
    if fit is None:
        return {}
    out = {}
    for name, table in (("anova", fit.anova), ("coefficients", fit.coefficients)):
        units = dict(getattr(table, "attrs", {}).get("units") or {})
        if not units:  # a fit made outside a study: the response's units from the shared model
            unit = _response_units(view.shared)
            squared = f"{unit}²" if unit else ""
            units = {"estimate": unit, "std_error": unit, "ci_low": unit, "ci_high": unit, "sum_sq": squared,
                     "mean_sq": squared}
        out[f"{name}-{fit.response}"] = (pd.DataFrame(table), units)
    return out


def residual_tables(view) -> dict:
    """Per run: fitted value, residual and the influence statistics the inspector plots."""
    fit = view.shared.fit
    if fit is None:
        return {}
    unit = _response_units(view.shared)
    try:
        frame = pd.DataFrame(fit.diagnostics)
    except (AttributeError, NotImplementedError):
        frame = pd.DataFrame({"fitted": fit.fitted, "residual": fit.residuals})
    frame.index.name = "run"
    return {f"residuals-{fit.response}": (frame, {c: unit for c in ("fitted", "residual") if c in frame})}


def prediction_tables(view) -> dict:
    """The predictions at the current settings for every response (mean, CI, PI, extrapolation flag)."""
    shared, rows = view.shared, []
    for response, fit in shared.fits.items():
        if fit is None:
            continue
        settings = {name: shared.settings[name] for name in fit.factor_names if name in shared.settings}
        pred = fit.predict(pd.DataFrame({k: [v] for k, v in settings.items()})).iloc[0]
        rows.append({"response": response, "units": _response_units(shared, response), **settings,
                     **{k: pred[k] for k in ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "extrapolated")
                        if k in pred}})
    return {"predictions-at-settings": (pd.DataFrame(rows), _factor_units(shared))} if rows else {}


def optimum_tables(view) -> dict:
    """The optimiser's best settings with each response's prediction and desirability."""
    best = view.optimum
    if best is None:
        return {}
    frame = best.predictions.copy()
    frame["units"] = [_response_units(view.shared, r) for r in frame.index]
    frame["desirability"] = [float(best.desirability.get(r, float("nan"))) for r in frame.index]
    for name, value in best.settings.items():
        frame[f"setting {name}"] = value
    frame["overall desirability"] = best.overall
    units = {f"setting {n}": u for n, u in _factor_units(view.shared).items()}
    return {"optimum": (frame, units)}


def run_sheet_tables(view) -> dict:
    """The study's runs as the sheet shows them: settings, responses, exclusions."""
    study = view.shared.study
    units = _factor_units(view.shared) | {name: spec.units for name, spec in study.responses.items()}
    return {"run-sheet": (study.table(), units)}


__all__ = ["effects_tables", "optimum_tables", "prediction_tables", "residual_tables", "run_sheet_tables"]
