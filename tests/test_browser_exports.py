"""Save figure and Export table in the served workbench (real Chromium, loopback only): the buttons are pressed
in the page, the kernel draws the files, and the download links give a PNG, an SVG, a CSV and an XLSX.

The study is the invented demo campaign; the checks are the files' formats and the exported ANOVA's rows.
"""

from __future__ import annotations

import io

import pandas as pd
import pytest
from conftest import loopback_only

pytestmark = pytest.mark.browser


@pytest.fixture(scope="module")
def page(served_workbench, browser):
    context = browser.new_context(viewport={"width": 1280, "height": 1000}, accept_downloads=True)
    page = context.new_page()
    page.route("**/*", loopback_only)
    page.goto(served_workbench, timeout=120_000)
    page.locator(".lw-coefficients table").first.wait_for(timeout=120_000)
    yield page
    context.close()


def download(page, link, tmp_path):
    with page.expect_download(timeout=30_000) as info:
        link.click()
    target = tmp_path / info.value.suggested_filename
    info.value.save_as(target)
    return target


def test_save_figure_and_export_table_in_the_page(page, tmp_path):
    view = page.locator(".lw-effects-view").first
    view.locator(".lw-save-figure").click()
    png = view.locator('.lw-export-links a[download$=".png"]')
    png.wait_for(timeout=60_000)
    assert download(page, png, tmp_path).read_bytes().startswith(b"\x89PNG\r\n\x1a\n")
    svg = download(page, view.locator('.lw-export-links a[download$=".svg"]'), tmp_path)
    assert b"<svg" in svg.read_bytes()[:2000]
    view.locator(".lw-export-table").click()
    csv = view.locator('.lw-export-links a[download="anova-Impact.csv"]')
    csv.wait_for(timeout=60_000)
    table = pd.read_csv(io.BytesIO(download(page, csv, tmp_path).read_bytes()))
    assert "sum_sq [J²]" in table.columns and "Oven" in set(table["source"])
    xlsx = download(page, view.locator('.lw-export-links a[download="anova-Impact.xlsx"]'), tmp_path)
    assert xlsx.read_bytes()[:2] == b"PK"
    assert "lw-error" not in view.locator(".lw-status").first.inner_html()
