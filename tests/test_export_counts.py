"""The offline export of count responses (issue 15): the page evaluates the engine's link-scale payload and
transforms it (logistic, normal distribution function, exponential), agreeing with the kernel's GlmFit.predict
to 1e-9; a probability is shown as a percentage and no prediction interval is given (the page says why).
The study is invented and seeded; the kernel's numbers are checked against statsmodels in test_fit_glm.py."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

import levelwise as lw
from levelwise import Study
from levelwise.dashboards.export_html import write_export

FACTORS = [lw.Factor("Oven", 160, 200, "degC"), lw.Factor("Dwell", 5, 15, "min")]


def count_study():
    """An invented replicated 2^2 with centre points: passes out of 20 panels (logit and probit) and defects
    over a panel area."""
    design = lw.full_factorial(FACTORS, replicates=3, center_points=3, seed=5)
    t = design.table
    rng = np.random.default_rng(5)
    a, b = (t["Oven"] - 180) / 20, (t["Dwell"] - 10) / 5
    s = Study(FACTORS, title="counts (invented)")
    s.add_stage("runs", design)
    for name, units in (("Panels", "panels"), ("Area", "m2")):
        s.add_response(name, units=units)
    s.add_response("Adhesion", units="panels passed", goal="maximize", family="binomial", trials="Panels")
    s.add_response("Adhesion probit", family="binomial", trials="Panels", link="probit")
    s.add_response("Defects", units="defects", family="poisson", exposure="Area")
    passes = rng.binomial(20, 1 / (1 + np.exp(-(1.2 + 0.9 * a - 0.5 * b - 0.4 * a * a))))
    area = rng.uniform(0.5, 2.0, len(t)).round(2)
    defects = rng.poisson(area * np.exp(0.8 - 0.5 * a + 0.3 * b))
    for i, run in enumerate(t["run"]):
        for name, value in (("Panels", 20), ("Area", area[i]), ("Adhesion", passes[i]),
                            ("Adhesion probit", passes[i]), ("Defects", defects[i])):
            s.record(int(run), name, float(value))
    for name in ("Adhesion", "Adhesion probit"):
        s.set_model(name, "Oven * Dwell + I(Oven**2)")
    s.set_model("Defects", "Oven + Dwell")
    return s


COUNTS = ("Adhesion", "Adhesion probit", "Defects")


def embedded(text):
    return json.loads(re.search(r'<script id="lw-data" type="application/json">(.*?)</script>', text, re.S).group(1))


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    study = count_study()
    return study, write_export(study, tmp_path_factory.mktemp("counts") / "counts.html")


def test_the_payload_is_the_engines_with_the_link(exported):
    study, path = exported
    data = embedded(path.read_text(encoding="utf-8"))
    models = {m["name"]: m for m in data["responses"]}
    assert set(models) == set(COUNTS)  # the trials and exposure columns are not responses shown on the page
    for name in COUNTS:
        fit = study.fit(name)
        expected = json.loads(json.dumps(fit.engine.payload()))
        for key, value in expected.items():
            assert models[name][key] == value, key
        assert models[name]["link"] == fit.link and models[name]["note"] == fit.new_observation_note
    assert models["Adhesion"]["percent"] and not models["Defects"]["percent"]


@pytest.mark.browser
def test_the_page_transforms_the_link_scale_like_the_kernel(exported, browser):
    study, path = exported
    page = browser.new_page()
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(path.as_uri())
    numbers = page.locator("#lw-numbers")
    slider = page.locator("input.lw-range").first
    slider.focus()
    reference = {name: study.fit(name) for name in COUNTS}
    for steps in (0, 9, 60):  # the centre, inside the region, and beyond its edge (far into the tails)
        for _ in range(steps):
            slider.press("ArrowRight")
        shown = json.loads(numbers.get_attribute("data-numbers"))
        expected_rows = {name: fit.predict(shown["settings"]).iloc[0] for name, fit in reference.items()}
        for name, expected in expected_rows.items():
            got = shown["responses"][name]
            for key in ("mean", "ci_low", "ci_high"):
                assert got[key] == pytest.approx(expected[key], rel=1e-9, abs=1e-12), (name, key)
            assert got["link_mean"] == pytest.approx(expected["link_mean"], rel=1e-9, abs=1e-12)
            assert got["pi_low"] is None and got["pi_high"] is None  # NaN: no interval for one new count
            assert got["extrapolated"] is bool(expected["extrapolated"])
            if name != "Defects":
                assert 0 < got["ci_low"] <= got["mean"] <= got["ci_high"] < 1
    # What a reader sees: the pass rate in %, and why there is no prediction interval.
    row = page.locator('.lw-pred-row[data-response="Adhesion"]')
    mean_text = row.locator(".lw-mean").inner_text()
    assert mean_text.endswith("%")
    assert float(mean_text.split()[0]) == pytest.approx(100 * shown["responses"]["Adhesion"]["mean"], rel=1e-3)
    assert "not given for a count" in row.locator(".lw-pi").inner_text()
    page.locator("#lw-response").select_option(label="Adhesion")  # the traces of the pass rate
    assert page.locator("svg.lw-trace polygon.lw-ci-band").count() == len(FACTORS)
    assert page.locator("svg.lw-trace polygon.lw-pi-band").count() == 0  # no PI band for a count response
    assert "pass/fail counts (binomial)" in page.content()
    assert not errors
