"""The offline single-file export: self-contained, opens from file:// with every request aborted, and
computes in the page the same numbers as the kernel (to 1e-9)."""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pytest
from conftest import SCREENSHOTS

from levelwise import LevelwiseWarning
from levelwise.dashboards.cli import main
from levelwise.dashboards.export_html import write_export
from levelwise.dashboards.study_source import open_study


def quiet_fit(study, name):
    """Study.fit without its warning about the demo's one missing impact value (tested in its own test)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LevelwiseWarning)
        return study.fit(name)


@pytest.fixture(scope="module")
def export_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("export") / "study.html"
    assert main(["export-html", "demo", "-o", str(path)]) == 0
    return path


def kernel_reference(source):
    """The kernel's fits of the study file, one per response with a model (made by the Study, not from the page's
    payload; the demo's panel count is the trials of the adhesion passes, not a response of its own)."""
    return {name: quiet_fit(source, name) for name in source.response_names if name in source.models}


def test_export_is_one_self_contained_small_file(export_file):
    text = export_file.read_text(encoding="utf-8")
    assert export_file.stat().st_size < 2_000_000  # issue 6: under about 2 MB for a typical study
    # Nothing is fetched from anywhere: no external script, style, font or image reference.
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", text)
    assert "@import" not in text and "url(" not in text
    assert "default-src 'none'" in text  # the page's own policy forbids any fetch
    assert "Predictions hold only inside the tested region" in text


def test_export_refuses_a_missing_study(tmp_path, capsys):
    code = main(["export-html", str(tmp_path / "nope.json"), "-o", str(tmp_path / "x.html")])
    assert code == 1
    assert "does not exist" in capsys.readouterr().err
    assert not (tmp_path / "x.html").exists()


def embedded_data(text):
    return json.loads(re.search(r'<script id="lw-data" type="application/json">(.*?)</script>', text, re.S).group(1))


def test_export_embeds_exactly_the_engine_payload(export_file):
    """The page's numbers per response are the prediction engine's payload of the kernel's own fit."""
    data = embedded_data(export_file.read_text(encoding="utf-8"))
    reference = kernel_reference(open_study("demo"))
    assert [m["name"] for m in data["responses"]] == list(reference)
    for model in data["responses"]:
        expected = json.loads(json.dumps(reference[model["name"]].engine.payload()))  # the same JSON round trip
        for key, value in expected.items():
            assert model[key] == value, key


def test_export_payload_escapes_script_end(tmp_path):
    tricky = open_study("demo")
    tricky.set_title("</script><script>alert(1)</script>")
    path = write_export(tricky, tmp_path / "t.html")
    text = path.read_text(encoding="utf-8")
    # Only the page's own two script elements end; the title's "</script>" is escaped everywhere.
    assert text.count("</script") == 2
    assert "&lt;/script&gt;&lt;script&gt;alert(1)" in text


@pytest.mark.browser
def test_export_computes_offline_like_the_kernel(export_file, browser):
    context = browser.new_context(viewport={"width": 1300, "height": 1100})
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
    numbers = page.locator("#lw-numbers")
    before = json.loads(numbers.get_attribute("data-numbers"))
    first = page.locator("input.lw-range").first
    first.focus()
    for _ in range(7):
        first.press("ArrowRight")
    second = page.locator("input.lw-range").nth(1)
    second.focus()
    second.press("ArrowLeft")
    after = json.loads(numbers.get_attribute("data-numbers"))
    assert after["settings"] != before["settings"]
    source = open_study("demo")
    reference = kernel_reference(source)
    for name, model_fit in reference.items():
        assert after["responses"][name]["mean"] != before["responses"][name]["mean"]
        expected = model_fit.predict(after["settings"]).iloc[0]  # the kernel's numbers at the page's settings
        count = getattr(model_fit, "kind", None) == "glm"  # the adhesion passes: no interval for one new count
        for key in ("mean", "ci_low", "ci_high") if count else ("mean", "ci_low", "ci_high", "pi_low", "pi_high",
                                                                  "leverage"):
            assert after["responses"][name][key] == pytest.approx(expected[key], rel=1e-9, abs=1e-9)
        assert after["responses"][name]["extrapolated"] is bool(expected["extrapolated"])
    # The text a reader sees is the same number, rounded.
    row = page.locator(".lw-pred-row").first
    shown = float(row.locator(".lw-mean").inner_text().split()[0])
    assert shown == pytest.approx(after["responses"][source.response_names[0]]["mean"], rel=1e-3)
    # Off the tested region the page applies the engine's extrapolation rule too.
    first.focus()
    for _ in range(120):
        first.press("ArrowRight")
    edge = json.loads(numbers.get_attribute("data-numbers"))
    for name, model_fit in reference.items():
        expected = model_fit.predict(edge["settings"]).iloc[0]
        assert edge["responses"][name]["mean"] == pytest.approx(expected["mean"], rel=1e-9, abs=1e-9)
        assert edge["responses"][name]["extrapolated"] is bool(expected["extrapolated"])
    # Clicking the surface slice moves the two slice factors' settings.
    page.locator("#lw-canvas").click(position={"x": 40, "y": 40})
    clicked = json.loads(numbers.get_attribute("data-numbers"))["settings"]
    f0, f1 = source.factors[0], source.factors[1]
    assert clicked[f0.name] < f0.center and clicked[f1.name] > f1.center
    assert page.locator("svg.lw-trace path.lw-mean-line").count() == len(source.factors)
    assert not errors
    assert all(url.startswith("file://") for url in requests)
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.evaluate("window.scrollTo(0, 0)")
    page.screenshot(path=str(SCREENSHOTS / "offline-export.png"))
    context.close()
    assert np.isfinite(after["responses"][source.response_names[0]]["pi_high"])


def test_export_of_a_saturated_fit_says_not_available(tmp_path):
    """A fit with no residual degrees of freedom has no s: the page gets null, never NaN (invalid JSON)."""
    from levelwise import Factor, full_factorial
    from levelwise.study import Study

    study = Study([Factor("A", 0, 1), Factor("B", 10, 20, "min")], title="saturated (invented)")
    study.add_stage("screen", full_factorial(study.factors, randomize=False))
    study.add_response("y", units="g", goal="maximize")
    for run, value in zip(study.run_ids, [1.0, 3.0, 2.0, 4.5]):
        study.record(run, "y", value)
    study.set_model("y", "A + B + A:B")  # 4 terms, 4 runs
    path = tmp_path / "s.json"
    study.save(path)
    out = write_export(str(path), tmp_path / "s.html")
    text = out.read_text(encoding="utf-8")
    block = re.search(r'<script id="lw-data" type="application/json">(.*?)</script>', text, re.S).group(1)
    assert "NaN" not in block and "Infinity" not in block  # not JSON: the page's JSON.parse would fail
    data = json.loads(block)
    assert data["responses"][0]["s"] is None and data["responses"][0]["df"] == 0
    assert data["responses"][0]["c"] is None  # no interval scale without residual degrees of freedom
    assert "nothing left to judge its error by" in text


def test_export_of_a_split_plot_study_computes_like_the_mixed_fit(tmp_path, browser):
    """The invented split-plot demo: the page evaluates the REML fit's engine (both variance components in the
    prediction interval) and agrees with MixedFit.predict to 1e-9."""
    from levelwise import demo
    from levelwise.model import MixedFit

    source = demo.split_plot_study()
    path = write_export(source, tmp_path / "split.html")
    text = path.read_text(encoding="utf-8")
    reference = source.fit("Impact")
    assert isinstance(reference, MixedFit)
    data = embedded_data(text)
    model = data["responses"][0]
    expected = json.loads(json.dumps(reference.engine.payload()))
    for key, value in expected.items():
        assert model[key] == value, key
    # The new-run variance the page adds is the sum of the REML components (not s^2 of least squares).
    assert model["extra"] == pytest.approx(float(reference.variance_components.sum()), rel=1e-12)
    assert model["df"] == reference.df_whole_plot
    assert "Split-plot analysis (REML)" in text and "hard to change: held over whole plots" in text
    page = browser.new_page()
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(path.as_uri())
    numbers = page.locator("#lw-numbers")
    first = page.locator("input.lw-range").first
    first.focus()
    for _ in range(5):
        first.press("ArrowRight")
    after = json.loads(numbers.get_attribute("data-numbers"))
    expected = reference.predict(after["settings"]).iloc[0]
    for key in ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "leverage"):
        assert after["responses"]["Impact"][key] == pytest.approx(expected[key], rel=1e-9, abs=1e-9)
    assert not errors
    page.close()
