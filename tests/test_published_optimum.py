"""The published page's optimum: searched once by ``levelwise publish``, shown by every viewer's kernel without the
search (and without importing scipy.optimize), and searched again whenever the stored one is not for this page."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from levelwise.dashboards import present, stored_optimum
from levelwise.dashboards.cli import main


@pytest.fixture(scope="module")
def folder(published_dir):
    """The published demo (conftest's ``levelwise publish demo`` folder)."""
    return published_dir


@pytest.fixture(scope="module")
def example_folder(tmp_path_factory):
    """The example study (least-squares responses only, with goals) published."""
    out = tmp_path_factory.mktemp("published") / "example"
    assert main(["publish", str(Path(__file__).parent / "data" / "study_example.json"), "--out", str(out)]) == 0
    return out


def optimizer_view(page):
    return next(v for v in page.views if type(v).__name__ == "OptimizerView")


def copy_without_optimum(folder, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(folder, copy)
    (copy / stored_optimum.OPTIMUM_FILE).unlink()
    return copy


def test_stored_optimum_is_the_pages_own_search(folder, tmp_path):
    """The page built from the published folder shows the stored optimum; a page built from the same folder
    without the file runs the search itself. Both find the same optimum, to the search's own spread (its starts
    are random and SLSQP stops on a flat optimum within ~1e-8 of the settings from one run to the next)."""
    stored = json.loads((folder / stored_optimum.OPTIMUM_FILE).read_text())
    shown = optimizer_view(present.build(str(folder / "study.json")))
    searched = optimizer_view(present.build(str(copy_without_optimum(folder, tmp_path) / "study.json")))
    assert shown.optimum.settings == stored["optimum"]["settings"]  # the page used the stored answer
    assert "Best settings found" in shown.result.value and "Best settings found" in searched.result.value
    assert not shown.use_button.disabled
    a, b = shown.optimum, searched.optimum
    assert set(a.settings) == set(b.settings)
    for name, value in a.settings.items():
        assert value == pytest.approx(b.settings[name], rel=1e-5, abs=1e-9)
    assert a.overall == pytest.approx(b.overall, rel=1e-7)
    pd.testing.assert_frame_equal(a.predictions, b.predictions, rtol=1e-5)
    pd.testing.assert_series_equal(a.desirability, b.desirability, rtol=1e-7)
    assert list(a.starts.columns) == list(b.starts.columns) and len(a.starts) == len(b.starts)
    shown.use()  # "Use these settings" moves the page's settings to the stored optimum
    assert shown.shared.settings["Oven"] == pytest.approx(a.settings["Oven"])


def test_a_stored_optimum_for_another_study_or_goals_is_not_used(folder, tmp_path):
    copy = tmp_path / "edited"
    shutil.copytree(folder, copy)
    view = optimizer_view(present.build(str(copy / "study.json")))
    assert stored_optimum.read(copy / "study.json", view) is not None
    # the study file replaced after publishing (same study, other bytes): its hash no longer matches
    (copy / "study.json").write_text((copy / "study.json").read_text() + "\n")
    assert stored_optimum.read(copy / "study.json", view) is None
    # other goals, starts or levelwise version: not this page's answer
    for field, value in (("starts", 999), ("levelwise", "0.0.0"), ("goals", {})):
        edited = json.loads((folder / stored_optimum.OPTIMUM_FILE).read_text())
        edited["key"][field] = value
        (folder.parent / "probe").mkdir(exist_ok=True)
        probe = folder.parent / "probe"
        shutil.copy(folder / "study.json", probe / "study.json")
        (probe / stored_optimum.OPTIMUM_FILE).write_text(json.dumps(edited))
        assert stored_optimum.read(probe / "study.json", view) is None, field
    # a damaged file: no stored optimum, and the page still shows one (its own search)
    (probe / stored_optimum.OPTIMUM_FILE).write_text("{not json")
    assert stored_optimum.read(probe / "study.json", view) is None
    page = present.build(str(probe / "study.json"))
    assert "Best settings found" in optimizer_view(page).result.value


def test_viewer_kernel_imports_neither_the_optimiser_nor_statsmodels(example_folder):
    """A published least-squares study's page built as its kernel builds it: no scipy.optimize, scipy.stats or
    statsmodels module is loaded (without the stored optimum the search loads scipy.optimize: the next test).
    A pass-rate or rate response's GLM is fitted by statsmodels, whose GLM imports scipy.stats and with it
    scipy.optimize: the demo page loads them for that fit."""
    code = ("import sys\n"
            "from levelwise.dashboards.present import build\n"
            "page = build(sys.argv[1])\n"
            "view = next(v for v in page.views if type(v).__name__ == 'OptimizerView')\n"
            "assert 'Best settings found' in view.result.value\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] == 'statsmodels' or m.startswith(('scipy.optimize',"
            " 'scipy.stats')))[:3])")
    done = subprocess.run([sys.executable, "-c", code, str(example_folder / "study.json")], capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "[]"


def test_without_the_stored_optimum_the_page_loads_the_optimiser(example_folder, tmp_path):
    copy = copy_without_optimum(example_folder, tmp_path)
    code = ("import sys\n"
            "from levelwise.dashboards.present import build\n"
            "build(sys.argv[1])\n"
            "print('scipy.optimize' in sys.modules)")
    done = subprocess.run([sys.executable, "-c", code, str(copy / "study.json")], capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "True"
