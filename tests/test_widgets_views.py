"""Every view on one shared model, driven headless through traits, methods and browser-shaped messages.

Reference numbers come from levelwise called directly in the test (the views must show exactly the
kernel's numbers); the demo data is the invented, seeded scenario of kernel_core/demo.py.
"""

from __future__ import annotations

import asyncio
import io
import threading
from unittest import mock

import bqplot as bq
import numpy as np
import pandas as pd
import pytest
import traitlets
from widget_support import browser_event, browser_update, install_recording_comm, message_bytes

from levelwise import LevelwiseError, central_composite, demo, fit, fold_over, optimize, slice_grid
from levelwise.widgets import (
    DesignBuilder,
    EffectsView,
    FactorSliders,
    OptimizerView,
    PredictionsView,
    ReadOnlyError,
    ResidualInspector,
    SharedModel,
    SurfaceSlice,
)
from levelwise.widgets.style import fmt

F32 = {"rel": 2e-6, "abs": 2e-5}  # float32 on the wire: ~7 significant digits


def assert_heatmap_shows(surface, expected):
    """The heat map's uint8 codes decode to *expected* within half a code step (the range / 508)."""
    expected = np.asarray(expected, dtype=float)
    assert np.asarray(surface.heatmap.color).dtype == np.uint8
    step = (np.nanmax(expected) - np.nanmin(expected)) / 254
    assert surface.shown_values() == pytest.approx(expected, abs=step / 2 * 1.0001 + 1e-12)


def demo_data_two_responses() -> pd.DataFrame:
    """The demo runs plus a second INVENTED response (gloss, GU), seeded, for several-response checks."""
    data = demo.demo_data()
    coded = demo.demo_design().coded
    rng = np.random.default_rng(7)  # invented data, seeded
    data["Gloss"] = np.round(80 - 4 * coded["Oven"] + 3 * coded["Film"] + rng.normal(0, 0.8, len(data)), 1)
    return data


def make_shared(read_only=False, data=None):
    data = demo.demo_data() if data is None else data
    responses = [r for r in ("Impact", "Gloss") if r in data]
    return SharedModel(
        demo.FACTORS, data, responses=responses, models={"Impact": demo.MODEL, "Gloss": "main_effects"},
        units={"Impact": "J", "Gloss": "GU"}, design=demo.demo_design(), read_only=read_only,
    )


def all_views(shared):
    return {
        "sliders": FactorSliders(shared),
        "slice": SurfaceSlice(shared, shape=(40, 30)),
        "residuals": ResidualInspector(shared),
        "effects": EffectsView(shared),
        "predictions": PredictionsView(shared),
        "optimizer": OptimizerView(shared, seed=3, starts=5),
        "builder": DesignBuilder(shared),
    }


def kernel_fit(data=None, model=demo.MODEL, drop_runs=()):
    data = demo.demo_data() if data is None else data
    data = data[~data["run"].isin(drop_runs)]
    return fit(data, "Impact", model, factors=demo.FACTORS)


@pytest.fixture
def shared():
    return make_shared()


@pytest.fixture
def views(shared):
    built = all_views(shared)
    yield built
    for view in built.values():
        view.close()


# ----- a setting moves every dependent view to the kernel's numbers ---------------------------------
def test_moving_a_setting_updates_every_view_to_the_kernel_numbers(shared, views):
    views["predictions"].add_current()
    shared.settings = {"Oven": 204.0, "Dwell": 9.0, "Film": 81.0, "Catalyst": 1.3}
    reference = kernel_fit()  # levelwise called directly
    expected = reference.predict(shared.settings).iloc[0]

    readout = views["sliders"].readout.value
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span>' in readout
    assert f'{fmt(expected["ci_low"])} to {fmt(expected["ci_high"])}' in readout
    assert f'{fmt(expected["pi_low"])} to {fmt(expected["pi_high"])}' in readout
    assert views["sliders"].sliders["Oven"].value == 204.0
    curve = reference.trace("Film", shared.settings, points=views["sliders"].points)
    pi_band, ci_band, mean, marker = views["sliders"]._marks["Film"]
    assert np.asarray(mean.y) == pytest.approx(curve["mean"], **F32)
    assert np.asarray(ci_band.y)[0] == pytest.approx(curve["mean"] - curve["ci_half"], **F32)
    assert np.asarray(pi_band.y)[1] == pytest.approx(curve["mean"] + curve["pi_half"], **F32)
    assert float(marker.y[0]) == pytest.approx(expected["mean"], **F32)

    surface = views["slice"]
    surface.flush()  # refreshes are coalesced when an event loop runs (e.g. a browser test's)
    grid = slice_grid(reference, "Oven", "Dwell", shared.settings, shape=(40, 30))
    assert_heatmap_shows(surface, grid["mean"])
    assert (float(surface.marker.x[0]), float(surface.marker.y[0])) == (204.0, 9.0)
    surface.quantity.value = "pi_half"
    surface.flush()
    assert_heatmap_shows(surface, grid["pi_half"])

    # The row added before the move keeps its own settings; a new row takes the new ones.
    views["predictions"].add_current()
    table = views["predictions"].to_frame()
    assert table.loc[1, "Impact mean"] == pytest.approx(expected["mean"], rel=1e-12)
    assert table.loc[1, "Impact pi_high"] == pytest.approx(expected["pi_high"], rel=1e-12)
    centre = reference.predict({f.name: f.center for f in demo.FACTORS}).iloc[0]
    assert table.loc[0, "Impact ci_low"] == pytest.approx(centre["ci_low"], rel=1e-12)


def test_readout_covers_every_response_and_the_display_choice_switches_traces():
    shared = make_shared(data=demo_data_two_responses())
    view = FactorSliders(shared)
    gloss = fit(demo_data_two_responses(), "Gloss", "main_effects", factors=demo.FACTORS)  # kernel reference
    expected = gloss.predict(shared.settings).iloc[0]
    assert "<b>Gloss</b>" in view.readout.value and fmt(expected["mean"]) in view.readout.value
    browser_update(view.response_choice, index=1)  # the display choice, as a browser sends it
    assert shared.response == "Gloss"
    curve = gloss.trace("Oven", shared.settings, points=view.points)
    assert np.asarray(view._marks["Oven"][2].y) == pytest.approx(curve["mean"], **F32)
    assert shared.fit is shared.fits["Gloss"]


def test_clicking_the_slice_sets_both_axis_factors(shared, views):
    """A click adds one point to the click catcher (bqplot's "add" mode sends the catcher's x and y with the
    point appended); the axis factors move to the nearest of the 41 x 41 grid points and the catcher is
    cleared for the next click."""
    surface = views["slice"]
    low_x, high_x = demo.FACTORS[0].low, demo.FACTORS[0].high  # Oven, the slice's first axis factor
    low_y, high_y = demo.FACTORS[1].low, demo.FACTORS[1].high  # Dwell
    # 0.4 of a grid step past grid point 7 across and 0.3 of a step short of grid point 3 up.
    at_x = low_x + (7 + 0.4) * (high_x - low_x) / 40
    at_y = low_y + (3 - 0.3) * (high_y - low_y) / 40
    browser_update(surface.clicks, x=[at_x], y=[at_y])
    assert shared.settings["Oven"] == pytest.approx(low_x + 7 * (high_x - low_x) / 40)
    assert shared.settings["Dwell"] == pytest.approx(low_y + 3 * (high_y - low_y) / 40)
    assert len(surface.clicks.x) == 0 and len(surface.clicks.y) == 0
    # A second click far outside the plot area snaps to the grid's corner (the tested range), never beyond.
    browser_update(surface.clicks, x=[high_x + 1000.0], y=[low_y - 1000.0])
    assert (shared.settings["Oven"], shared.settings["Dwell"]) == pytest.approx((high_x, low_y))


def test_a_crafted_click_without_a_finite_point_changes_nothing(shared, views):
    surface = views["slice"]
    before = dict(shared.settings)
    browser_update(surface.clicks, x=["not a number"], y=[1.0])
    browser_update(surface.clicks, x=[float("nan")], y=[12.0])
    assert shared.settings == before
    assert "finite position on both axes" in surface.status.value
    assert len(surface.clicks.x) == 0


def test_the_slice_carries_no_grid_of_click_targets(shared, views):
    """Every mark of the slice stays small: no mark draws one element per click grid point (a 41 x 41 grid
    of invisible targets was three quarters of the published page's elements, redrawn on every frame)."""
    surface = views["slice"]
    surface.flush()
    for mark in surface.figure.marks:
        if isinstance(mark, bq.Scatter):
            assert np.size(mark.x) <= len(demo.demo_data()), type(mark).__name__
    assert surface.clicks.interactions == {"click": "add"}


def test_slice_refreshes_are_coalesced_inside_an_event_loop(shared, views):
    surface = views["slice"]
    surface.flush()
    before = surface.redraws

    async def drag():
        for film in (60.0, 62.0, 64.0, 66.0, 68.0):
            shared.set_settings(Film=film)
        await asyncio.sleep(0.1)

    # A fresh event loop in its own thread, as a kernel has (another test's loop may be set on this one).
    worker = threading.Thread(target=asyncio.run, args=(drag(),))
    worker.start()
    worker.join(10)
    assert surface.redraws == before + 1  # five slider events, one slice computed
    grid = slice_grid(kernel_fit(), "Oven", "Dwell", shared.settings, shape=(40, 30))
    assert_heatmap_shows(surface, grid["mean"])  # the latest value won


def test_moving_an_axis_factor_only_moves_the_marker(shared, views):
    surface = views["slice"]
    surface.flush()
    before = surface.redraws
    shared.set_settings(Oven=177.0)
    surface.flush()
    assert surface.redraws == before
    assert float(surface.marker.x[0]) == 177.0


# ----- exclusions, model edits, failures --------------------------------------------------------------
def test_an_exclusion_from_the_inspector_refits_every_view(shared, views):
    inspector = views["residuals"]
    views["predictions"].add_current()
    inspector.plot.value = "fitted"
    browser_event(inspector.used, {"event": "element_click", "data": {"index": 4}})
    run = inspector.run.value
    assert run == int(demo.demo_data()["run"].iloc[4])
    inspector.reason.value = "coating gun clogged during this run"
    inspector.exclude_button.click()

    reference = kernel_fit(drop_runs=[run])  # levelwise refit from scratch without the run
    assert shared.exclusions == {run: "coating gun clogged during this run"}
    assert shared.fit.coefficients["estimate"].to_numpy() == pytest.approx(
        reference.coefficients["estimate"].to_numpy(), rel=1e-10
    )
    expected = reference.predict(shared.settings).iloc[0]
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span>' in views["sliders"].readout.value
    views["slice"].flush()
    grid = slice_grid(reference, "Oven", "Dwell", shared.settings, shape=(40, 30))
    assert_heatmap_shows(views["slice"], grid["mean"])
    assert len(views["slice"].excluded_points.x) == 1  # excluded runs stay visible, marked
    assert len(inspector.excluded.x) == 1 and len(inspector.used.x) == 18
    assert "coating gun clogged" in inspector.excluded_list.value
    assert fmt(reference.coefficients.loc["Oven", "estimate"]) in views["effects"].coefficient_table.value
    assert views["predictions"].to_frame().loc[0, "Impact mean"] == pytest.approx(
        reference.predict({f.name: f.center for f in demo.FACTORS})["mean"].iloc[0], rel=1e-12
    )

    inspector.include_button.click()
    assert shared.exclusions == {} and shared.fit.n == 19


def test_an_exclusion_the_kernel_refuses_changes_nothing():
    data = demo.demo_data()
    centre_runs = data.loc[data["role"] == "centre", "run"].tolist()
    data = data[~data["run"].isin(centre_runs[1:])]  # one centre run left: it alone separates Oven^2
    shared = SharedModel(demo.FACTORS, data, "Impact", "Oven + Dwell + I(Oven**2)")
    before = shared.fit
    with pytest.raises(LevelwiseError, match="leverage is 1"):
        shared.exclude(centre_runs[0], "trial")
    assert shared.exclusions == {} and shared.fit is before and "leverage is 1" in shared.error


def test_a_model_edit_updates_the_tables(shared, views):
    effects = views["effects"]
    effects.model_text.value = "Oven + Dwell + Film"
    reference = kernel_fit(model="Oven + Dwell + Film")
    assert shared.fit.terms == ("Intercept", "Oven", "Dwell", "Film")
    anova = effects.anova_table.value
    assert "Catalyst" not in anova
    assert fmt(reference.anova.loc["Film", "F"]) in anova
    assert fmt(reference.coefficients.loc["Dwell", "t"]) in effects.coefficient_table.value
    assert [t.value for t in effects.term_toggles.values()][:4] == [True, True, True, False]


def test_term_toggles_keep_the_model_hierarchical(shared, views):
    toggles = views["effects"].term_toggles
    toggles["Oven"].value = False  # Oven:Dwell and Oven:Catalyst contain Oven: they go too
    assert shared.fit.terms == ("Intercept", "Dwell", "Film", "Catalyst")
    toggles["Oven:Film"].value = True  # brings Oven back with it
    assert set(shared.fit.terms) == {"Intercept", "Oven", "Dwell", "Film", "Catalyst", "Oven:Film"}


def test_half_normal_and_lenth_come_from_the_kernel(shared, views):
    effects = views["effects"]
    screening = fit(demo.demo_data(), "Impact", "two_factor_interactions", factors=demo.FACTORS)  # kernel reference
    lenth = screening.lenth()
    coords = screening.half_normal()
    shown = np.sort(np.r_[np.asarray(effects.hn_points.x), np.asarray(effects.hn_active.x)])
    assert shown == pytest.approx(np.sort(coords["abs_effect"].to_numpy()), **F32)
    assert float(effects.me_line.x[0]) == pytest.approx(lenth.me, **F32)
    assert float(effects.sme_line.x[0]) == pytest.approx(lenth.sme, **F32)
    assert fmt(lenth.pse) in effects.lenth_text.value
    effects.measure.value = "t"
    t = shared.fit.coefficients["t"].drop("Intercept").abs().sort_values(ascending=False)
    assert list(effects.bar_mark.x) == list(screening.coefficients["t"].drop("Intercept").abs()
                                            .sort_values(ascending=False).index)
    assert len(t) == 6


def test_a_failing_refit_shows_the_error_once_and_keeps_the_last_fit(shared, views):
    before = shared.fit
    shared.set_model("Impact", "Oven + Nonsense")
    assert shared.fit is before and shared.fits["Impact"] is before
    assert "Nonsense" in shared.error
    # One message, not one per view: the first view made shows it (a view the user edits in claims it).
    showing = [name for name, view in views.items() if "Nonsense" in view.status.value]
    assert showing == [next(iter(views))]
    assert "lw-error" in views[showing[0]].status.value
    expected = kernel_fit().predict(shared.settings).iloc[0]  # the last good fit still answers
    assert fmt(expected["mean"]) in views["sliders"].readout.value
    shared.set_model("Impact", demo.MODEL)
    assert shared.error == "" and all("lw-error" not in v.status.value for v in views.values())


def test_one_notification_per_refit(shared, views):
    on_fits, on_fit = mock.Mock(), mock.Mock()
    shared.observe(on_fits, names="fits")
    shared.observe(on_fit, names="fit")
    shared.set_model("Impact", "Oven + Dwell")
    assert (on_fits.call_count, on_fit.call_count) == (1, 1)
    shared.exclude(5, "thermocouple fault")
    assert (on_fits.call_count, on_fit.call_count) == (2, 2)
    shared.include(5)
    assert (on_fits.call_count, on_fit.call_count) == (3, 3)
    shared.set_settings(Oven=200.0)
    assert (on_fits.call_count, on_fit.call_count) == (3, 3)  # moving a setting refits nothing


# ----- read-only --------------------------------------------------------------------------------------
def frozen_state(shared):
    return (shared.fit, shared.fits, shared.data, dict(shared.models), dict(shared.exclusions), shared.factors)


def test_read_only_refuses_every_mutating_method():
    shared = make_shared(read_only=True)
    before = frozen_state(shared)
    design = central_composite(demo.FACTORS, seed=1)
    attempts = [
        lambda: shared.set_model("Impact", "Oven"),
        lambda: shared.set_model("Oven"),
        lambda: shared.set_data(demo.demo_data().iloc[:10]),
        lambda: shared.exclude(3, "no reason needed"),
        lambda: shared.include(3),
        lambda: shared.new_study(design, {"Gloss": "GU"}),
        lambda: setattr(shared, "models", {"Impact": "Oven"}),
        lambda: setattr(shared, "exclusions", {3: "sneaky"}),
        lambda: setattr(shared, "data", demo.demo_data().iloc[:10]),
        lambda: setattr(shared, "fits", {}),
        lambda: setattr(shared, "fit", None),
        lambda: setattr(shared, "factors", ()),
        lambda: shared.set_settings(Oven=500.0),  # read-only settings stay inside the tested region
    ]
    for attempt in attempts:
        with pytest.raises(ReadOnlyError, match="read-only"):
            attempt()
        assert frozen_state(shared) == before
    with pytest.raises(traitlets.TraitError, match="read-only"):
        shared.read_only = False
    shared.set_settings(Oven=180.0)  # moving a setting inside the region is allowed
    shared.response = "Impact"  # so is choosing what to display
    assert shared.settings["Oven"] == 180.0


def test_read_only_rejects_crafted_browser_messages_to_every_view(monkeypatch):
    log = install_recording_comm(monkeypatch)
    shared = make_shared(read_only=True)
    views = all_views(shared)
    before = frozen_state(shared)
    assert log, "the recording comm saw no messages: widgets were not opened through it"

    effects, inspector, builder = views["effects"], views["residuals"], views["builder"]
    browser_update(effects.model_text, value="Oven")  # a crafted model text
    browser_update(effects.term_toggles["Oven"], value=False)  # a crafted term toggle
    browser_update(inspector.run, index=2)
    browser_update(inspector.reason, value="crafted")
    browser_event(inspector.exclude_button, {"event": "click"})  # a click on a hidden, disabled button
    browser_event(inspector.include_button, {"event": "click"})
    browser_event(builder.create_button, {"event": "click"})
    slider = views["sliders"].sliders["Oven"]
    browser_update(slider, max=1000.0, value=900.0)  # raising a slider's max, then going past the region
    assert frozen_state(shared) == before
    assert shared.settings["Oven"] == 190.0 and slider.max == 210.0 and slider.value == 190.0
    assert effects.model_text.value == demo.MODEL
    assert effects.term_toggles["Oven"].value is True
    assert "read-only" in shared.error

    browser_update(slider, value=200.0)  # moving a slider inside the region is what read-only allows
    assert shared.settings["Oven"] == 200.0


def test_read_only_controls_are_disabled_and_hidden():
    shared = make_shared(read_only=True)
    inspector, effects, builder = ResidualInspector(shared), EffectsView(shared), DesignBuilder(shared)
    assert inspector.exclude_button.disabled and inspector.exclude_button.layout.display == "none"
    assert effects.model_text.disabled and all(t.disabled for t in effects.term_toggles.values())
    assert builder.create_button.disabled


# ----- design builder, optimiser, study ---------------------------------------------------------------
def test_design_builder_previews_kernel_designs_and_creates_a_study(shared, views):
    builder = views["builder"]
    builder.options["seed"].value = 11
    builder.family.value = "ccd"
    reference = central_composite(list(demo.FACTORS), seed=11)  # levelwise called directly
    pd.testing.assert_frame_equal(builder.design.table, reference.table)
    assert f"{len(reference)} runs" in builder.run_sheet.value
    assert "Relative prediction variance" in builder.evaluation.value
    builder.family.value = "fractional"
    assert builder.design.resolution == 4 and "lw-resolution" in builder.structure.value
    assert "Alias structure" in builder.structure.value
    builder.family.value = "optimal"
    builder.options["runs"].value = 16
    builder.options["starts"].value = 2
    builder.search()
    assert builder.progress.value == 1.0 and len(builder.design) == 16
    builder.family.value = "ccd"
    builder.responses.value = "Gloss (GU), Hardness"
    builder.create_button.click()
    assert shared.responses == ("Gloss", "Hardness") and shared.units["Gloss"] == "GU"
    assert shared.data["Gloss"].isna().all() and len(shared.data) == len(reference)
    assert shared.fit is None and shared.fits == {}
    from levelwise.widgets.style import plain_text

    assert [plain_text(s.description) for s in views["sliders"].sliders.values()] == [f.label for f in demo.FACTORS]
    for view in views.values():
        assert "Internal error" not in view.status.value


def test_design_builder_fold_over_and_augmentation_add_runs_after_the_study(shared, views):
    builder = views["builder"]
    builder.options["seed"].value = 5
    builder.family.value = "fold_over"
    base = shared.design  # the demo's 2^4 full factorial with 3 centre points, runs 1..19
    reference = base.combine(fold_over(base, seed=5))  # levelwise called directly
    pd.testing.assert_frame_equal(builder.design.table, reference.table)
    pd.testing.assert_frame_equal(builder.design.table.iloc[:len(base)], base.table)  # current runs first, as run
    new = builder.design.table.iloc[len(base):]
    assert new.run.tolist() == list(range(20, 36)) and set(new.block) == {2}
    builder.family.value = "optimal"
    builder.options["augment"].value = True
    builder.options["runs"].value = 4
    builder.options["starts"].value = 2
    builder.search()
    assert len(builder.design) == 4 and sorted(builder.design.table.run) == [20, 21, 22, 23]
    assert builder.design.metadata["fixed_runs"] == len(shared.data)
    for view in views.values():
        assert "Internal error" not in view.status.value


def test_optimiser_shows_the_kernel_optimum_and_moves_the_sliders(shared, views):
    optimiser = views["optimizer"]
    optimiser.set_goal("Impact", "maximize", lower_limit=8.0, target=12.0)
    assert shared.goals == {"Impact": {"goal": "maximize", "lower_limit": 8.0, "target": 12.0, "s": 1.0, "weight": 1.0}}
    best = optimiser.run()
    reference = optimize({"Impact": kernel_fit()}, shared.goals, starts=5, seed=3)  # kernel reference
    assert best.overall == pytest.approx(reference.overall, rel=1e-9)
    assert fmt(reference.overall, 3) in optimiser.result.value
    optimiser.use_button.click()
    for name, value in reference.settings.items():
        assert shared.settings[name] == pytest.approx(value, rel=1e-9)
        assert views["sliders"].sliders[name].value == pytest.approx(value, rel=1e-9)
    views["slice"].quantity.value = "desirability"
    views["slice"].flush()
    assert float(np.nanmax(views["slice"].shown_values())) <= 1.0


def test_shared_model_over_a_study_writes_changes_through():
    from levelwise.study import Study

    study = Study(demo.FACTORS)
    study.add_response("Impact", "J")
    study.add_stage("screen", demo.demo_design())
    for run, value in zip(demo.demo_data()["run"], demo.demo_data()["Impact"]):
        study.record(int(run), "Impact", float(value))
    study.set_model("Impact", demo.MODEL)
    shared = SharedModel.from_study(study)
    shared.exclude(4, "sample dropped before testing")
    shared.set_model("Impact", "Oven + Dwell")
    assert list(study.exclusions["run"]) == [4]
    assert study.models["Impact"] == "Oven + Dwell"
    locked = SharedModel.from_study(study, read_only=True)
    assert locked.exclusions == {4: "sample dropped before testing"}
    with pytest.raises(ReadOnlyError):
        locked.include(4)


def test_shared_model_is_a_view_of_one_study():
    from levelwise import Study

    shared = make_shared(data=demo_data_two_responses())
    study = shared.study
    assert isinstance(study, Study) and list(shared.data.index) == study.run_ids  # runs named by run id
    # The table is the study's, read from it: a value recorded in the study is what the view shows.
    run = study.run_ids[3]
    study.record(run, "Impact", 12.5, overwrite=True, reason="re-tested")  # invented
    assert shared.data.loc[run, "Impact"] == 12.5
    seen = []
    shared.observe(lambda change: seen.append(change["name"]), names=["fits", "fit"])
    assert shared.refresh() is True and seen == ["fits", "fit"]  # one refit, one notification of each
    assert shared.fit.n == len(study) and shared.refresh() is False
    # Exclusions: one shape, run id -> reason, and the study holds them (with its audit log).
    shared.exclude(run, "panel scratched")
    assert shared.exclusions == {run: "panel scratched"}
    assert study.exclusions[["run", "response", "reason"]].values.tolist() == [[run, None, "panel scratched"]]
    assert study.audit[-1].action == "exclude"
    # An exclusion of one response only leaves that response's fit alone.
    other = study.run_ids[5]
    study.exclude(other, "gloss meter not calibrated", response="Gloss")
    shared.refresh()
    assert other in shared.fits["Impact"].runs and other not in shared.fits["Gloss"].runs
    assert (other, "gloss meter not calibrated") in list(shared.fits["Gloss"].exclusions)
    assert shared.exclusions == {run: "panel scratched"}  # the every-response exclusions
    # The mirrored traits are written only through the model's methods.
    with pytest.raises(LevelwiseError, match="mirrors its study"):
        shared.models = {"Impact": "Oven"}
    with pytest.raises(LevelwiseError, match="mirrors its study"):
        shared.exclusions = {}
    assert study.models["Impact"] == demo.MODEL


# ----- what reaches the browser -----------------------------------------------------------------------
def test_bytes_per_slider_event_are_float32_and_only_what_changed(monkeypatch, capsys):
    log = install_recording_comm(monkeypatch)
    shared = make_shared()
    views = {"sliders": FactorSliders(shared), "slice": SurfaceSlice(shared)}  # 100 x 100 slice
    slider = views["sliders"].sliders["Film"]
    views["slice"].flush()
    log.clear()
    browser_update(slider, value=62.0)
    views["slice"].flush()  # the coalesced slice refresh belongs to this event
    other_factor = message_bytes(log)
    arrays = [v for data, _ in log for v in data.get("state", {}).values() if isinstance(v, dict) and "dtype" in v]
    assert arrays and {a["dtype"] for a in arrays} <= {"float32", "uint8"}  # heat map codes are uint8
    keys = {k for data, _ in log for k in data.get("state", {})}
    log.clear()
    browser_update(views["sliders"].sliders["Oven"], value=200.0)  # an axis factor of the slice
    views["slice"].flush()
    axis_factor = message_bytes(log)
    sent = {k for data, _ in log for k in data.get("state", {})}
    assert {"min", "max"} <= keys  # the colour axis's range followed the held factor
    assert "color" not in sent and "min" not in sent  # the slice itself did not change: not re-sent
    with capsys.disabled():
        print(f"\n[bytes to the browser per slider event] non-axis factor: {other_factor} B; "
              f"slice axis factor: {axis_factor} B")


def test_run_sheet_export_is_the_kernel_writer_output(shared, views, tmp_path):
    from levelwise import read_run_sheet, write_run_sheet

    builder = views["builder"]
    builder.family.value = "box_behnken"
    builder.responses.value = "Impact (J)"
    reference = tmp_path / "reference.csv"
    write_run_sheet(builder.design, reference, responses=("Impact",))  # levelwise called directly
    assert builder.export("csv") == reference.read_bytes()
    builder.export("xlsx", path=tmp_path / "sheet.xlsx")
    back = read_run_sheet(tmp_path / "sheet.xlsx")
    assert len(back.table) == len(builder.design) and "Impact" in back.responses
    assert "run sheet (CSV)" in builder.downloads.value and "run sheet (XLSX)" in builder.downloads.value


def test_views_work_with_a_categorical_factor():
    from levelwise import Factor, full_factorial

    factors = [Factor("Oven", 170, 210, units="°C"), Factor("Metal", levels=["steel", "brass"]), Factor("Film", 50, 90)]
    design = full_factorial(factors, replicates=2, seed=1)
    data = design.table.copy()
    data["Impact"] = np.random.default_rng(1).normal(10, 1, len(data))  # invented data, seeded
    shared = SharedModel(factors, data, "Impact", "main_effects", design=design)
    views = [FactorSliders(shared), SurfaceSlice(shared), ResidualInspector(shared), EffectsView(shared),
             PredictionsView(shared), DesignBuilder(shared)]
    views[0].sliders["Metal"].value = "brass"
    reference = fit(data, "Impact", "main_effects", factors=factors)  # levelwise called directly
    expected = reference.predict({"Oven": 190.0, "Metal": "brass", "Film": 70.0}).iloc[0]
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span>' in views[0].readout.value
    assert list(views[1].x_factor.options) == ["Oven", "Film"]
    with pytest.raises(LevelwiseError, match="one of its levels"):
        shared.set_settings(Metal="copper")
    for view in views:
        assert view.status.value == "", type(view).__name__


def test_line_marks_never_end_in_nan(shared, views):
    # bqplot places a Lines mark's label at its last point; a trailing NaN gave the browser
    # "translate(undefined, undefined)" errors (seen in Chromium against a served page).
    views["residuals"].plot.value = "leverage"
    for mark in (views["slice"].contour_lines, views["residuals"].guides):
        assert len(mark.x) and np.isfinite(mark.x[-1]) and np.isfinite(mark.y[-1])


def test_prediction_rows_are_edited_through_the_form_and_exported(shared, views):
    table = views["predictions"]
    table.add_current()
    table.add_current()
    browser_update(table.row_choice, index=1)
    table.editors["Oven"].value = 175.0
    table.editors["Catalyst"].value = 1.45
    table.save_button.click()
    expected = kernel_fit().predict({"Oven": 175.0, "Dwell": 12.0, "Film": 70.0, "Catalyst": 1.45}).iloc[0]
    frame = table.to_frame()
    assert frame.loc[1, "Impact ci_high"] == pytest.approx(expected["ci_high"], rel=1e-12)
    assert frame.loc[0, "Oven"] == 190.0  # the other row is untouched
    csv = pd.read_csv(io.StringIO(table.to_csv()), index_col="row")
    assert csv.loc[1, "Impact pi_low"] == pytest.approx(expected["pi_low"], rel=1e-12)
    assert "Download the table (CSV)" in table.download.value
    with pytest.raises(LevelwiseError, match="must be finite"):
        table.edit_row(0, Oven=float("inf"))


def test_hovering_a_residual_point_shows_that_run(shared, views):
    inspector = views["residuals"]
    browser_event(inspector.used, {"event": "hover", "data": {"index": 0}})
    run = inspector.run.value
    diag = kernel_fit().diagnostics.loc[run]  # levelwise called directly; indexed by run id
    assert f"Run {run}" in inspector.detail.value
    assert fmt(diag["cooks_distance"]) in inspector.detail.value and fmt(diag["leverage"]) in inspector.detail.value


def test_traces_draw_one_curve_per_level_of_a_three_level_factor():
    from levelwise import Factor, full_factorial

    factors = [Factor("Oven", 170, 210, units="°C"), Factor("Supplier", levels=["north", "east", "south"]),
               Factor("Film", 50, 90)]
    design = full_factorial(factors, replicates=2, seed=2)
    data = design.table.copy()
    shift = data["Supplier"].map({"north": 0.0, "east": 2.0, "south": -1.0})
    data["Impact"] = 10 + (data["Oven"] - 190) / 20 * (1 + shift) + np.random.default_rng(2).normal(0, 0.3, len(data))
    model = "Oven + Film + Supplier + Oven:Supplier"
    shared = SharedModel(factors, data, "Impact", model, design=design)
    view = FactorSliders(shared, points=11)
    assert view.level_curves.layout.display == "" and not view.level_marks["Oven"].visible
    view.level_curves.value = "Supplier"
    mark = view.level_marks["Oven"]
    assert mark.visible and list(mark.labels) == ["north", "east", "south"]
    reference = fit(data, "Impact", model, factors=factors)  # levelwise called directly
    for row, level in enumerate(["north", "east", "south"]):
        expected = reference.trace("Oven", {**shared.settings, "Supplier": level}, points=11)
        np.testing.assert_allclose(mark.y[row], expected["mean"], rtol=1e-6)  # float32 on the wire
    np.testing.assert_allclose(mark.x, np.linspace(170, 210, 11), rtol=1e-6)
    view.level_curves.value = None
    assert not mark.visible
    assert view.status.value == ""
    view.close()


def test_design_builder_offers_general_factorial_and_definitive_screening(shared, views):
    from levelwise import definitive_screening

    builder = views["builder"]
    builder.options["seed"].value = 5
    builder.family.value = "definitive_screening"
    reference = definitive_screening(list(demo.FACTORS), seed=5)  # levelwise called directly
    pd.testing.assert_frame_equal(builder.design.table, reference.table)
    assert "clear of every two-factor interaction" in builder.structure.value
    builder.options["extra_centre_runs"].value = 2
    assert len(builder.design) == len(reference) + 2
    builder.family.value = "full"
    builder.factor_rows[0]["n_levels"].value = 3
    builder.factor_rows[1]["type"].value = "categorical"
    builder.factor_rows[1]["levels"].value = "north, east, south"
    builder.options["center_points"].value = 0
    factors = builder.factors()
    assert factors[0].n_levels == 3 and factors[1].levels == ("north", "east", "south")
    assert len(builder.design) == 3 * 3 * 2 * 2
    assert set(builder.design.table[factors[1].name]) == {"north", "east", "south"}
    assert builder.status.value == ""


def test_optimiser_searches_over_the_levels_of_a_categorical_factor():
    from levelwise import Factor, full_factorial, optimize

    factors = [Factor("Oven", 170, 210, units="°C"), Factor("Supplier", levels=["north", "east", "south"])]
    design = full_factorial(factors, replicates=2, seed=3)
    data = design.table.copy()
    shift = data["Supplier"].map({"north": 0.0, "east": 2.0, "south": -1.0})
    data["Impact"] = 10 + (data["Oven"] - 190) / 20 + shift + np.random.default_rng(3).normal(0, 0.2, len(data))
    shared = SharedModel(factors, data, "Impact", "Oven + Supplier", design=design)
    view = OptimizerView(shared, seed=1, starts=3)
    view.set_goal("Impact", "maximize", lower_limit=5, target=15)
    best = view.run()
    reference = optimize({"Impact": fit(data, "Impact", "Oven + Supplier", factors=factors)},
                         {"Impact": {"goal": "maximize", "lower_limit": 5, "target": 15}}, starts=3, seed=1)
    assert best.winner == reference.winner == {"Supplier": "east"}  # the largest invented shift
    assert "lw-level-results" in view.result.value and "Supplier = east" in view.result.value
    view.use()
    assert shared.settings["Supplier"] == "east"
    assert view.status.value == ""
    view.close()


def test_slider_labels_are_inert_text():
    """A factor label with TeX and markup is shown as escaped text, marked so that MathJax leaves it alone."""
    import ipywidgets as ipw

    from levelwise import Factor
    from levelwise.widgets import SharedModel
    from levelwise.widgets.factor_sliders import FactorSliders
    from levelwise.widgets.style import NO_MATH, plain_text

    name = "Oven $\\style{color:red}{BIG}$ <!--<script>"
    factors = [Factor(name, 0.0, 1.0), Factor("B", 0.0, 1.0)]
    data = pd.DataFrame({name: [0, 1, 0, 1, 0.5], "B": [0, 0, 1, 1, 0.5], "y": [1.0, 2.0, 3.0, 4.5, 2.6]})
    shared = SharedModel(factors, data, "y", model=f"`{name}` + B")
    slider = FactorSliders(shared).sliders[name]
    assert isinstance(slider, ipw.FloatSlider) and slider.description_allow_html
    assert slider.description.startswith(f'<span class="{NO_MATH}">')
    assert "<script>" not in slider.description and "&lt;!--&lt;script&gt;" in slider.description
    assert plain_text(slider.description) == factors[0].label


def test_a_burst_of_slider_values_is_applied_once_latest_wins():
    """Issue 17: a client flooding slider updates makes the kernel apply one change per burst, not one per message."""
    from levelwise import Factor
    from levelwise.widgets import SharedModel
    from levelwise.widgets.factor_sliders import FactorSliders

    factors = [Factor("A", 0.0, 1.0), Factor("B", 0.0, 1.0)]
    data = pd.DataFrame({"A": [0, 1, 0, 1, 0.5], "B": [0, 0, 1, 1, 0.5], "y": [1.0, 2.0, 3.0, 4.5, 2.6]})
    shared = SharedModel(factors, data, "y", model="A + B")
    view = FactorSliders(shared)
    calls = []
    original = shared.set_settings

    def counting(**settings):
        calls.append(settings)
        return original(**settings)

    shared.set_settings = counting

    async def burst():
        for k in range(200):
            view.sliders["A"].value = 0.2 + (k % 50) / 100
        view.sliders["B"].value = 0.9
        await asyncio.sleep(0.1)

    asyncio.run(burst())
    assert len(calls) == 1  # 201 values, one change
    assert calls[0] == {"A": pytest.approx(0.2 + 199 % 50 / 100), "B": pytest.approx(0.9)}
    assert shared.settings["A"] == pytest.approx(0.69) and shared.settings["B"] == pytest.approx(0.9)
