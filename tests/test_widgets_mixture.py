"""The views on a mixture study, headless: mixture sliders, Cox-direction traces, the ternary slice, and the
existing views that say in words that they do not apply.

Studies: the yarn elongation example (tests/data/yarn_elongation.csv; J. A. Cornell, Experiments with Mixtures,
FROM MEMORY, see tests/data/SOURCES.md) and the INVENTED, seeded powder reformulation of kernel_core/_mixture_demo.py.
Every number shown is checked against statsmodels OLS without an intercept on hand-written Scheffé columns
(``get_prediction``: mean, CI and PI) at blends computed by hand here: the Cox direction x_j = r_j (T - t) / (T - r_i)
(Cox 1971, Biometrika 58, 155-159) and the barycentric map of the triangle (common practice).
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from widget_support import browser_update

import levelwise as lw
from levelwise import _mixture_demo as mdemo
from levelwise.model import ternary_halfplanes
from levelwise.study import Study
from levelwise.widgets import (
    CoxTraces,
    DesignBuilder,
    EffectsView,
    FactorSliders,
    MixtureSliders,
    ReadOnlyError,
    SharedModel,
    SurfaceSlice,
    TernarySlice,
)
from levelwise.widgets.style import CIVIDIS, SURFACE_QUANTITIES, fmt

F32 = {"rel": 2e-6, "abs": 2e-5}  # float32 on the wire
YARN = ["x1", "x2", "x3"]


def quadratic_columns(x):
    """Scheffé quadratic columns written out by hand: x_i, then x_i x_j (i < j)."""
    q = x.shape[1]
    return np.column_stack([x[:, i] for i in range(q)]
                           + [x[:, i] * x[:, j] for i, j in itertools.combinations(range(q), 2)])


def yarn_study() -> Study:
    yarn = pd.read_csv(Path(__file__).parent / "data" / "yarn_elongation.csv")
    study = Study(components=[lw.Component(n) for n in YARN], title="yarn")
    ids = study.add_stage("lattice", yarn[YARN])
    study.add_response("elongation", units="kg")
    for run, value in zip(ids, yarn["elongation"]):
        study.record(run, "elongation", float(value))
    study.set_model("elongation", "scheffe_quadratic")
    return study


def demo_study() -> Study:
    design, data = mdemo.reformulation_stage()
    study = Study(components=mdemo.COMPONENTS, total=mdemo.TOTAL, title=mdemo.TITLE)
    study.add_stage("reformulation", design)
    for name, (units, goal, target) in mdemo.RESPONSES.items():
        study.add_response(name, units=units, goal=goal, target=target)
        for run, value in zip(data["run"], data[name]):
            study.record(int(run), name, float(value))
        study.set_model(name, "scheffe_quadratic")
    return study


def reference(study, response):
    """statsmodels OLS, no intercept, on the Scheffé quadratic columns of the proportions (amount / total)."""
    data = study.data()
    names = study.component_names
    x = data[names].to_numpy() / study.mixture.total
    return sm.OLS(data[response].to_numpy(), quadratic_columns(x)).fit()


def predicted(ref, blends, total):
    frame = ref.get_prediction(quadratic_columns(np.atleast_2d(blends) / total)).summary_frame(alpha=0.05)
    return frame["mean"].to_numpy(), (frame["mean_ci_upper"] - frame["mean"]).to_numpy(), \
        (frame["obs_ci_upper"] - frame["mean"]).to_numpy()


def move_resin_to_70(shared, view) -> dict:
    """Move Resin's slider to 70 as a browser does; the blend the Cox direction gives, worked by hand: the others
    keep their relative proportions, x_j = r_j (100 - 70) / (100 - r_Resin)."""
    names = shared.component_names
    r = np.array([shared.settings[n] for n in names])
    browser_update(view.sliders["Resin"], value=70.0)
    view.move("Resin", 70.0)  # flush the coalesced slider event
    return {"Resin": 70.0} | {n: r[j] * 30.0 / (100.0 - r[0]) for j, n in enumerate(names) if n != "Resin"}


def test_moving_a_component_slider_rescales_the_others_along_the_cox_direction():
    shared = SharedModel.from_study(demo_study())
    view = MixtureSliders(shared)
    names = shared.component_names
    expected = move_resin_to_70(shared, view)
    for name in names:
        assert shared.settings[name] == pytest.approx(expected[name], abs=1e-9)
        assert view.sliders[name].value == pytest.approx(expected[name], abs=1e-9)
    assert sum(shared.blend().values()) == pytest.approx(100.0, abs=1e-9)
    # Bounds: each slider spans the implied bounds, the declared ones are written beside it.
    assert (view.sliders["Resin"].min, view.sliders["Resin"].max) == (50.0, 75.0)
    assert view.bounds["Hardener"].value.startswith("bounds 5 to 15 %")
    # A move past what the bounds allow stops at the bound (Hardener's upper bound 15 here).
    view.move("Hardener", 15.0)
    assert shared.settings["Hardener"] == pytest.approx(15.0, abs=1e-9)
    # The readout is statsmodels' prediction at the blend.
    blend = np.array([shared.settings[n] for n in names])
    for response in ("Impact", "Gloss"):
        mean, ci, pi = predicted(reference(shared.study, response), blend, 100.0)
        block = view.readout.value.split("<hr>")[list(shared.responses).index(response)]
        assert f'<span class="lw-mean">{fmt(mean[0])}</span>' in block
        assert f'<span class="lw-ci">{fmt(mean[0] - ci[0])} to {fmt(mean[0] + ci[0])}</span>' in block
        assert f'<span class="lw-pi">{fmt(mean[0] - pi[0])} to {fmt(mean[0] + pi[0])}</span>' in block
    assert "Blend total: 100 %" in view.total.value


def test_cox_traces_one_curve_per_component_with_both_bands_match_statsmodels():
    shared = SharedModel.from_study(yarn_study())
    shared.set_blend(x1=0.5, x2=0.3, x3=0.2)
    view = CoxTraces(shared, points=11)
    assert view.x_axis.label == "change in proportion from the reference blend"
    assert set(view.means) == set(YARN) and len(view.figure.marks) == 3 * 3 + 1
    ref = reference(shared.study, "elongation")
    r = np.array([0.5, 0.3, 0.2])
    for i, name in enumerate(YARN):
        t = np.linspace(0.0, 1.0, 11)  # no bounds: each component runs over 0..1
        blends = np.array([[tt if j == i else r[j] * (1 - tt) / (1 - r[i]) for j in range(3)] for tt in t])
        mean, ci, pi = predicted(ref, blends, 1.0)
        assert np.asarray(view.means[name].x) == pytest.approx(t - r[i], **F32)  # the common axis
        assert np.asarray(view.means[name].y) == pytest.approx(mean, **F32)
        assert np.asarray(view.ci_bands[name].y) == pytest.approx(np.vstack([mean - ci, mean + ci]), **F32)
        assert np.asarray(view.pi_bands[name].y) == pytest.approx(np.vstack([mean - pi, mean + pi]), **F32)
    assert np.asarray(view.marker.x).tolist() == [0.0]
    assert "95% confidence interval for the mean" in view.caption.value
    assert "95% prediction interval for a single new run" in view.caption.value


def test_ternary_slice_values_points_marker_and_click():
    shared = SharedModel.from_study(demo_study())
    view = TernarySlice(shared, axes=("Resin", "Filler", "Hardener"), shape=(41, 36))
    view.flush()
    grid = view.grid
    r = np.array([shared.settings[n] for n in shared.component_names])  # Resin, Hardener, Filler, Pigment
    share = 100.0 - r[3]
    lows = np.array([50.0, 10.0, 5.0])  # Resin, Filler, Hardener: their lower bounds (the zoomed triangle)
    assert grid["share"] == pytest.approx(share) and grid["lows"] == pytest.approx(lows)
    # By hand: point (x, y) -> c = y / (sqrt(3)/2), b = x - c/2, a = 1 - b - c; amounts L + (a, b, c)(S - sum L).
    gx, gy = np.meshgrid(grid["x"], grid["y"])
    c = gy / (np.sqrt(3) / 2)
    b = gx - c / 2
    a = 1 - b - c
    span = share - lows.sum()
    resin, filler, hardener = lows[0] + a * span, lows[1] + b * span, lows[2] + c * span
    inside = (np.minimum(np.minimum(a, b), c) >= -1e-12) & (resin <= 75 + 1e-7) & (filler <= 35 + 1e-7) \
        & (hardener <= 15 + 1e-7)
    assert np.array_equal(grid["inside"], inside) and inside.sum() > 100
    blends = np.column_stack([resin[inside], hardener[inside], filler[inside], np.full(inside.sum(), r[3])])
    mean, ci, pi = predicted(reference(shared.study, "Impact"), blends, 100.0)
    assert grid["mean"][inside] == pytest.approx(mean, rel=1e-9, abs=1e-9)
    assert grid["ci_half"][inside] == pytest.approx(ci, rel=1e-9, abs=1e-9)
    assert grid["pi_half"][inside] == pytest.approx(pi, rel=1e-9, abs=1e-9)
    assert np.isnan(grid["mean"][~inside]).all()
    shown = view.shown_values()
    step = (np.nanmax(mean) - np.nanmin(mean)) / 508
    assert np.nanmax(np.abs(shown - grid["mean"])) <= step + 1e-9  # within half a colour code
    assert np.isnan(np.asarray(view.heatmap.color)[~inside]).all()  # blank outside the bounds
    # The white mask covers the outside of each side of the region: the same region, written as half-planes.
    H = ternary_halfplanes(shared.mixture, view.axes, shared.settings)
    slack = H[:, 2] - (gx[..., None] * H[:, 0] + gy[..., None] * H[:, 1])
    clear = np.abs(slack).min(axis=-1) > 1e-6  # points not on a side
    assert np.array_equal((slack >= 0).all(axis=-1)[clear], inside[clear])
    mx, my = np.asarray(view.mask.x, dtype=float), np.asarray(view.mask.y, dtype=float)
    assert len(mx) >= 3
    for px, py in zip(mx, my):  # every mask polygon lies outside the region (its centre breaks some side)
        assert ((H[:, 0] * px.mean() + H[:, 1] * py.mean()) > H[:, 2]).any()
    # The surface slice's colour map and wording.
    assert view.sc.colors == CIVIDIS and SURFACE_QUANTITIES["mean"] in view.caption.value
    assert "Click the slice to move the blend there" in view.caption.value
    # Design points projected onto the triangle; the marker at the current blend.
    data = shared.data
    amounts = data[["Resin", "Filler", "Hardener"]].to_numpy() - lows
    bary = amounts / amounts.sum(axis=1, keepdims=True)
    assert np.asarray(view.points.x) == pytest.approx(bary[:, 1] + bary[:, 2] / 2, **F32)
    rb = (r[[0, 2, 1]] - lows) / span
    assert np.asarray(view.marker.x)[0] == pytest.approx(rb[1] + rb[2] / 2, **F32)
    # A click (the catcher's added point, as bqplot's "add" mode sends it) moves the three components to the
    # nearest lattice point inside the region; Pigment is held.
    xs, ys = view._lattice
    k = len(xs) // 2
    tx, ty = float(xs[k]), float(ys[k])
    browser_update(view.clicks, x=[tx + 0.004], y=[ty - 0.003])  # well within half a lattice step (1/60)
    assert len(view.clicks.x) == 0  # cleared for the next click
    c, b = ty / (np.sqrt(3) / 2), tx - ty / np.sqrt(3)
    assert shared.settings["Filler"] == pytest.approx(lows[1] + b * span, abs=1e-4)
    assert shared.settings["Hardener"] == pytest.approx(lows[2] + c * span, abs=1e-4)
    assert shared.settings["Pigment"] == r[3] and sum(shared.blend().values()) == pytest.approx(100.0, abs=1e-9)
    view.flush()
    assert np.asarray(view.marker.x)[0] == pytest.approx(tx, abs=1e-4)


def test_a_click_outside_the_bounds_is_refused_in_words_and_moves_nothing():
    shared = SharedModel.from_study(demo_study())
    view = TernarySlice(shared)
    before = dict(shared.settings)
    view.click_at(0.0, 0.0)  # Resin at its largest with the others at their lows: Resin above 75
    assert shared.settings == before
    assert "The blend was not moved" in view.status.value and "Resin" in view.status.value


def test_a_read_only_model_moves_the_blend_but_refuses_a_blend_that_breaks_the_total():
    shared = SharedModel.from_study(demo_study(), read_only=True)
    view = MixtureSliders(shared)
    view.move("Filler", 30.0)
    assert shared.settings["Filler"] == pytest.approx(30.0) and sum(shared.blend().values()) == pytest.approx(100.0)
    with pytest.raises(lw.LevelwiseError, match=r"does not sum to the mixture total 100: Resin"):
        shared.settings = {**shared.settings, "Resin": 74.0}
    with pytest.raises(ReadOnlyError):
        shared.set_model("Impact", "scheffe_linear")


def test_views_that_do_not_apply_to_a_mixture_say_so_in_words():
    shared = SharedModel.from_study(yarn_study())
    surface = SurfaceSlice(shared)
    assert "ternary slice" in surface.caption.value and surface.status.value == ""
    effects = EffectsView(shared)
    assert "not available" in effects.lenth_text.value and "Cox-direction" in effects.lenth_text.value
    assert "blending coefficients over the proportions" in effects.coefficient_table.value
    builder = DesignBuilder(shared)
    assert "mixture components" in builder.mixture_note.value and builder.status.value == ""
    sliders = FactorSliders(shared)
    assert "mixture sliders" in sliders.slider_box.children[0].value
    assert 'class="lw-mean"' in sliders.readout.value  # the readout still works
    # And the mixture views on a study without components.
    plain = SharedModel.from_study(lw.Study.load(Path(__file__).parents[1] / "dashboards" / "data"
                                                 / "demo_campaign.json"))
    assert "no mixture components" in MixtureSliders(plain).slider_box.children[0].value
    assert "no mixture components" in CoxTraces(plain).caption.value
    assert "three mixture components" in TernarySlice(plain).caption.value


def test_the_workbench_and_the_published_page_compose_the_mixture_views():
    from levelwise.dashboards import explore, present

    path = str(Path(__file__).resolve().parents[1] / "dashboards" / "data" / "demo_reformulation.json")  # invented
    bench = explore.build(path)
    names = [type(v).__name__ for v in bench.views]
    assert {"MixtureSliders", "CoxTraces", "TernarySlice"} <= set(names)
    assert "SurfaceSlice" not in names and "FactorSliders" not in names
    assert all(v.status.value == "" for v in bench.views)  # no view shows an error on the mixture study
    page = present.build(path)
    assert [type(v).__name__ for v in page.views] == ["StudyReadout", "MixtureSliders", "CoxTraces", "TernarySlice",
                                                      "PredictionsView", "OptimizerView"]
    assert page.shared.read_only and "4 mixture components whose amounts sum to 100 %" in page.views[0].summary.value
