"""The published read-only dashboard of the invented split-plot study (issue 13), in Chromium: the readout shows
the REML fit's confidence and prediction intervals (not least squares'), before and after a slider moves, and the
page says in words that the analysis is split-plot.

References: levelwise's ``lw.fit(..., whole_plot=...)`` on the study's data, and independently statsmodels
``MixedLM`` (REML) variance components with scipy's t quantile on the whole-plot stratum df for the prediction
interval's half-width.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from conftest import SCREENSHOTS, start_cli_server, stop_server, wait_until_children_idle
from scipy import stats
from servers import free_port, loopback_only

import levelwise as lw
from levelwise import LevelwiseWarning, demo
from levelwise.dashboards.cli import main
from levelwise.dashboards.study_source import DEMO_FILE
from levelwise.widgets.style import fmt

pytestmark = pytest.mark.browser

SPLIT_FILE = DEMO_FILE.parent / "demo_split_plot.json"


@pytest.fixture(scope="module")
def served_split_plot(chromium_path, tmp_path_factory):
    out = tmp_path_factory.mktemp("published-split-plot") / "dashboard"
    assert main(["publish", str(SPLIT_FILE), "--out", str(out)]) == 0
    port = free_port()
    proc, output = start_cli_server(["view", str(out)], port)
    output.wait_for("is filled with", timeout=60)
    wait_until_children_idle(proc.pid)
    try:
        yield f"http://127.0.0.1:{port}/"
    finally:
        stop_server(proc)


def _fits():
    data = demo.split_plot_data()
    factors = list(demo.SPLIT_PLOT_FACTORS)
    mixed = lw.fit(data, "Impact", demo.SPLIT_PLOT_MODEL, factors=factors, whole_plot="whole_plot")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LevelwiseWarning)  # "analysed without its whole plots": on purpose here
        plain = lw.fit(data.drop(columns="whole_plot"), "Impact", demo.SPLIT_PLOT_MODEL, factors=factors)
    return data, mixed, plain


def _statsmodels_pi_half_width(data, se_mean):
    """t(0.975, whole-plot df) * sqrt(SE(mean)^2 + whole-plot variance + residual variance), MixedLM's components."""
    coded = pd.DataFrame({"a": (data["Oven"] - 190) / 20, "b": (data["Dwell"] - 12) / 4,
                          "c": (data["Film"] - 70) / 20, "y": data["Impact"], "wp": data["whole_plot"]})
    ref = smf.mixedlm("y ~ a + b + c + a:b", coded, groups=coded["wp"]).fit(reml=True)
    q = stats.t.ppf(0.975, 6)  # 8 whole plots - rank [1, Oven] = 6 (between-within rule)
    return q * np.sqrt(se_mean**2 + float(ref.cov_re.iloc[0, 0]) + ref.scale)


def _page_settings(page):
    values = [float(h.get_attribute("aria-valuenow")) for h in page.locator(".lw-slider .noUi-handle").all()]
    return {f.name: v for f, v in zip(demo.SPLIT_PLOT_FACTORS, values)}


def _wait_for_text(page, selector, text):
    page.wait_for_function(
        "([sel, want]) => [...document.querySelectorAll(sel)].some(e => e.innerText === want)",
        arg=[selector, text], timeout=30_000,
    )


def _check_readout(page, data, mixed, plain):
    settings = _page_settings(page)
    expected = mixed.predict(settings).iloc[0]
    assert expected["pi_high"] - expected["mean"] == pytest.approx(
        _statsmodels_pi_half_width(data, expected["se_mean"]), rel=1e-4)
    ci = f'{fmt(expected["ci_low"])} to {fmt(expected["ci_high"])}'
    pi = f'{fmt(expected["pi_low"])} to {fmt(expected["pi_high"])}'
    _wait_for_text(page, ".lw-readout .lw-mean", fmt(expected["mean"]))
    _wait_for_text(page, ".lw-readout .lw-ci", ci)
    _wait_for_text(page, ".lw-readout .lw-pi", pi)
    # Least squares on the same runs would show other intervals: the page shows the mixed model's.
    ls = plain.predict(settings).iloc[0]
    assert f'{fmt(ls["pi_low"])} to {fmt(ls["pi_high"])}' != pi
    assert f'{fmt(ls["ci_low"])} to {fmt(ls["ci_high"])}' != ci
    return pi


def test_published_split_plot_page_shows_the_mixed_models_intervals(served_split_plot, browser):
    data, mixed, plain = _fits()
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served_split_plot, timeout=60_000)
    page.locator(".lw-readout .lw-mean").first.wait_for(timeout=60_000)
    assert "Traceback" not in page.content()
    text = page.locator("body").inner_text()
    assert "Split-plot analysis (REML)" in text
    assert f"judged on {mixed.df_whole_plot} whole-plot degrees of freedom" in text
    before = _check_readout(page, data, mixed, plain)
    handle = page.locator(".lw-slider .noUi-handle").first  # the oven, the hard-to-change factor
    handle.focus()
    for _ in range(4):
        handle.press("ArrowRight")
    after = _check_readout(page, data, mixed, plain)
    assert after != before
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SCREENSHOTS / "published-split-plot.png"), full_page=True)
    context.close()
