"""The wheel installs one import package, ``levelwise``, and nothing else into site-packages."""

import os
import site
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
JUPYTER_OR_PLOTTING = [
    "ipywidgets", "bqplot", "traitlets", "IPython", "ipykernel", "voila", "matplotlib", "jupyter_server",
]


def _run(command, **kwargs):
    out = subprocess.run(command, capture_output=True, text=True, timeout=300, **kwargs)
    assert out.returncode == 0, f"{command} failed:\n{out.stdout}\n{out.stderr}"
    return out


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    """Build the wheel from the working tree (no build isolation: setuptools comes from the test extra)."""
    out_dir = tmp_path_factory.mktemp("wheel")
    command = [sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-w", str(out_dir), str(ROOT)]
    build = _run(command, cwd=out_dir)
    wheels = list(out_dir.glob("levelwise-*.whl"))
    assert len(wheels) == 1, build.stdout
    return wheels[0], build


@pytest.fixture(scope="module")
def fresh_env(wheel, tmp_path_factory):
    """A new virtual environment holding only the wheel; its dependencies come from this environment's
    site-packages through a .pth line (so the test needs no network), which adds no package of its own."""
    venv = tmp_path_factory.mktemp("venv") / "env"
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)])
    python = venv / "bin" / "python"
    install = _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps", str(wheel[0])])
    purelib = Path(_run([str(python), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"]).stdout.strip())
    before = set(os.listdir(purelib))
    (purelib / "zz_test_dependencies.pth").write_text(sysconfig.get_path("purelib") + "\n")
    return venv, python, purelib, before, install


def test_wheel_holds_only_levelwise(wheel):
    with zipfile.ZipFile(wheel[0]) as archive:
        tops = {name.split("/")[0] for name in archive.namelist()}
        names = archive.namelist()
    assert {t for t in tops if not t.endswith(".dist-info")} == {"levelwise"}
    # package data travels with it: the study schema, the notebooks, the export's script and the demo study
    for needed in ("levelwise/study/study_schema.json", "levelwise/dashboards/explore.ipynb",
                   "levelwise/dashboards/present.ipynb", "levelwise/dashboards/assets/export_page.js",
                   "levelwise/dashboards/data/demo_campaign.json", "levelwise/widgets/__init__.py"):
        assert needed in names, f"{needed} missing from the wheel"


def test_build_and_install_print_no_packaging_warnings(wheel, fresh_env):
    for out in (wheel[1], fresh_env[4]):
        text = (out.stdout + out.stderr).lower()
        for word in ("warning", "deprecat"):
            lines = [line for line in text.splitlines() if word in line and "location 'file:" not in line]
            assert not lines, "\n".join(lines)


def test_fresh_environment_gets_one_top_level_name(fresh_env):
    venv, python, purelib, before, _ = fresh_env
    added = {name for name in before if not name.startswith(("_", "pip"))}
    added = {name for name in added if not name.endswith(".dist-info")}
    assert added == {"levelwise"}, sorted(before)


def test_import_levelwise_loads_no_jupyter_or_plotting_library(fresh_env, tmp_path):
    venv, python, *_ = fresh_env
    code = (
        "import sys, levelwise\n"
        "assert levelwise.__file__.startswith(sys.prefix), levelwise.__file__\n"
        f"print(levelwise.__version__, [m for m in {JUPYTER_OR_PLOTTING!r} if m in sys.modules])\n"
    )
    out = _run([str(python), "-c", code], cwd=tmp_path)
    version, loaded = out.stdout.strip().split(" ", 1)
    assert version.count(".") >= 1
    assert loaded == "[]"


def test_user_modules_named_like_ours_do_not_hide_levelwise(fresh_env, tmp_path):
    venv, python, *_ = fresh_env
    for name in ("widgets", "dashboards", "kernel_core"):
        (tmp_path / f"{name}.py").write_text("raise ImportError('a user module of the same name')\n")
    out = _run([str(python), "-c", "import levelwise.widgets as w; print(w.SharedModel.__name__)"], cwd=tmp_path)
    assert out.stdout.strip() == "SharedModel"


def test_export_html_demo_from_the_installed_command(fresh_env, tmp_path):
    venv, *_ = fresh_env
    target = tmp_path / "demo.html"
    _run([str(venv / "bin" / "levelwise"), "export-html", "demo", "-o", str(target)], cwd=tmp_path)
    page = target.read_text(encoding="utf-8")
    assert len(page) > 10_000 and "<script" in page


def test_site_packages_location_is_not_this_checkout():
    # The editable install used for development maps levelwise onto kernel_core/ (a sanity check on the setup).
    import levelwise

    assert Path(levelwise.__file__).parent.name == "kernel_core"
    assert site.getsitepackages()
