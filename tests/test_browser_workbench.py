"""The served workbench in a real Chromium (Debian's, through playwright), loopback only."""

import re

import pytest

from kernel_core import demo, fit
from widgets.style import fmt

pytestmark = pytest.mark.browser


def mean_text(page) -> str:
    return page.locator(".lw-readout .lw-mean").first.inner_text()


def test_slider_moves_prediction_to_kernel_value(served_workbench, page):
    page.goto(served_workbench, timeout=60_000)
    readout = page.locator(".lw-readout .lw-mean").first
    readout.wait_for(timeout=60_000)
    before = mean_text(page)
    handle = page.locator(".lw-slider .noUi-handle").first  # the first factor, Oven
    handle.focus()
    for _ in range(5):
        handle.press("ArrowRight")
    slider_value = float(handle.get_attribute("aria-valuenow"))
    reference = fit(demo.demo_data(), demo.RESPONSE, demo.MODEL, factors=demo.FACTORS)
    centre = {f.name: f.center for f in demo.FACTORS}
    expected = fmt(reference.predict({**centre, "Oven": slider_value})["mean"].iloc[0])
    page.wait_for_function(
        "([sel, want]) => document.querySelector(sel) && document.querySelector(sel).innerText === want",
        arg=[".lw-readout .lw-mean", expected],
        timeout=20_000,
    )
    assert mean_text(page) == expected != before
    text = page.locator(".lw-readout").first.inner_text()
    assert re.search(r"95% prediction interval for a single new run: [\d.]+ to [\d.]+ J", text)
