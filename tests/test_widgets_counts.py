"""The views on a count response (issue 15), headless: the invented demo campaign's adhesion passes out of 20
panels per run (binomial, logit). Every number shown is the kernel's GlmFit (checked against statsmodels GLM in
test_fit_glm.py), a probability shown as a percentage, bands from the link-scale intervals transformed."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import levelwise as lw
from levelwise import demo_campaign as campaign
from levelwise.model import GlmFit
from levelwise.widgets import (
    EffectsView,
    FactorSliders,
    OptimizerView,
    PredictionsView,
    ResidualInspector,
    SharedModel,
    SurfaceSlice,
)
from levelwise.widgets.style import fmt

F32 = {"rel": 2e-6, "abs": 2e-5}  # float32 on the wire
SETTINGS = {"Oven": 200.0, "Dwell": 11.0, "Film": 60.0, "Catalyst": 1.2, "Airflow": 0.8, "Pretreat": 5.0}


@pytest.fixture
def shared():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lw.LevelwiseWarning)  # the demo's one missing impact value
        model = SharedModel.from_study(campaign.campaign_study())
    model.response = "Adhesion"
    model.settings = dict(SETTINGS)
    return model


def reference():
    """The kernel's own fit of the same runs (lw.fit, not through the shared model)."""
    data = campaign.campaign_study().data()
    return lw.fit(data, "Adhesion", campaign.ADHESION_MODEL, factors=list(campaign.FACTORS), family="binomial",
                  trials="Panels")


def test_the_shared_model_fits_the_binomial_response_and_hides_its_trials(shared):
    assert isinstance(shared.fit, GlmFit) and shared.error == ""
    np.testing.assert_allclose(shared.fit.beta, reference().beta, rtol=1e-10)
    assert "Panels" not in shared.responses  # the trials of Adhesion: recorded, not a response of its own
    assert "Adhesion" in shared.responses and "Panels" in shared.study.response_names


def test_sliders_show_the_pass_rate_in_percent_with_transformed_bands(shared):
    view = FactorSliders(shared)
    expected = reference().predict(SETTINGS).iloc[0]
    readout = view.readout.value
    assert f'<span class="lw-mean">{fmt(100 * expected["mean"])}</span> %' in readout
    assert f'{fmt(100 * expected["ci_low"])} to {fmt(100 * expected["ci_high"])}</span> %' in readout
    assert "not given for a count" in readout and "No interval for one new count" in readout
    curve = reference().predict({**SETTINGS, "Oven": np.linspace(170, 210, view.points)})
    pi_band, ci_band, mean, _ = view._marks["Oven"]
    assert np.asarray(mean.y) == pytest.approx(100 * curve["mean"].to_numpy(), **F32)
    assert np.asarray(ci_band.y)[0] == pytest.approx(100 * curve["ci_low"].to_numpy(), **F32)
    assert np.asarray(ci_band.y)[1] == pytest.approx(100 * curve["ci_high"].to_numpy(), **F32)
    assert not pi_band.visible  # no prediction band for a count
    assert (np.asarray(ci_band.y) > 0).all() and (np.asarray(ci_band.y) < 100).all()
    assert view.traces["Oven"].axes[1].label == "Adhesion (%)"
    view.close()


def test_surface_slice_shows_the_pass_rate_and_the_ci_half_width(shared):
    view = SurfaceSlice(shared, x="Oven", y="Dwell", shape=(30, 20))
    grid = reference().refresh(SETTINGS, points=None, slice_axes=("Oven", "Dwell"), shape=(30, 20))["slice"]
    for quantity, expected in (("mean", 100 * grid["mean"]), ("ci_half", 50 * (grid["ci_high"] - grid["ci_low"]))):
        view.quantity.value = quantity
        view.flush()
        step = (expected.max() - expected.min()) / 254
        assert view.shown_values() == pytest.approx(expected, abs=step / 2 * 1.0001 + 1e-12)
    assert view.color_axis.label == "Adhesion (%)"
    view.quantity.value = "pi_half"
    view.flush()
    assert np.isnan(view.shown_values()).all() and "not given for a count" in view.caption.value
    view.close()


def test_residual_inspector_shows_deviance_and_pearson_residuals(shared):
    view = ResidualInspector(shared)
    diag = reference().diagnostics
    assert [v for _, v in view.plot.options][:3] == ["normal", "fitted", "pearson"]
    assert np.asarray(view.used.x) == pytest.approx(diag["standardized_deviance"].to_numpy(), **F32)
    view.plot.value = "fitted"
    assert np.asarray(view.used.x) == pytest.approx(100 * diag["fitted_mean"].to_numpy(), **F32)
    assert np.asarray(view.used.y) == pytest.approx(diag["deviance_residual"].to_numpy(), **F32)
    assert view.y_axis.label == "Deviance residual" and view.x_axis.label == "Fitted pass rate (%)"
    view.plot.value = "pearson"
    assert np.asarray(view.used.y) == pytest.approx(diag["pearson_residual"].to_numpy(), **F32)
    view.plot.value = "leverage"
    assert np.asarray(view.used.y) == pytest.approx(diag["standardized_pearson"].to_numpy(), **F32)
    run = int(diag.index[3])
    view.run.value = run
    assert fmt(diag.loc[run, "deviance_residual"]) in view.detail.value
    assert fmt(diag.loc[run, "cooks_distance"]) in view.detail.value
    assert "does not apply to a count response" in view.box_cox.value
    # Leaving a run out refits the GLM; the run stays visible with its residual under the new fit.
    shared.exclude(run, "panels mislabelled (invented)")
    assert isinstance(shared.fit, GlmFit) and run not in list(shared.fit.runs)
    view.plot.value = "fitted"
    again = reference().exclude(run, "panels mislabelled (invented)")
    row = shared.data.loc[[run]]
    assert np.asarray(view.excluded.y) == pytest.approx(again.residuals_of(row)["deviance_residual"].to_numpy(),
                                                        **F32)
    for _, choice in view.plot.options:
        view.plot.value = choice
        assert view.status.value == "", choice
    view.close()


def test_effects_view_gives_changes_at_the_centre_lr_tests_and_odds_ratios(shared):
    view = EffectsView(shared)
    view.basis.value = "model"  # the effects of the current model (the default is the screening candidates)
    fit = reference()
    assert "Effects at the centre" in view.lenth_text.value
    assert fmt(100 * fit.effects.loc["Oven", "change"]) in view.lenth_text.value
    assert "Likelihood-ratio (deviance) tests" in view.anova_table.value
    assert fmt(fit.anova.loc["Oven", "lr_chi2"]) in view.anova_table.value
    assert "odds ratio" in view.coefficient_table.value
    assert fmt(fit.coefficients.loc["Oven", "odds_ratio"]) in view.coefficient_table.value
    assert "Pearson chi-square / df" in view.anova_table.value
    assert list(view.bar_mark.y) == pytest.approx(
        sorted((100 * fit.effects["change"]).abs().to_numpy(), reverse=True), **F32)
    assert view.status.value == ""
    view.close()


def test_predictions_table_and_optimiser_use_percentages(shared):
    table = PredictionsView(shared)
    table.add_current()
    expected = reference().predict(SETTINGS).iloc[0]
    frame = table.to_frame()
    assert frame.loc[0, "Adhesion mean"] == pytest.approx(100 * expected["mean"], rel=1e-12)
    assert frame.loc[0, "Adhesion ci_high"] == pytest.approx(100 * expected["ci_high"], rel=1e-12)
    assert "not given for a count" in table.table.value and "expected pass rate" in table.table.value
    view = OptimizerView(shared)
    row = view.goal_rows["Adhesion"]
    # The study stores the goal on the probability scale (0.90, 0.98); the editors show it in %.
    assert (row["kind"].value, row["lower_limit"].value, row["target"].value) == ("maximize", 90.0, 98.0)
    assert view.goals()["Adhesion"]["lower_limit"] == pytest.approx(0.90)
    view.goal_rows["Impact"]["kind"].value = "none"
    view.goal_rows["Gloss"]["kind"].value = "none"
    view.goal_rows["Yellowness"]["kind"].value = "none"
    best = view.run()
    p = reference().predict(best.settings).iloc[0]["mean"]
    assert best.desirability["Adhesion"] == pytest.approx(min(1.0, max(0.0, (p - 0.90) / (0.98 - 0.90))), rel=1e-9)
    assert f"{fmt(100 * p)} %" in view.result.value
    table.close()
    view.close()


def test_the_published_page_shows_the_pass_rate_and_its_goal():
    from levelwise.dashboards import present

    page = present.build("demo")  # the shipped invented campaign file
    shared = page.shared
    assert isinstance(shared.fits["Adhesion"], GlmFit) and "Panels" not in shared.responses
    readout = page.views[0]
    assert "pass/fail counts (binomial)" in readout.summary.value and "logit link" in readout.summary.value
    sliders = next(v for v in page.views if type(v).__name__ == "FactorSliders")
    expected = shared.fits["Adhesion"].predict(shared.settings).iloc[0]
    assert f'<span class="lw-mean">{fmt(100 * expected["mean"])}</span> %' in sliders.readout.value
    goals = present.study_goals(shared)
    assert goals["Adhesion"] == {"lower_limit": 0.90, "target": 0.98, "kind": "maximize"}  # stored, not counts
    optimiser = next(v for v in page.views if type(v).__name__ == "OptimizerView")
    assert "Adhesion" in optimiser.result.value and "not given for a count" in optimiser.result.value
    assert all(getattr(getattr(v, "status", None), "value", "") == "" for v in page.views)


def test_the_workbench_shows_every_view_on_the_pass_rate():
    from levelwise.dashboards import explore

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lw.LevelwiseWarning)
        bench = explore.build("demo")
    bench.shared.response = "Adhesion"  # every view follows the displayed response
    assert isinstance(bench.shared.fit, GlmFit)
    assert [getattr(getattr(v, "status", None), "value", "") for v in bench.views] == [""] * len(bench.views)


def test_the_run_sheet_refuses_a_bad_count_naming_run_and_column(shared):
    import html

    from levelwise.widgets import RunSheetEditor

    sheet = RunSheetEditor(shared)
    run = shared.study.run_ids[0]
    before = shared.study.data().at[run, "Adhesion"]
    entries = len(shared.study.audit)
    for text, words in (("25", "holds 25 passes, more than the 20 trials recorded in 'Panels'"),
                        ("3.5", "must be a whole number >= 0"), ("-1", "must be a whole number >= 0")):
        sheet.cells[(run, "Adhesion")].value = text  # as typed in the browser
        shown = html.unescape(sheet.status.value)
        assert f"Run {run}: the response 'Adhesion'" in shown and words in shown
        assert "The value was not changed" in shown
        assert sheet.cells[(run, "Adhesion")].value == f"{before:g}"  # the cell shows the study's value again
    sheet.cells[(run, "Panels")].value = "0"
    assert f"Run {run}: the response 'Panels' holds the number of trials of 'Adhesion'" in html.unescape(
        sheet.status.value)
    assert shared.study.data().at[run, "Adhesion"] == before and len(shared.study.audit) == entries
    sheet.cells[(run, "Adhesion")].value = "19"  # a good count is recorded and the fit follows
    assert shared.study.data().at[run, "Adhesion"] == 19 and isinstance(shared.fit, GlmFit)
    sheet.close()


def test_a_poisson_rate_per_unit_of_exposure_in_the_views():
    from test_export_counts import count_study  # invented: defects over a panel area

    model = SharedModel.from_study(count_study())
    assert model.responses == ("Adhesion", "Adhesion probit", "Defects")  # Panels and Area are not shown
    model.response = "Defects"
    settings = {"Oven": 170.0, "Dwell": 12.0}
    model.settings = dict(settings)
    fit = model.fit
    assert isinstance(fit, GlmFit) and fit.family == "poisson" and fit.exposure_name == "Area"
    sliders = FactorSliders(model)
    expected = fit.predict(settings).iloc[0]  # a rate per unit of area (statsmodels-checked in test_fit_glm)
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span> defects per unit of Area' in sliders.readout.value
    assert 0 < expected["ci_low"] < expected["mean"] < expected["ci_high"]
    inspector = ResidualInspector(model)
    inspector.plot.value = "fitted"
    assert inspector.x_axis.label == "Fitted rate (defects per unit of Area)"
    assert np.asarray(inspector.used.y) == pytest.approx(fit.diagnostics["deviance_residual"].to_numpy(), **F32)
    for view in (sliders, inspector):
        view.close()
