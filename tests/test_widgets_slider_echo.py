"""A browser's slider puts every value the kernel sends it on its step grid and sends the snapped value back
(ipywidgets' slider view with ``continuous_update``: noUiSlider's update event, then ``model.set`` when the
snapped value differs). That echo is not a user's move. Taken as one, it shifted a setting the kernel had chosen
and, on the mixture sliders, rescaled the other components, whose own echoes went on moving the blend.

The snapped value is ``min + round((v - min) / step) * step`` (how a stepped slider rounds: common practice). The
expected blends are worked by hand with the Cox direction x_j = r_j (T - t) / (T - r_i) (Cox 1971, Biometrika 58,
155-159), as in test_widgets_mixture.py.
"""

from __future__ import annotations

import pytest
from test_widgets_mixture import demo_study, move_resin_to_70
from widget_support import browser_update

from levelwise import demo
from levelwise.widgets import FactorSliders, MixtureSliders, SharedModel


def snapped(slider, value):
    return slider.min + round((value - slider.min) / slider.step) * slider.step


def test_the_browser_snapping_a_kernel_setting_does_not_move_it():
    shared = SharedModel(demo.FACTORS, demo.demo_data(), demo.RESPONSE, demo.MODEL, response_units="J")
    view = FactorSliders(shared)
    slider = view.sliders["Oven"]
    chosen = slider.min + 37.3 * slider.step  # off the grid, as an optimum or a clicked point is
    shared.set_settings(Oven=chosen)
    assert slider.value == pytest.approx(chosen)
    echo = snapped(slider, chosen)
    assert echo != pytest.approx(chosen, abs=1e-12)
    browser_update(slider, value=echo)
    view._slider_coalescer.flush()
    assert shared.settings["Oven"] == chosen  # unchanged: the echo is not a move
    # A user's move from the snapped handle, one step, is a move.
    browser_update(slider, value=echo + slider.step)
    view._slider_coalescer.flush()
    assert shared.settings["Oven"] == pytest.approx(echo + slider.step)


def test_echoes_of_the_rescaled_components_leave_the_blend_where_the_move_put_it():
    shared = SharedModel.from_study(demo_study())
    view = MixtureSliders(shared)
    names = shared.component_names
    expected = move_resin_to_70(shared, view)  # the Cox direction's blend, worked by hand there
    off_grid = [n for n in names if n != "Resin"
                and snapped(view.sliders[n], expected[n]) != pytest.approx(expected[n], abs=1e-12)]
    assert off_grid  # the test means something only if some component was left off its slider's grid
    for name in off_grid:  # the browser sends back each rescaled slider's snapped value
        browser_update(view.sliders[name], value=snapped(view.sliders[name], expected[name]))
    view._coalescer.flush()
    for name in names:
        assert shared.settings[name] == pytest.approx(expected[name], abs=1e-9)
    assert sum(shared.blend().values()) == pytest.approx(100.0, abs=1e-9)
