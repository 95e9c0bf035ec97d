"""Architecture: kernel_core must run without any Jupyter, widget or plotting library."""

import subprocess
import sys

FORBIDDEN = ["ipywidgets", "bqplot", "traitlets", "IPython", "ipykernel", "voila"]


def test_kernel_core_imports_no_jupyter_modules():
    code = (
        "import sys, kernel_core, kernel_core.demo\n"
        "import kernel_core.fit, kernel_core.design, kernel_core.formula\n"
        f"bad = [m for m in {FORBIDDEN!r} if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"kernel_core imported {out.stdout.strip()}"


def test_the_check_itself_can_fail():
    # The same probe on widgets must see traitlets, or the test above proves nothing.
    code = "import sys, widgets; print('traitlets' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "True"
