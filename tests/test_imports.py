"""Architecture: levelwise must run without any Jupyter, widget or plotting library."""

import subprocess
import sys

FORBIDDEN = ["ipywidgets", "bqplot", "traitlets", "IPython", "ipykernel", "voila"]


def test_kernel_core_imports_no_jupyter_modules():
    code = (
        "import sys, levelwise, levelwise.demo\n"
        "import levelwise.model, levelwise.model._fit, levelwise.model._engine, levelwise.design\n"
        f"bad = [m for m in {FORBIDDEN!r} if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"levelwise imported {out.stdout.strip()}"


def test_the_check_itself_can_fail():
    # The same probe on widgets must see traitlets, or the test above proves nothing.
    code = "import sys, levelwise.widgets; print('traitlets' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "True"
