"""The views on a split-plot study (issue 13), headless: every interval shown is the REML fit's.

The study is the INVENTED, seeded split-plot stage of kernel_core/demo.py. Reference numbers come from levelwise
called directly (``lw.fit(..., whole_plot=...)``) and, for the prediction interval and the whole-plot effects,
from statsmodels ``MixedLM`` (REML) and scipy's t quantile on the same data.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats

import levelwise as lw
from levelwise import demo, slice_grid
from levelwise.model import MixedFit
from levelwise.widgets import EffectsView, FactorSliders, PredictionsView, ResidualInspector, SharedModel, SurfaceSlice
from levelwise.widgets.style import fmt

F32 = {"rel": 2e-6, "abs": 2e-5}  # float32 on the wire
SETTINGS = {"Oven": 204.0, "Dwell": 9.0, "Film": 81.0}


def reference_fit():
    return lw.fit(demo.split_plot_data(), "Impact", demo.SPLIT_PLOT_MODEL, factors=list(demo.SPLIT_PLOT_FACTORS),
                  whole_plot="whole_plot")


@pytest.fixture
def shared():
    return SharedModel.from_study(demo.split_plot_study())


def test_the_shared_model_of_a_split_plot_study_holds_the_reml_fit(shared):
    assert isinstance(shared.fit, MixedFit) and shared.error == ""
    np.testing.assert_allclose(shared.fit.beta, reference_fit().beta, rtol=1e-12)


def test_sliders_traces_slice_and_predictions_show_the_mixed_models_intervals(shared):
    sliders, surface, table = FactorSliders(shared), SurfaceSlice(shared, shape=(30, 20)), PredictionsView(shared)
    shared.settings = dict(SETTINGS)
    reference = reference_fit()
    expected = reference.predict(SETTINGS).iloc[0]
    # Independent check of that PI: statsmodels MixedLM components and GLS SE, t on the whole-plot df (scipy).
    data = demo.split_plot_data()
    coded = pd.DataFrame({"a": (data["Oven"] - 190) / 20, "b": (data["Dwell"] - 12) / 4, "c": (data["Film"] - 70) / 20,
                          "y": data["Impact"], "wp": data["whole_plot"]})
    ref = smf.mixedlm("y ~ a + b + c + a:b", coded, groups=coded["wp"]).fit(reml=True)
    q = stats.t.ppf(0.975, 6)  # 8 whole plots - rank [1, Oven]
    half = q * np.sqrt(expected["se_mean"] ** 2 + float(ref.cov_re.iloc[0, 0]) + ref.scale)
    assert expected["pi_high"] - expected["mean"] == pytest.approx(half, rel=1e-4)

    readout = sliders.readout.value
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span>' in readout
    assert f'{fmt(expected["ci_low"])} to {fmt(expected["ci_high"])}' in readout
    assert f'{fmt(expected["pi_low"])} to {fmt(expected["pi_high"])}' in readout
    curve = reference.trace("Film", SETTINGS, points=sliders.points)
    pi_band, ci_band, mean, _ = sliders._marks["Film"]
    assert np.asarray(mean.y) == pytest.approx(curve["mean"], **F32)
    assert np.asarray(ci_band.y)[0] == pytest.approx(curve["mean"] - curve["ci_half"], **F32)
    assert np.asarray(pi_band.y)[1] == pytest.approx(curve["mean"] + curve["pi_half"], **F32)

    surface.quantity.value = "pi_half"
    surface.flush()
    grid = slice_grid(reference, surface.x_factor.value, surface.y_factor.value, SETTINGS, shape=(30, 20))
    step = (np.nanmax(grid["pi_half"]) - np.nanmin(grid["pi_half"])) / 254
    assert surface.shown_values() == pytest.approx(grid["pi_half"], abs=step / 2 * 1.0001 + 1e-12)

    table.add_current()
    frame = table.to_frame()
    assert frame.loc[0, "Impact pi_high"] == pytest.approx(expected["pi_high"], rel=1e-12)
    assert frame.loc[0, "Impact ci_low"] == pytest.approx(expected["ci_low"], rel=1e-12)
    for view in (sliders, surface, table):
        view.close()


def test_residual_inspector_groups_residuals_by_whole_plot_with_the_predicted_effects(shared):
    view = ResidualInspector(shared)
    assert view.plot.value == "whole_plot" and "normal" not in [v for _, v in view.plot.options]
    reference = reference_fit()
    diag = reference.diagnostics
    effects = reference.whole_plot_effects
    position = {label: k for k, label in enumerate(effects.index, start=1)}
    assert np.asarray(view.used.x) == pytest.approx([position[w] for w in diag["whole_plot"]], **F32)
    assert np.asarray(view.used.y) == pytest.approx(diag["residual"].to_numpy(), **F32)
    # One dashed bar per whole plot at its predicted effect (BLUP), checked against statsmodels' random effects.
    data = demo.split_plot_data()
    ref = smf.mixedlm("Impact ~ Oven * Dwell + Film", data, groups=data["whole_plot"]).fit(reml=True)
    levels = np.asarray(view.guides.y, dtype=float)[::3]
    blups = [float(ref.random_effects[label].iloc[0]) for label in effects.index]
    assert levels == pytest.approx(blups, rel=1e-3, abs=1e-4)
    view.run.value = 5
    row = diag.loc[5]
    assert f"Whole plot: {int(row['whole_plot'])};" in view.detail.value
    assert fmt(row["whole_plot_effect"]) in view.detail.value and fmt(row["conditional_residual"]) in view.detail.value
    assert "not available for a split-plot (REML) fit" in view.box_cox.value
    # Leaving a run out refits by REML; the run stays visible as an excluded point in its whole plot.
    shared.exclude(5, "panel dropped (invented)")
    assert isinstance(shared.fit, MixedFit) and 5 not in list(shared.fit.runs)
    assert list(np.asarray(view.excluded.x)) == [position[int(row["whole_plot"])]]
    for _, choice in view.plot.options:
        view.plot.value = choice
        assert view.status.value == "", choice
    view.close()


def test_effects_view_shows_the_stratum_tests_and_says_why_there_is_no_half_normal_plot(shared):
    view = EffectsView(shared)
    assert "not available for a split-plot (REML) fit" in view.lenth_text.value
    assert "whole-plot" in view.anova_table.value and "sub-plot" in view.anova_table.value
    assert view.status.value == ""
    view.close()


def test_the_published_page_and_the_workbench_open_a_split_plot_study():
    import html
    import json
    import re
    from pathlib import Path

    from levelwise.dashboards import explore, present

    path = str(Path(__file__).resolve().parents[1] / "dashboards" / "data" / "demo_split_plot.json")  # invented
    page = present.build(path)
    assert isinstance(page.shared.fit, MixedFit) and page.shared.read_only
    readout = page.views[0]
    assert "Split-plot analysis (REML)" in readout.summary.value
    assert "Oven</b>: tested from 170 to 210 °C (hard to change: held over whole plots)" in readout.summary.value
    fits = json.loads(html.unescape(re.search(r'data-fits="([^"]*)"', readout.fingerprint.value).group(1)))
    reference = reference_fit()
    assert fits["Impact"]["beta"] == pytest.approx(list(reference.beta), rel=1e-12)
    assert fits["Impact"]["s"] == pytest.approx(float(np.sqrt(reference.variance_components.sum())), rel=1e-12)
    assert all(getattr(getattr(v, "status", None), "value", "") == "" for v in page.views)
    bench = explore.build(path)
    assert isinstance(bench.shared.fit, MixedFit)
    assert all(getattr(getattr(v, "status", None), "value", "") == "" for v in bench.views)
