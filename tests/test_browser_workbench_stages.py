"""The workbench as a working surface, in a real Chromium (loopback only): upload a table, confirm the
mapping, enter a missing result, save, reload; the stage sections; the study's goals; no overflow at 1280 px.

The uploaded table is invented: a 2^4 with three centre points from lw.full_factorial and a made-up
response (40 + 3 x coded Temp + noise).
"""

from __future__ import annotations

import io
import shutil

import numpy as np
import pytest
from conftest import SCREENSHOTS, loopback_only, start_cli_server, stop_server
from servers import free_port

import levelwise as lw
from levelwise.dashboards.study_source import DEMO_FILE

pytestmark = pytest.mark.browser
MISSING_RUN = 7


def plant_csv() -> bytes:
    factors = [lw.Factor("Temp", 150, 190, "°C"), lw.Factor("Time", 10, 30, "min"),
               lw.Factor("Load", 1, 3, "kg"), lw.Factor("Speed", 200, 400, "rpm")]
    table = lw.full_factorial(factors, center_points=3, randomize=False).table
    out = table[["run", "Temp", "Time", "Load", "Speed"]].copy()
    out.columns = ["run", "Temp [°C]", "Time [min]", "Load [kg]", "Speed [rpm]"]
    out["Yield [%]"] = (40 + 3 * (out["Temp [°C]"] - 170) / 20
                        + np.random.default_rng(2).normal(0, 0.3, len(out))).round(2)
    out = out.astype(object)
    out.loc[out["run"] == MISSING_RUN, "Yield [%]"] = ""
    buffer = io.StringIO()
    out.to_csv(buffer, index=False)
    return buffer.getvalue().encode()


@pytest.fixture(scope="module")
def served(tmp_path_factory, chromium_path):
    folder = tmp_path_factory.mktemp("served")
    study_file = folder / "study.json"
    shutil.copy(DEMO_FILE, study_file)
    port = free_port()
    proc, _ = start_cli_server(["serve", str(study_file)], port)
    try:
        yield f"http://127.0.0.1:{port}/", study_file
    finally:
        stop_server(proc)


@pytest.fixture(scope="module")
def page(served, browser):
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served[0], timeout=120_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=120_000)
    yield page
    context.close()


def test_sections_in_the_order_of_the_job_and_opens_on_the_analysis(page):
    headings = page.locator(".lw-section").evaluate_all("els => els.map(e => e.innerText.trim().split('\\n')[0])")
    assert headings == ["1 · Plan the runs", "2 · Record the results", "3 · Fit the model",
                        "4 · Explore and predict", "5 · Share"], headings
    # A study with results is loaded: planning and recording start folded, the analysis is open.
    assert not page.locator(".lw-section-plan .lw-design-builder").first.is_visible()
    assert not page.locator(".lw-section-record .lw-run-sheet-editor").first.is_visible()
    assert page.locator(".lw-section-model .lw-effects-view").first.is_visible()
    assert page.locator(".lw-response-choice").first.inner_text().startswith("Response shown in every view")


def test_stored_goals_show_in_the_optimiser(page):
    kinds = page.locator(".lw-goal-kind select").evaluate_all("els => els.map(e => e.value)")
    labels = page.locator(".lw-goal-kind select").evaluate_all(
        "els => els.map(e => e.options[e.selectedIndex].text.replace(/\u00a0/g, ' '))")
    # The demo file's goals (the fourth: the adhesion pass rate, at least 90 %, shown in % in its editors).
    assert labels == ["maximise", "hit a target", "minimise", "maximise"], (kinds, labels)
    limits = page.locator(".lw-goal-limit input").evaluate_all("els => els.map(e => e.value)")
    assert "90" in limits and "98" in limits, limits
    assert "smallest" in page.locator(".lw-goal-defaults").first.inner_text()


def test_nothing_overflows_at_1280(page):
    page.set_viewport_size({"width": 1280, "height": 1000})
    page.wait_for_timeout(500)
    wide = page.evaluate("document.documentElement.scrollWidth")
    inner = page.locator(".lw-explore, .lw-section").evaluate_all(
        "els => els.filter(e => e.scrollWidth > e.clientWidth + 1).map(e => e.className)")
    assert inner == [], inner
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SCREENSHOTS / "workbench_1280.png"), full_page=True)
    assert wide <= 1280, wide


def test_upload_map_enter_save_reload(page, served):
    url, study_file = served
    page.locator(".lw-section-record").get_by_text("2 · Record the results").click()
    page.locator(".lw-section-record .lw-run-sheet-editor").first.wait_for(timeout=30_000)  # the section opened
    with page.expect_file_chooser(timeout=30_000) as chooser:  # the upload button opens the file dialog
        page.locator(".lw-section-record .lw-upload").first.click()
    chooser.value.set_files(files=[{"name": "plant.csv", "mimeType": "text/csv", "buffer": plant_csv()}])
    page.locator(".lw-map-row").nth(5).wait_for(timeout=30_000)
    roles = page.locator(".lw-map-role select").evaluate_all("els => els.map(e => e.value)")
    assert roles == ["run id", "factor", "factor", "factor", "factor", "response"], roles  # the labels shown
    page.locator(".lw-import").click()
    page.locator(".lw-import-done").wait_for(timeout=60_000)
    page.wait_for_function("() => document.querySelector('.lw-title').innerText.includes('plant')",
                           timeout=30_000)
    cell = page.locator(f".lw-cell-{MISSING_RUN}-0 input")
    cell.wait_for(timeout=30_000)
    assert cell.input_value() == ""
    cell.fill("41.5")
    cell.press("Enter")
    page.locator(".lw-unsaved").wait_for(timeout=30_000)
    page.locator(".lw-save").click()
    page.locator(".lw-saved").wait_for(timeout=30_000)
    assert lw.Study.load(study_file).data().at[MISSING_RUN, "Yield"] == 41.5

    page.reload(timeout=120_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=120_000)
    page.locator(".lw-coefficients table").first.wait_for(timeout=60_000)
    assert "plant" in page.locator(".lw-title").inner_text()
    assert page.locator(f".lw-cell-{MISSING_RUN}-0 input").input_value() == "41.5"
    assert page.locator(".lw-saved").count() == 1
    # Every view shows the new study: its factors and response, none of the demo's.
    text = page.locator(".lw-explore").inner_text()
    for name in ("Temp", "Speed", "Yield"):
        assert name in text, name
    for old in ("Impact", "Gloss", "Yellowness"):
        assert old not in text, old
    assert "Traceback" not in page.content()
