"""The published read-only dashboard of a study with a three-level categorical factor (issue 14), in Chromium:
it renders without an error, offers the factor's levels, and shows the kernel's prediction at the chosen level."""

from __future__ import annotations

import pytest
from conftest import start_cli_server, stop_server, wait_until_children_idle
from servers import free_port, loopback_only
from test_export_categorical import LEVELS, categorical_study

from levelwise.dashboards.cli import main
from levelwise.dashboards.study_source import open_study
from levelwise.widgets.style import fmt

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def served_categorical(chromium_path, tmp_path_factory):
    folder = tmp_path_factory.mktemp("published-categorical")
    study = categorical_study(folder / "study.json")
    out = folder / "dashboard"
    assert main(["publish", str(study), "--out", str(out)]) == 0
    port = free_port()
    proc, output = start_cli_server(["view", str(out)], port)
    output.wait_for("is filled with", timeout=60)
    wait_until_children_idle(proc.pid)
    try:
        yield f"http://127.0.0.1:{port}/", study
    finally:
        stop_server(proc)


def test_published_page_with_a_categorical_factor(served_categorical, browser):
    url, study_path = served_categorical
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(url, timeout=60_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=60_000)
    assert "Traceback" not in page.content()
    assert "tested at the levels north, east, south" in page.locator(".lw-present").first.inner_text()
    source = open_study(str(study_path))
    reference = source.fit("y")  # the kernel's fit of the study file, made here
    choice = page.locator(".lw-level-choice select").first
    for level in ("south", "east"):
        choice.select_option(level)
        values = [float(h.get_attribute("aria-valuenow")) for h in page.locator(".lw-slider .noUi-handle").all()]
        settings = {"Oven": values[0], "Time": values[1], "Supplier": level}
        expected = fmt(reference.predict(settings)["mean"].iloc[0])
        page.wait_for_function(
            "([sel, want]) => [...document.querySelectorAll(sel)].some(e => e.innerText === want)",
            arg=[".lw-readout .lw-mean", expected], timeout=20_000,
        )
    assert set(LEVELS) <= set(choice.locator("option").all_inner_texts())
    context.close()
