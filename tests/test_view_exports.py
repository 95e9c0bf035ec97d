"""Every view that shows a figure saves it (PNG, SVG, drawn on the server with units and a caption); every view
that shows a table exports it (CSV, XLSX, formula-safe). Headless: the buttons are pressed, the files read back.

The demo study is the invented campaign (dashboards/data/demo_campaign.json). The checks are bookkeeping: the
files' formats, that the exported numbers are levelwise's own tables, the units and the caption, and that a
text cell that a spreadsheet would read as a formula stays text (OWASP "CSV Injection" guidance, as
tests/test_export_injection.py).
"""

from __future__ import annotations

import base64
import io
import re

import numpy as np
import openpyxl
import pandas as pd
import pytest

import levelwise as lw
import levelwise.widgets as widgets
from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import (
    EffectsView,
    FactorSliders,
    OptimizerView,
    PredictionsView,
    ResidualInspector,
    RunSheetEditor,
    SharedModel,
    SurfaceSlice,
)
from levelwise.widgets._base import View
from levelwise.widgets._figure_render import visible_figures


@pytest.fixture(scope="module")
def shared():
    return SharedModel.from_study(demo_study())


def links(html_text: str) -> dict:
    """``{file name: bytes}`` of the download links in *html_text*."""
    found = re.findall(r'<a download="([^"]+)" href="data:[^;]+;base64,([^"]+)"', html_text)
    return {name: base64.b64decode(data) for name, data in found}


def check_figure_files(files: dict, name: str):
    assert set(files) == {f"{name}.png", f"{name}.svg"}
    assert files[f"{name}.png"].startswith(b"\x89PNG\r\n\x1a\n")
    svg = files[f"{name}.svg"].decode("utf-8")
    assert svg.startswith("<?xml") and "<svg" in svg


def test_every_view_that_shows_a_figure_has_save_figure(shared):
    classes = [getattr(widgets, n) for n in widgets.__all__ if isinstance(getattr(widgets, n), type)
               and issubclass(getattr(widgets, n), View)]
    assert len(classes) >= 10
    with_figures = []
    for cls in classes:
        view = cls(shared)
        if visible_figures(view.widget):
            with_figures.append(cls.__name__)
            assert getattr(view, "exports", None) is not None or getattr(view, "figure_export", None) is not None
            if getattr(view, "exports", None) is not None:
                assert view.exports.widget in view.widget.children  # under the view's content
                assert view.exports.figure_button.layout.display == ""
        view.close()
    assert {"FactorSliders", "SurfaceSlice", "ResidualInspector", "EffectsView"} <= set(with_figures)
    builder = widgets.DesignBuilder(shared)  # its figure is drawn by matplotlib itself: its own Save figure
    assert builder.figure_export is not None and getattr(builder, "exports", None) is None


@pytest.mark.parametrize("cls", [FactorSliders, SurfaceSlice, ResidualInspector, EffectsView])
def test_save_figure_gives_png_and_svg_with_units_and_a_caption(shared, cls):
    view = cls(shared)
    if cls is ResidualInspector:
        view.plot.value = "fitted"  # residual against fitted value: both axes in the response's units
    view.exports.figure_button.click()
    assert "lw-error" not in view.status.value
    check_figure_files(links(view.exports.links.value), type(view).__name__.lower())
    fig = view.exports.figure()
    caption = fig._supxlabel.get_text()
    assert "Impact [J]" in caption and "invented data" in caption and "53 runs fitted" in caption
    labels = [ax.get_xlabel() for ax in fig.axes if ax.get_visible()] + [ax.get_ylabel() for ax in fig.axes]
    assert any("°C" in label or "[J]" in label or "(J)" in label for label in labels), labels
    if cls is ResidualInspector:
        assert "Residual against fitted value of Impact [J]" in caption
        assert not any("Studentized" in label for label in labels)
    view.close()


def test_effects_figure_labels_carry_the_response_units(shared):
    view = EffectsView(shared)
    fig = view.exports.figure()
    assert "|effect| [J]" in [ax.get_xlabel() for ax in fig.axes] + [ax.get_ylabel() for ax in fig.axes]
    assert "Studentized residual" not in "".join(ax.get_xlabel() for ax in fig.axes)
    view.close()


def test_surface_slice_figure_shows_the_values_not_the_colour_codes(shared):
    view = SurfaceSlice(shared)
    fig = view.exports.figure()
    mesh = next(c for ax in fig.axes for c in ax.collections if hasattr(c, "get_array") and c.get_array() is not None
                and np.ndim(c.get_array()) >= 1 and np.size(c.get_array()) == np.size(view.shown_values()))
    values = np.ma.filled(mesh.get_array(), np.nan).ravel()
    np.testing.assert_allclose(np.sort(values), np.sort(view.shown_values().ravel()), rtol=1e-6)
    view.close()


def test_effects_tables_export_the_anova_and_coefficients_as_shown(shared):
    view = EffectsView(shared)
    view.exports.table_button.click()
    files = links(view.exports.links.value)
    assert set(files) == {"anova-Impact.csv", "anova-Impact.xlsx", "coefficients-Impact.csv",
                          "coefficients-Impact.xlsx"}
    back = pd.read_csv(io.BytesIO(files["anova-Impact.csv"]))
    assert "sum_sq [J²]" in back.columns and "mean_sq [J²]" in back.columns
    np.testing.assert_allclose(back["sum_sq [J²]"].to_numpy(), shared.fit.anova["sum_sq"].to_numpy(), rtol=1e-12)
    book = openpyxl.load_workbook(io.BytesIO(files["coefficients-Impact.xlsx"]))
    header = [c.value for c in next(book.active.iter_rows(max_row=1))]
    assert header[:3] == ["term", "estimate [J]", "std_error [J]"]
    view.close()


@pytest.mark.parametrize(("cls", "expected"), [
    (FactorSliders, {"predictions-at-settings"}),
    (ResidualInspector, {"residuals-Impact"}),
    (RunSheetEditor, {"run-sheet"}),
])
def test_table_exports_of_the_other_views(shared, cls, expected):
    view = cls(shared)
    files = view.exports.show_table_links()
    assert {name.rsplit(".", 1)[0] for name in files} == expected
    for name, data in files.items():
        if name.endswith(".csv"):
            frame = pd.read_csv(io.BytesIO(data))
            assert len(frame) >= 1
        else:
            assert data[:2] == b"PK"  # a zip container: XLSX
    view.close()


def test_optimiser_and_predictions_export_once_they_have_a_table(shared, tmp_path):
    optimiser = OptimizerView(shared, starts=3, seed=1)
    assert optimiser.exports.figure_button.layout.display == "none"  # no figure in this view
    optimiser.exports.table_button.click()
    assert "no table to export yet" in optimiser.status.value
    optimiser.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0)
    optimum = optimiser.run()
    files = optimiser.exports.table_files()
    frame = pd.read_csv(io.BytesIO(files["optimum.csv"]))
    assert frame.loc[0, "overall desirability"] == pytest.approx(optimum.overall)
    assert "setting Oven [°C]" in frame.columns
    predictions = PredictionsView(shared)
    predictions.add_current()
    written = predictions.exports.save(tmp_path)
    assert sorted(p.name for p in written) == ["predictions.csv", "predictions.xlsx"]
    assert "Impact mean" in pd.read_csv(tmp_path / "predictions.csv").columns


def test_text_that_looks_like_a_formula_stays_text(tmp_path):
    study = lw.Study([lw.Factor("Oven", 150, 200, units="°C"), lw.Factor("Dwell", 1, 3, units="min")])
    study.add_stage("=HYPERLINK(\"x\")", lw.full_factorial(study.factors, randomize=False))
    study.add_response("y", units="g")
    for run, value in zip(study.run_ids, [1.0, 2.0, 3.0, 4.5]):
        study.record(run, "y", value)
    study.set_model("y", "Oven + Dwell")
    view = RunSheetEditor(SharedModel.from_study(study))
    files = view.exports.table_files()
    text = files["run-sheet.csv"].decode("utf-8")
    assert "'=HYPERLINK" in text and "\n=HYPERLINK" not in text and ",=HYPERLINK" not in text
    book = openpyxl.load_workbook(io.BytesIO(files["run-sheet.xlsx"]))
    cells = [c for row in book.active.iter_rows() for c in row if isinstance(c.value, str) and "HYPERLINK" in c.value]
    assert cells and all(c.data_type == "s" for c in cells)
