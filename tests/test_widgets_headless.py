"""The shared model and the effect sliders, driven headless through traits (no browser)."""

from unittest import mock

import numpy as np
import pytest

from levelwise import LevelwiseError, demo, fit
from levelwise.widgets import FactorSliders, SharedModel
from levelwise.widgets.shared_model import ReadOnlyError
from levelwise.widgets.style import fmt


@pytest.fixture
def shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), demo.RESPONSE, demo.MODEL, response_units="J")


def kernel_prediction(settings):
    reference = fit(demo.demo_data(), demo.RESPONSE, demo.MODEL, factors=demo.FACTORS)
    return reference.predict(settings).iloc[0]


def test_moving_a_slider_updates_the_readout_to_the_kernel_prediction(shared):
    view = FactorSliders(shared)
    view.sliders["Oven"].value = 201.2
    view.sliders["Film"].value = 55.0
    expected = kernel_prediction({**shared.settings, "Oven": 201.2, "Film": 55.0})
    assert shared.settings["Oven"] == 201.2
    assert f'<span class="lw-mean">{fmt(expected["mean"])}</span>' in view.readout.value
    assert f'{fmt(expected["ci_low"])} to {fmt(expected["ci_high"])}' in view.readout.value
    assert f'{fmt(expected["pi_low"])} to {fmt(expected["pi_high"])}' in view.readout.value
    assert "prediction interval for a single new run" in view.readout.value


def test_traces_carry_the_kernel_curves(shared):
    view = FactorSliders(shared)
    shared.set_settings(Dwell=9.5)
    pi_band, ci_band, mean, marker = view._marks["Catalyst"]
    curve = shared.fit.trace("Catalyst", shared.settings, points=view.points)
    assert np.asarray(mean.y) == pytest.approx(curve["mean"], rel=1e-6)  # float32 on the wire
    assert np.asarray(ci_band.y)[1] == pytest.approx(curve["mean"] + curve["ci_half"], rel=1e-6)
    assert np.asarray(pi_band.y)[0] == pytest.approx(curve["mean"] - curve["pi_half"], rel=1e-6)
    assert float(marker.x[0]) == pytest.approx(shared.settings["Catalyst"], rel=1e-6)


def test_one_notification_per_refit(shared):
    observer = mock.Mock()
    shared.observe(observer, names="fit")
    old = shared.fit
    shared.set_model("Oven + Dwell + Film + Catalyst")
    assert observer.call_count == 1
    assert shared.fit is not old
    assert list(old.terms)[-1] == "Oven:Catalyst"  # the old fit object was replaced, not mutated


def test_failed_refit_keeps_last_fit_and_shows_error(shared):
    view = FactorSliders(shared)
    before = shared.fit
    shared.set_model("Oven + Nonsense")
    assert shared.fit is before
    assert "unknown factor" in shared.error
    assert "lw-error" in view.status.value and "Nonsense" in view.status.value


def test_read_only_refuses_model_and_data_changes():
    shared = SharedModel(demo.FACTORS, demo.demo_data(), demo.RESPONSE, demo.MODEL, read_only=True)
    before = shared.fit
    with pytest.raises(ReadOnlyError):
        shared.set_model("Oven")
    with pytest.raises(ReadOnlyError):
        shared.set_data(demo.demo_data().iloc[:5])
    assert shared.fit is before and shared.model == demo.MODEL
    shared.set_settings(Oven=180.0)  # moving the settings is allowed
    assert shared.settings["Oven"] == 180.0


def test_bad_setting_is_refused_with_a_named_field(shared):
    with pytest.raises(LevelwiseError, match="setting of 'Oven' must be finite"):
        shared.set_settings(Oven=float("nan"))
    with pytest.raises(LevelwiseError, match="unknown factor"):
        shared.settings = {"Speed": 1.0}
