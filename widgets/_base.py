"""What every view shares: the error line, safe callbacks, coalesced refreshes, float32 arrays."""

from __future__ import annotations

import asyncio
import html
import sys
import traceback

import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError


def f32(values) -> np.ndarray:
    """A float32 copy for the wire (half the bytes of float64; plenty for drawing)."""
    return np.asarray(values, dtype=np.float32)


def set_if_changed(mark, **arrays) -> None:
    """Assign array traits of a bqplot mark only when their values changed (nothing sent otherwise)."""
    for name, value in arrays.items():
        old = getattr(mark, name)
        if old is not None and np.shape(old) == np.shape(value) and np.array_equal(old, value, equal_nan=True):
            continue
        setattr(mark, name, value)


def error_html(message: str) -> str:
    return f'<div class="lw-error">{html.escape(message)}</div>' if message else ""


class Coalescer:
    """Run *work* once for any burst of requests: the latest state wins, nothing queues.

    Inside a running event loop (a kernel, Voilà) a request schedules *work* after
    *delay* seconds unless it is already scheduled; requests in between only mark it
    due. Without a running loop (plain Python, headless tests) the work runs at once.
    """

    def __init__(self, work, delay: float = 0.03):
        self.work, self.delay, self._handle = work, delay, None

    def request(self) -> None:
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            self.work()
            return
        if self._handle is None:
            self._handle = loop.call_later(self.delay, self._run)

    def _run(self) -> None:
        self._handle = None
        self.work()

    def flush(self) -> None:
        """Run pending work now (used when a caller needs the result immediately)."""
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None
            self.work()

    def cancel(self) -> None:
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None


class View:
    """Base of every view: a shared model, a status line, safe callbacks and ``close()``.

    Subclasses build ``self.widget`` and call :meth:`watch` for the shared-model traits they draw.
    """

    def __init__(self, shared):
        self.shared = shared
        self.status = ipw.HTML().add_class("lw-status")
        self._watched = []

    def watch(self, handler, names) -> None:
        """Observe *names* of the shared model with *handler*, made safe for the event loop."""
        safe = self.safely(handler)
        self.shared.observe(safe, names=names)
        self._watched.append((safe, names))

    def safely(self, handler):
        """Wrap a callback so that no exception reaches the event loop; errors go to the status line."""

        def run(*args, **kwargs):
            try:
                return handler(*args, **kwargs)
            except LevelwiseError as exc:
                self.show_error(str(exc))
            except Exception as exc:  # noqa: BLE001 - a view must never crash the dashboard
                # The viewer sees a short line; the traceback goes to the kernel process's own stderr (the
                # server's log), never to sys.stderr, which a kernel forwards to the browser.
                self.show_error(f"Internal error in {type(self).__name__} ({type(exc).__name__}); "
                                "the details are in the server's log.")
                traceback.print_exc(file=sys.__stderr__)
            return None

        return run

    def show_error(self, message: str) -> None:
        self.status.value = error_html(message)

    def show_shared_error(self, change=None) -> None:
        self.status.value = error_html(self.shared.error)

    def close(self) -> None:
        for handler, names in self._watched:
            self.shared.unobserve(handler, names=names)
        self._watched = []
        self.widget.close()
