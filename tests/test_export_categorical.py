"""The offline export of a study with a three-level categorical factor (issue 14): it is written, and the page
computes the kernel's numbers (to 1e-9) at every level."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from levelwise import Factor, full_factorial
from levelwise.dashboards.export_html import write_export
from levelwise.dashboards.study_source import open_study
from levelwise.study import Study

LEVELS = ["north", "east", "south"]


def categorical_study(path):
    """A study with a three-level categorical factor and an invented, seeded response, saved to *path*."""
    factors = [Factor("Oven", 160, 200, "°C"), Factor("Time", 10, 20, "min"), Factor("Supplier", levels=LEVELS)]
    study = Study(factors, title="three suppliers (invented)")
    study.add_stage("screen", full_factorial(factors, replicates=2, seed=1))
    study.add_response("y", units="g", goal="maximize")
    rng = np.random.default_rng(0)
    shift = {"north": 0.0, "east": 2.0, "south": -1.5}
    for run, row in zip(study.run_ids, study.data().itertuples()):
        a, b = (row.Oven - 180) / 20, (row.Time - 15) / 5
        study.record(run, "y", float(30 + 2 * a - b + shift[row.Supplier] + 0.8 * a * b + rng.normal(0, 0.3)))
    study.set_model("y", "Oven + Time + Supplier + Oven:Time + Oven:Supplier")
    study.save(path)
    return path


@pytest.fixture(scope="module")
def categorical_export(tmp_path_factory):
    folder = tmp_path_factory.mktemp("export-categorical")
    path = categorical_study(folder / "study.json")
    return path, write_export(str(path), folder / "study.html")


def _payload(html_path):
    text = html_path.read_text(encoding="utf-8")
    return json.loads(re.search(r'<script id="lw-data" type="application/json">(.*?)</script>', text, re.S).group(1))


def test_export_of_a_categorical_study_is_written_with_its_levels(categorical_export):
    _, html_path = categorical_export
    data = _payload(html_path)
    assert data["factors"][2] == {"name": "Supplier", "units": "", "levels": LEVELS}
    model = data["responses"][0]
    contrasts = [(v["levels"], v["values"]) for v in model["vars"] if "levels" in v]
    # Sum-to-zero contrast columns over the levels (the fit's coding): -1 at the first level.
    assert contrasts == [(LEVELS, [-1.0, 1.0, 0.0]), (LEVELS, [-1.0, 0.0, 1.0])]
    assert len(model["exponents"][0]) == len(model["vars"]) == 4


@pytest.mark.browser
def test_export_page_computes_like_the_kernel_at_every_level(categorical_export, browser):
    study_path, html_path = categorical_export
    context = browser.new_context(viewport={"width": 1300, "height": 1100})
    page = context.new_page()
    page.route("**/*", lambda route: route.continue_() if route.request.url.startswith("file://") else route.abort())
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(html_path.as_uri())
    source = open_study(str(study_path))
    fit = source.fit("y")
    numbers = page.locator("#lw-numbers")
    slider = page.locator("input.lw-range").first
    slider.focus()
    for _ in range(5):
        slider.press("ArrowRight")
    seen = set()
    for k, level in enumerate(LEVELS):
        page.select_option("select.lw-level", str(k))
        after = json.loads(numbers.get_attribute("data-numbers"))
        assert after["settings"]["Supplier"] == level
        expected = fit.predict(after["settings"]).iloc[0]  # the kernel's numbers at the page's settings
        for key in ("mean", "ci_low", "ci_high", "pi_low", "pi_high"):
            assert after["responses"]["y"][key] == pytest.approx(expected[key], rel=1e-9, abs=1e-9)
        seen.add(round(after["responses"]["y"]["mean"], 9))
    assert len(seen) == 3  # the level changes the prediction
    assert page.locator("svg.lw-trace rect.lw-level-mean").count() == 3
    assert page.locator("svg.lw-trace path.lw-mean-line").count() == 2
    assert not errors
    context.close()
