"""A long design search in the served workbench (real Chromium, loopback only): progress arrives while it
runs, and Stop keeps the best design found so far. The workbench shows the invented demo campaign."""

from __future__ import annotations

import pytest
from conftest import loopback_only

pytestmark = pytest.mark.browser


@pytest.fixture
def workbench(served_workbench, browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served_workbench, timeout=120_000)
    # The kernel has drawn the page once the analysis shows (a loaded machine can take a minute or more).
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=180_000)
    # The demo study has results, so the workbench opens on its analysis: unfold "Plan the runs" first.
    page.locator(".lw-section-plan").get_by_text("1 · Plan the runs").click(timeout=60_000)
    page.locator(".lw-design-builder .lw-design-family select").first.wait_for(timeout=60_000)
    yield page
    context.close()


def option_input(page, label: str):
    """The input of the design option whose description is *label*."""
    return page.locator(".lw-design-builder .lw-design-option").filter(has_text=label).locator("input").first


def test_stop_during_a_long_search_keeps_the_best_design(workbench):
    page = workbench
    builder = page.locator(".lw-design-builder").first
    builder.locator(".lw-design-family select").select_option(label="Optimal design (computer search)")
    option_input(page, "Random starts").fill("200")
    option_input(page, "Random starts").press("Enter")
    option_input(page, "Runs").fill("30")
    option_input(page, "Runs").press("Enter")
    builder.locator(".lw-search").click()
    # Progress arrives while the search runs: the page is not frozen.
    page.wait_for_function(
        "() => /start \\d+ of 200/.test(document.querySelector('.lw-design-builder .lw-search-message')"
        "?.innerText || '')",
        timeout=60_000,
    )
    stop = builder.locator(".lw-search-stop")
    assert stop.is_visible()
    stop.click()
    note = builder.locator(".lw-search-incomplete")
    note.wait_for(timeout=60_000)
    assert "best design found so far" in note.inner_text()
    assert "stopped on request" in note.inner_text()
    sheet = builder.locator(".lw-run-sheet").inner_text()
    assert "30 runs" in sheet
    assert not stop.is_visible()
    assert "Traceback" not in page.content()
