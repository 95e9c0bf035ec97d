"""Study exports: the study's run sheet and the coefficient, ANOVA and prediction tables, as CSV or XLSX."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from .._cells import write_csv, write_xlsx
from .._errors import LevelwiseError
from ._tables import ACHIEVED


def _header(name: str, units: str) -> str:
    return f"{name} [{units}]" if units else name


def study_run_sheet(study, *, achieved: bool = False) -> pd.DataFrame:
    """The study's run sheet: run, stage, block, whole plot (a split-plot study), role, planned settings and the
    responses (blank where not recorded), headers ``Name [units]``; with *achieved*, one
    ``"<factor> (achieved) [units]"`` column per factor. :func:`import_table` reads it back, responses included,
    with the guessed mapping.
    """
    planned = study.planned()
    sheet = planned[["run", "stage", "block", *(["whole_plot"] if "whole_plot" in planned else []), "role"]].copy()
    for f in study.factors:
        sheet[_header(f.name, f.units)] = planned[f.name]
    if achieved:
        done = study.achieved()
        for f in study.factors:
            sheet[_header(f.name + ACHIEVED, f.units)] = done[f.name]
    values = study.data(apply_exclusions=False)
    for name, response in study.responses.items():
        sheet[_header(name, response.units)] = values[name]
    return sheet.reset_index(drop=True)


def coefficient_table(fit) -> pd.DataFrame:
    """The coefficients of a fit (coded units) as a flat table with a ``term`` column."""
    return fit.coefficients.reset_index()


def anova_table(fit) -> pd.DataFrame:
    """The fit's analysis of variance (:attr:`Fit.anova`: model, terms, residual split into
    curvature, lack of fit and pure error where the runs allow) as a flat table with a ``source``
    column, the same numbers the views show."""
    return fit.anova.reset_index()


def prediction_table(fit, settings, level: float | None = None) -> pd.DataFrame:
    """Settings (natural units) beside the predicted mean, confidence and prediction intervals."""
    natural = fit.engine.table(settings)
    frame = pd.DataFrame(natural, columns=list(fit.factor_names))
    return pd.concat([frame, fit.predict(frame, level=level)], axis=1)


def export_table(frame: pd.DataFrame, path, *, sheet_name: str = "table") -> Path:
    """Write *frame* to a ``.csv`` (UTF-8) or ``.xlsx`` file, chosen by the suffix of *path*.

    Text that a spreadsheet would read as a formula (starting with ``=``, ``+``, ``-``, ``@``, a tab or a
    carriage return) stays text: a single-quote prefix in CSV, a string cell in XLSX (see ``levelwise._cells``).
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".xlsx"):
        raise LevelwiseError(f"The export 'path' must end in .csv or .xlsx. Got {str(path)!r} instead.")
    try:
        if suffix == ".csv":
            write_csv(frame, path, index=False, encoding="utf-8")
        else:
            write_xlsx({sheet_name: frame}, path)
    except OSError as exc:
        raise LevelwiseError(f"The table could not be written to '{path}': {exc.strerror or exc}.") from exc
    return path


def export_run_sheet(study, path, *, achieved: bool = False) -> Path:
    """Write :func:`study_run_sheet` to CSV or XLSX."""
    return export_table(study_run_sheet(study, achieved=achieved), path, sheet_name="runs")


def export_coefficients(fit, path) -> Path:
    """Write :func:`coefficient_table` to CSV or XLSX."""
    return export_table(coefficient_table(fit), path, sheet_name="coefficients")


def export_anova(fit, path) -> Path:
    """Write :func:`anova_table` to CSV or XLSX."""
    return export_table(anova_table(fit), path, sheet_name="anova")


def export_predictions(fit, settings, path, level: float | None = None) -> Path:
    """Write :func:`prediction_table` to CSV or XLSX."""
    return export_table(prediction_table(fit, settings, level), path, sheet_name="predictions")



__all__ = [
    "anova_table",
    "coefficient_table",
    "export_anova",
    "export_coefficients",
    "export_predictions",
    "export_run_sheet",
    "export_table",
    "prediction_table",
    "study_run_sheet",
]
