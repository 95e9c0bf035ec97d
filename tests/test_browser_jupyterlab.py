"""A notebook run in JupyterLab (real Chromium, loopback only): the views display themselves, and moving a
slider in the page changes the value in the kernel (shown back by a label the kernel sets).

The study is the invented demo campaign. JupyterLab is started on a free loopback port with its own settings,
workspace and runtime folders (nothing of the user's is read or written) and no update or news check.
"""

from __future__ import annotations

import os
import re
import secrets
import subprocess
import sys
import time

import pytest
from conftest import loopback_only
from servers import free_port, wait_for_port

pytestmark = pytest.mark.browser
nbformat = pytest.importorskip("nbformat")
pytest.importorskip("jupyterlab")

SETUP = """\
import ipywidgets as ipw
from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import FactorSliders, SharedModel

shared = SharedModel.from_study(demo_study())
sliders = FactorSliders(shared)
seen = ipw.Label(value=f"kernel Oven = {shared.settings['Oven']:g}").add_class("lw-kernel-value")
shared.observe(lambda change: setattr(seen, "value", f"kernel Oven = {shared.settings['Oven']:g}"), names="settings")
seen"""


@pytest.fixture(scope="module")
def lab(tmp_path_factory, chromium_path):
    root = tmp_path_factory.mktemp("lab")
    notebook = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(SETUP),
                                               nbformat.v4.new_code_cell("sliders  # a view shows itself")],
                                        metadata={"kernelspec": {"name": "python3", "language": "python",
                                                                 "display_name": "Python 3 (ipykernel)"}})
    nbformat.write(notebook, root / "check.ipynb")
    token, port = secrets.token_hex(16), free_port()
    env = dict(os.environ)
    for name in ("JUPYTER_CONFIG_DIR", "JUPYTERLAB_SETTINGS_DIR", "JUPYTERLAB_WORKSPACES_DIR", "JUPYTER_RUNTIME_DIR"):
        env[name] = str(tmp_path_factory.mktemp(name.lower()))
    env["OPENBLAS_NUM_THREADS"] = "1"
    proc = subprocess.Popen(
        [sys.executable, "-m", "jupyterlab", "--no-browser", f"--port={port}", "--ServerApp.ip=127.0.0.1",
         f"--IdentityProvider.token={token}", f"--ServerApp.root_dir={root}", "--expose-app-in-browser",
         "--LabApp.news_url=None", "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
         "--ServerApp.allow_root=True", "--LabApp.extension_manager=readonly"],
        stdout=subprocess.DEVNULL, stderr=subprocess.STDOUT, env=env, cwd=root,
    )
    try:
        wait_for_port(port, proc, timeout=90)
        yield f"http://127.0.0.1:{port}/lab/tree/check.ipynb?token={token}"
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()


def kernel_value(page) -> float:
    text = page.locator(".lw-kernel-value").first.inner_text()
    return float(re.search(r"kernel Oven = ([-0-9.e]+)", text).group(1))


def test_a_notebook_in_jupyterlab_moves_a_slider_and_the_kernel_follows(lab, browser):
    started = time.monotonic()
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    page = context.new_page()
    page.route("**/*", loopback_only)
    try:
        page.goto(lab, timeout=90_000)
        page.locator(".jp-Notebook .jp-Cell").nth(1).wait_for(timeout=90_000)
        page.wait_for_function("() => { const w = window.jupyterapp && window.jupyterapp.shell.currentWidget;"
                               " return w && w.sessionContext && w.sessionContext.session"
                               " && w.sessionContext.session.kernel; }", timeout=90_000)
        page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
        page.locator(".lw-kernel-value").first.wait_for(timeout=90_000)
        handle = page.locator(".lw-slider .noUi-handle").first  # Oven, the first factor
        handle.wait_for(timeout=60_000)
        assert kernel_value(page) == pytest.approx(float(handle.get_attribute("aria-valuenow")))
        before = kernel_value(page)
        handle.focus()
        for _ in range(3):
            page.keyboard.press("ArrowRight")
        page.wait_for_function(
            "(v) => { const e = document.querySelector('.lw-kernel-value');"
            " return e && !e.innerText.includes('kernel Oven = ' + v); }", arg=f"{before:g}", timeout=30_000)
        after = kernel_value(page)
        assert after > before  # the kernel's value moved the way the slider did
        page.wait_for_function(  # and it is the slider's value (the browser and the kernel agree)
            "(v) => Number(document.querySelector('.lw-slider .noUi-handle').getAttribute('aria-valuenow')) === v",
            arg=after, timeout=30_000)
        assert "Traceback" not in page.locator(".jp-Notebook").first.inner_text()
    finally:
        context.close()
    assert time.monotonic() - started < 180  # a guard against a hang, not a speed goal
