"""A mixture study in the browser: the offline export computes the blend, the Cox traces and the ternary slice in
its own script and agrees with the kernel to 1e-9; the published (read-only) page shows the mixture views and its
readout follows a component slider with the kernel's numbers; the README's ternary-slice screenshot is taken here.

The study is the INVENTED, seeded powder reformulation shipped as dashboards/data/demo_reformulation.json. The
reference numbers are the kernel's own (``Study.fit``, ``move_component``, ``ternary_grid``), made here from the
study file, not from the page's payload.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

import numpy as np
import pytest
from conftest import SCREENSHOTS, loopback_only, start_cli_server, stop_server, wait_until_children_idle
from servers import free_port

import levelwise as lw
from levelwise.dashboards.cli import main
from levelwise.study import Study
from levelwise.widgets.style import fmt

pytestmark = pytest.mark.browser
STUDY = Path(__file__).resolve().parents[1] / "dashboards" / "data" / "demo_reformulation.json"


@pytest.fixture(scope="module")
def export_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("export") / "reformulation.html"
    assert main(["export-html", str(STUDY), "-o", str(path)]) == 0
    return path


@pytest.fixture(scope="module")
def offline(export_file, browser):
    context = browser.new_context(viewport={"width": 1300, "height": 1500})
    page = context.new_page()
    requests = []

    def abort_everything(route):
        requests.append(route.request.url)
        if route.request.url.startswith("file://"):
            route.continue_()
        else:
            route.abort()

    page.route("**/*", abort_everything)
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(export_file.as_uri())
    yield page, errors, requests
    context.close()


def numbers(page, element="#lw-numbers"):
    return json.loads(page.locator(element).get_attribute("data-numbers"))


def test_offline_component_slider_moves_along_the_cox_direction_like_the_kernel(offline):
    page, errors, requests = offline
    study = Study.load(STUDY)
    before = numbers(page)
    start = before["settings"]
    slider = page.locator("input.lw-mix-range[data-component='Filler']")
    slider.focus()
    for _ in range(9):
        slider.press("ArrowRight")
    after = numbers(page)
    names = study.component_names
    # The kernel's Cox move from the starting blend to the page's new Filler amount.
    expected = lw.move_component(study.mixture, start, "Filler", after["settings"]["Filler"])
    for name in names:
        assert after["settings"][name] == pytest.approx(expected[name], rel=1e-9, abs=1e-9)
    assert sum(after["settings"][n] for n in names) == pytest.approx(100.0, abs=1e-9)
    assert after["settings"]["Filler"] > start["Filler"]
    for response in study.response_names:
        kernel = study.fit(response).predict(after["settings"]).iloc[0]
        for key in ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "leverage"):
            assert after["responses"][response][key] == pytest.approx(kernel[key], rel=1e-9, abs=1e-9), key
        assert after["responses"][response]["extrapolated"] is bool(kernel["extrapolated"])
    assert not errors and all(url.startswith("file://") for url in requests)
    shown = page.locator(".lw-pred-row .lw-mean").first.inner_text()
    assert shown.split()[0] == fmt(after["responses"][study.response_names[0]]["mean"])
    assert page.locator("svg#lw-cox path.lw-mean-line").count() == len(names)  # one curve per component
    assert page.locator("svg#lw-cox polygon.lw-ci-band").count() == len(names)
    assert page.locator("svg#lw-cox polygon.lw-pi-band").count() == len(names)


def test_offline_ternary_slice_is_the_kernels_grid_and_a_click_moves_the_blend(offline):
    page, errors, _ = offline
    study = Study.load(STUDY)
    fits = {name: study.fit(name) for name in study.response_names}
    page.select_option("#lw-tb", label="Filler")
    page.select_option("#lw-tc", label="Hardener")
    grid = numbers(page, "#lw-ternary-numbers")
    settings = numbers(page)["settings"]
    assert grid["axes"] == ["Resin", "Filler", "Hardener"]
    reference = lw.ternary_grid(fits[grid["response"]], grid["axes"], settings, shape=tuple(grid["shape"]))
    for key in ("mean", "ci_half", "pi_half"):
        ours = np.array([np.nan if v is None else v for v in grid[key]], dtype=float)
        theirs = reference[key].ravel()
        assert np.array_equal(np.isnan(ours), np.isnan(theirs)), key  # the same blank cells
        finite = ~np.isnan(theirs)
        assert finite.sum() > 30
        np.testing.assert_allclose(ours[finite], theirs[finite], rtol=1e-9, atol=1e-9)
    # A click inside the region moves the three components; Pigment is held; the sum stays 100.
    page.locator("#lw-tcanvas").scroll_into_view_if_needed()
    box = page.locator("#lw-tcanvas").bounding_box()
    held = settings["Pigment"]
    target = np.argwhere(reference["inside"])[len(np.argwhere(reference["inside"])) // 2]  # a cell inside
    x, y = reference["x"][target[1]], reference["y"][target[0]]
    page.mouse.click(box["x"] + (40 + x * 360) * box["width"] / 440,
                     box["y"] + (420 - 40 - y * 360) * box["height"] / 420)  # the page's PAD and scale
    moved = numbers(page)["settings"]
    assert moved["Pigment"] == held
    assert sum(moved[n] for n in study.component_names) == pytest.approx(100.0, abs=1e-9)
    assert moved != settings and page.locator("#lw-ternary-refused").inner_text() == ""
    kernel = fits["Impact"].predict(moved).iloc[0]
    assert numbers(page)["responses"]["Impact"]["mean"] == pytest.approx(kernel["mean"], rel=1e-9, abs=1e-9)
    # A click outside the bounds (the left corner: Resin far above 75) is refused in words.
    page.mouse.click(box["x"] + 41 * box["width"] / 440, box["y"] + 379 * box["height"] / 420)
    assert "outside the triangle or the component bounds" in page.locator("#lw-ternary-refused").inner_text()
    assert numbers(page)["settings"] == moved
    assert not errors


@pytest.fixture(scope="module")
def published_mixture(tmp_path_factory, chromium_path):
    out = tmp_path_factory.mktemp("published") / "reformulation"
    assert main(["publish", str(STUDY), "--out", str(out)]) == 0
    port = free_port()
    proc, output = start_cli_server(["view", str(out)], port)
    output.wait_for("is filled with", timeout=90)
    wait_until_children_idle(proc.pid)
    try:
        yield f"http://127.0.0.1:{port}/"
    finally:
        stop_server(proc)


def test_published_page_shows_the_mixture_views_and_follows_a_component_slider(published_mixture, browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(published_mixture, timeout=90_000)
    page.locator(".lw-mixture-sliders .lw-readout .lw-mean").first.wait_for(timeout=90_000)
    text = page.locator(".lw-present").first.inner_text()
    assert "Invented data" in text and "4 mixture components whose amounts sum to 100 %" in text
    assert "Predictions hold only inside the tested region" in text and "Traceback" not in page.content()
    assert page.locator(".lw-ternary-slice .lw-ternary").count() == 1 and page.locator(".lw-cox-traces").count() == 1
    assert page.locator(".lw-surface-slice").count() == 0  # the mixture page has the ternary slice instead
    study = Study.load(STUDY)
    handle = page.locator(".lw-mix-slider .noUi-handle").nth(2)  # Filler
    handle.focus()
    # One step at a time, each left to reach the kernel and come back (key presses faster than the kernel's
    # round trip can leave the others' handles out of step with the kernel's blend: noted as a known limit).
    for _ in range(3):
        before = page.locator(".lw-mixture-sliders .lw-readout .lw-mean").first.inner_text()
        handle.press("ArrowRight")
        page.wait_for_function(
            "([sel, old]) => document.querySelector(sel).innerText !== old",
            arg=[".lw-mixture-sliders .lw-readout .lw-mean", before], timeout=30_000,
        )
        time.sleep(0.5)
    # The page settles when its readout shows the kernel's prediction at the blend its sliders show (read again on
    # every try: the handles' values arrive after the key presses). The Cox-direction moves themselves are checked
    # against statsmodels in tests/test_widgets_mixture.py; here the page must follow the kernel.
    start = {n: float(v) for n, v in zip(study.component_names, study.mixture.centroid())}
    fitted = study.fit("Impact")
    deadline = time.monotonic() + 60.0
    while True:
        values = [float(h.get_attribute("aria-valuenow")) for h in page.locator(".lw-mix-slider .noUi-handle").all()]
        # The handles show amounts rounded for display: rescale them to the total before predicting.
        blend = {n: v * study.mixture.total / sum(values) for n, v in zip(study.component_names, values)}
        expected = float(fitted.predict(blend)["mean"].iloc[0])
        shown = [float(t) for t in page.locator(".lw-mixture-sliders .lw-readout .lw-mean").all_inner_texts()]
        if any(abs(v - expected) <= 5e-3 * abs(expected) for v in shown) or time.monotonic() > deadline:
            break
        time.sleep(0.25)
    assert blend["Filler"] > start["Filler"], (start, blend)
    assert sum(values) == pytest.approx(study.mixture.total, abs=0.05 * len(values))  # the blend sums to the total
    assert any(abs(v - expected) <= 5e-3 * abs(expected) for v in shown), (blend, expected, shown)
    ternary = page.locator(".lw-ternary-slice").first
    ternary.scroll_into_view_if_needed()
    time.sleep(1.5)
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    ternary.screenshot(path=str(SCREENSHOTS / "ternary-slice.png"))
    # A click inside the triangle goes through the marks to the figure's event rectangle; the click catcher adds the
    # point and the kernel moves the blend to the nearest lattice point: the readout follows.
    box = page.locator(".lw-ternary .plotarea_events").first.bounding_box()
    low_x, high_x, low_y, high_y = -0.16, 1.16, -0.1, np.sqrt(3) / 2 + 0.08  # the slice's BOX (ternary_slice.py)
    x, y = 0.45, 0.3  # inside the triangle, off the current blend's marker
    at = (box["x"] + (x - low_x) / (high_x - low_x) * box["width"],
          box["y"] + (high_y - y) / (high_y - low_y) * box["height"])
    hit = page.evaluate("([x, y]) => { const e = document.elementFromPoint(x, y); "
                        "return e ? e.tagName + '.' + e.getAttribute('class') : null; }", list(at))
    assert hit == "rect.plotarea_events", f"the click lands on {hit}, not on the figure's event rectangle"
    before = page.locator(".lw-mixture-sliders .lw-readout .lw-mean").first.inner_text()
    page.mouse.click(*at)
    page.wait_for_function("([sel, old]) => document.querySelector(sel).innerText !== old",
                           arg=[".lw-mixture-sliders .lw-readout .lw-mean", before], timeout=30_000)
    context.close()
