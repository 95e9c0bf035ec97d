"""The served workbench (``levelwise serve``, the invented demo campaign) in a real Chromium, loopback only.
One served instance and one page for the whole module."""

from __future__ import annotations

import re
import warnings

import pytest
from conftest import SCREENSHOTS, loopback_only

from levelwise import LevelwiseWarning
from levelwise.dashboards.study_source import open_study
from levelwise.widgets.style import fmt


def quiet_fit(study, name):
    """Study.fit without its warning about the demo's one missing impact value (tested in its own test)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LevelwiseWarning)
        return study.fit(name)

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def workbench(served_workbench, browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served_workbench, timeout=60_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=60_000)
    page.locator(".lw-coefficients table").first.wait_for(timeout=60_000)
    yield page
    context.close()


@pytest.fixture(scope="module")
def study():
    return open_study("demo")


def slider_values(page) -> list[float]:
    return [float(h.get_attribute("aria-valuenow")) for h in page.locator(".lw-slider .noUi-handle").all()]


def wait_for_text(page, selector: str, want: str):
    page.wait_for_function(
        "([sel, want]) => [...document.querySelectorAll(sel)].some(e => e.innerText.trim() === want)",
        arg=[selector, want], timeout=20_000,
    )


def test_renders_every_view(workbench):
    for css in (".lw-factor-sliders", ".lw-surface-slice", ".lw-residual-inspector", ".lw-effects-view",
                ".lw-predictions-view", ".lw-optimizer-view", ".lw-caution"):
        assert workbench.locator(css).count() >= 1, css
    assert "Traceback" not in workbench.content()


def test_slider_moves_prediction_to_kernel_value(workbench, study):
    before = workbench.locator(".lw-readout .lw-mean").first.inner_text()
    handle = workbench.locator(".lw-slider .noUi-handle").first  # Oven
    handle.focus()
    for _ in range(5):
        handle.press("ArrowRight")
    settings = dict(zip([f.name for f in study.factors], slider_values(workbench)))
    expected = fmt(quiet_fit(study, "Impact").predict(settings)["mean"].iloc[0])  # the kernel's number, computed here
    wait_for_text(workbench, ".lw-readout .lw-mean", expected)
    assert expected != before
    text = workbench.locator(".lw-readout").first.inner_text()
    assert re.search(r"95% prediction interval for a single new run: [\d.]+ to [\d.]+ J", text)


def test_clicking_the_surface_moves_the_sliders(workbench, study):
    before = slider_values(workbench)
    figure = workbench.locator(".lw-slice svg.svg-figure").first
    figure.scroll_into_view_if_needed()
    box = figure.bounding_box()
    # Plot area inside the figure margins (top 20, bottom 50, left 60, right 90); aim at a click target
    # (a 41 x 41 grid over the two factors' ranges) a quarter of the way in from the low corner.
    width, height = box["width"] - 150, box["height"] - 70
    x = box["x"] + 60 + width * 10 / 40
    y = box["y"] + 20 + height * (1 - 10 / 40)
    workbench.mouse.click(x, y)
    oven, dwell = study.factors[0], study.factors[1]
    want_oven = oven.low + (oven.high - oven.low) * 10 / 40
    workbench.wait_for_function(
        "([want]) => { const h = document.querySelector('.lw-slider .noUi-handle');"
        " return h && Math.abs(parseFloat(h.getAttribute('aria-valuenow')) - want) < 1.5; }",
        arg=[want_oven], timeout=20_000,
    )
    after = slider_values(workbench)
    assert after[0] != before[0] and after[1] != before[1]
    assert after[1] == pytest.approx(dwell.low + (dwell.high - dwell.low) * 10 / 40, abs=0.3)
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    workbench.screenshot(path=str(SCREENSHOTS / "workbench.png"), full_page=False)


def test_excluding_a_run_changes_the_coefficients(workbench, study):
    table = workbench.locator(".lw-coefficients").first
    before = table.inner_text()
    run = 4  # a centre run of the screen: leaving it out moves the intercept visibly
    workbench.locator(".lw-residual-run select").first.select_option(label=f"Run {run}")
    workbench.locator(".lw-exclude-reason input").first.fill("powder batch mix-up noted by the operator")
    workbench.locator("button.lw-exclude").first.click()
    data = study.data().drop(index=run)
    from levelwise import fit

    refit = fit(data, "Impact", study.models["Impact"], factors=list(study.factors))  # the kernel's refit, made here
    expected = fmt(float(refit.coefficients.loc["Intercept", "estimate"]), 4)
    assert expected != fmt(float(quiet_fit(study, "Impact").coefficients.loc["Intercept", "estimate"]), 4)
    workbench.wait_for_function(
        "([want]) => { const c = document.querySelector('.lw-coefficients tbody tr td');"
        " return c && c.innerText.trim() === want; }",
        arg=[expected], timeout=20_000,
    )
    assert table.inner_text() != before
    assert f"Run {run}" in workbench.locator(".lw-excluded-list").first.inner_text()
    workbench.locator(".lw-residual-inspector").first.screenshot(path=str(SCREENSHOTS / "residual-inspector.png"))
