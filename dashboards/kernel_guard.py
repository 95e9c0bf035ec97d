"""Kernel-side guards for a served dashboard.

- :func:`silence_tracebacks`: ipywidgets answers a widget message that fails (a crafted value the
  trait refuses, a read-only refusal) with ``get_ipython().showtraceback()``, which publishes the
  full traceback, with server paths and source lines, on the kernel's iopub channel. Voilà's
  ``show_tracebacks=False`` covers the notebook's own cells, not these. The shell's
  ``showtraceback`` is replaced so such a failure is one line on the kernel process's stderr, which
  the server's connection class keeps in the server log and never sends to a browser.
- :func:`guard_widget_opens`: a browser may ask the kernel to create widgets (``comm_open`` on the
  ``jupyter.widget`` target); 3,000 such opens of a 100 KB model once took a viewer's kernel from
  194 MB to 528 MB. The pages create every widget in the kernel, so a browser may create at most
  :data:`CLIENT_WIDGET_LIMIT` widgets per kernel, and only of model names the page itself created.
  A refused open is closed quietly (a plain ``comm_close``): no traceback, no path.

The server refuses such opens first (:class:`levelwise.dashboards.hardening.V1OnlyWebsocketConnection`);
this guard holds when the notebook is served some other way.
"""

from __future__ import annotations

import sys

#: Widgets a browser may create in one kernel.
CLIENT_WIDGET_LIMIT = 8

_said: set[str] = set()


def log_line(text: str) -> None:
    """One line on the kernel process's own stderr: the server's log, never a browser."""
    print(f"levelwise: {text}", file=sys.__stderr__, flush=True)


def _log_only(*args, **kwargs) -> None:
    kind, value, _ = sys.exc_info()
    name = getattr(kind, "__name__", "error")
    log_line(f"refused a widget message ({name}: {str(value)[:300]})")


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


class WidgetOpenGuard:
    """The ``jupyter.widget`` comm target with a cap and a list of known model names (see the module)."""

    def __init__(self, opened, limit: int = CLIENT_WIDGET_LIMIT, known=None):
        self.opened, self.limit, self.known = opened, int(limit), known
        self.created = 0
        self.refused = 0

    def model_names(self) -> set:
        if self.known is not None:
            return set(self.known)
        from ipywidgets import Widget

        return {getattr(w, "_model_name", None) for w in list(Widget.widgets.values())}

    def __call__(self, comm, msg) -> None:
        try:
            state = msg["content"]["data"]["state"]
            name = state.get("_model_name")
        except (KeyError, TypeError, AttributeError):
            name = None
        if self.created >= self.limit:
            why = f"the page allows at most {self.limit} widgets from the browser"
        elif not isinstance(name, str) or name not in self.model_names():
            why = "the page never created that kind of widget"
        else:
            self.created += 1
            self.opened(comm, msg)
            return
        self.refused += 1
        if why not in _said:
            _said.add(why)
            log_line(f"refused a widget opened by the browser ({why}); further ones are not logged")
        try:
            comm.close()
        except Exception:  # noqa: BLE001 - the client is gone: nothing to close
            pass


def guard_widget_opens(limit: int = CLIENT_WIDGET_LIMIT) -> WidgetOpenGuard | None:
    """Replace the kernel's ``jupyter.widget`` comm target by a :class:`WidgetOpenGuard`; None outside a kernel."""
    try:
        import comm
        from ipywidgets import Widget
    except ImportError:  # pragma: no cover - a kernel always has both
        return None
    manager = comm.get_comm_manager()
    if manager is None or not hasattr(manager, "register_target"):
        return None
    current = getattr(manager, "targets", {}).get("jupyter.widget")
    if isinstance(current, WidgetOpenGuard):
        return current
    guard = WidgetOpenGuard(Widget.handle_comm_opened, limit)
    manager.register_target("jupyter.widget", guard)
    return guard


def guard_kernel() -> None:
    """Every kernel-side guard of a served page (see the module)."""
    silence_tracebacks()
    guard_widget_opens()
