"""Kernel-side guards for a published dashboard.

ipywidgets answers a widget message that fails (a crafted value the trait refuses, a
read-only refusal) with ``get_ipython().showtraceback()``, which publishes the full
traceback, with server paths and source lines, on the kernel's iopub channel to every
connected client. Voilà's ``show_tracebacks=False`` covers the notebook's own cells, not
these. :func:`silence_tracebacks` replaces the shell's ``showtraceback`` so such a failure
is written as one line to the kernel process's own stderr (the server's log) and nothing
reaches the browser.
"""

from __future__ import annotations

import sys


def _log_only(*args, **kwargs) -> None:
    kind, value, _ = sys.exc_info()
    name = getattr(kind, "__name__", "error")
    print(f"levelwise: refused a widget message ({name}: {value})", file=sys.__stderr__, flush=True)


def silence_tracebacks() -> bool:
    """In a running IPython kernel, keep tracebacks out of every message; True when applied."""
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover - a kernel always has IPython
        return False
    shell = get_ipython()
    if shell is None:
        return False
    shell.showtraceback = _log_only
    return True
