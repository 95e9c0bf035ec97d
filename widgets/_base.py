"""What every view shares: the error line, safe callbacks, coalesced refreshes, float32 arrays, long work.

Long work (:class:`LongTask`): inside a kernel or Voilà a search runs on a worker thread, so the page stays
live and its Stop button is heard; every widget change is made on the kernel's main thread, through the event
loop (``loop.call_soon_threadsafe``): ipykernel 7 refuses comm messages sent from other threads. Without a
running loop (plain Python, headless tests) the work runs at once in the caller's thread.
"""

from __future__ import annotations

import asyncio
import html
import sys
import threading
import time
import traceback
import weakref

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


def snapped_echo(slider, value, current) -> bool:
    """Whether a slider's new *value* is the browser putting the kernel's *current* value on its step grid.

    A browser's slider snaps every value the kernel sends it to ``min + k * step`` and, with continuous updates,
    sends the snapped value back as a change. That is not a move: taken as one, it would shift a setting the
    kernel chose (an optimum, a clicked point) and, for mixture components, rescale the others, whose own echoes
    would go on. A snap is at most half a step from the value sent; a user's move (a drag or a key) lands at
    least half a step away from it.
    """
    step = getattr(slider, "step", None)  # a categorical factor's list of levels has none
    if current is None or step is None:
        return False
    return abs(float(value) - float(current)) <= 0.5 * float(step) * (1.0 + 1e-9)


def click_catcher(scales):
    """An empty, invisible Scatter in bqplot's "add" mode: a click on the figure's plot area adds one point there
    (in data coordinates), which the view reads with :func:`take_click`. With :func:`click_through` on the
    page, the figure's marks let the click through to the figure's own event rectangle beneath them."""
    import bqplot as bq

    return bq.Scatter(scales=scales, x=f32([]), y=f32([]), opacities=[0.0], default_size=1, colors=["#000000"],
                      interactions={"click": "add"})


def click_through(figure_class: str) -> ipw.HTML:
    """A hidden style element: the marks of figures of CSS class *figure_class* let clicks through to the figure's
    event rectangle (bqplot's ``plotarea_events``), where a :func:`click_catcher` turns them into a point. Cheaper
    for the browser than a grid of invisible click targets, which it would lay out and repaint on every frame."""
    rule = f".{figure_class} svg.svg-figure > g > g, .{figure_class} svg.svg-figure > g > g * "
    return ipw.HTML(f"<style>{rule}{{ pointer-events: none; }}</style>", layout=ipw.Layout(display="none"))


def take_click(catcher, what: str) -> tuple[float, float] | None:
    """The point a click added to *catcher* (the last one), and the catcher cleared for the next click; None when
    there is nothing to take (the catcher was just cleared). A point that is not finite raises a
    :class:`LevelwiseError` naming *what* was clicked."""
    sent_x, sent_y = catcher.x, catcher.y
    if len(sent_x) == 0 and len(sent_y) == 0:
        return None
    with catcher.hold_sync():
        catcher.x, catcher.y = f32([]), f32([])
    try:  # one point a click; a client sending more gets its last one
        px, py = float(np.ravel(sent_x)[-1]), float(np.ravel(sent_y)[-1])
    except (TypeError, ValueError, IndexError):
        px = py = float("nan")
    if not (np.isfinite(px) and np.isfinite(py)):
        raise LevelwiseError(
            f"A click on {what} must give a finite position on both axes. Got {len(sent_x)} value(s) across and "
            f"{len(sent_y)} up, the last ones not usable.")
    return px, py


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


class Debouncer(Coalescer):
    """Run *work* once the requests have stopped for *delay* seconds: every request restarts the wait.

    Used where one change starts expensive work (a design search), so typing or clicking "Add a factor" five
    times starts one search, not five. Without a running loop the work runs at once.
    """

    def __init__(self, work, delay: float = 0.6):
        super().__init__(work, delay)

    def request(self) -> None:
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            self.work()
            return
        self.cancel()
        self._handle = loop.call_later(self.delay, self._run)

    @property
    def pending(self) -> bool:
        return self._handle is not None


class _Token:
    """One run of a :class:`LongTask`: its stop flag, and whether its result is still wanted."""

    def __init__(self):
        self.stop = threading.Event()
        self.wanted = True
        self.last_shown = 0.0


class LongTask:
    """A progress bar, a message and a Stop button for work that can take seconds.

    ``start(work, done)`` calls ``work(progress)``, where ``progress(fraction, message)`` is the callback the
    levelwise searches take (it returns False once Stop is pressed, and the search then returns the best
    result so far); then ``done(result, error)`` on the kernel's main thread. Starting again, or
    :meth:`discard`, stops the previous run and drops its result.

    Attributes
    ----------
    progress : ipywidgets.FloatProgress
        ``lw-search-progress``.
    message : ipywidgets.HTML
        What the search is doing (``lw-search-message``).
    stop_button : ipywidgets.Button
        ``lw-search-stop``; shown while work runs.
    widget : ipywidgets.HBox
    """

    def __init__(self, label: str = "Search"):
        self.progress = ipw.FloatProgress(value=0.0, min=0.0, max=1.0, description=label).add_class(
            "lw-search-progress")
        self.message = ipw.HTML().add_class("lw-search-message")
        self.stop_button = ipw.Button(description="Stop (keep the best so far)", button_style="warning",
                                      layout=ipw.Layout(width="auto", display="none")).add_class("lw-search-stop")
        self.stop_button.on_click(lambda _: self.stop())
        self.widget = ipw.HBox([self.progress, self.stop_button, self.message]).add_class("lw-long-task")
        self._token = None
        self.thread = None

    @property
    def running(self) -> bool:
        return self._token is not None

    def start(self, work, done) -> None:
        self.discard()
        token = self._token = _Token()
        self.progress.value = 0.0
        self.message.value = "Working…"
        self.stop_button.layout.display = ""
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            loop = None
        if loop is None:
            def report(fraction, message=""):
                self._show(token, fraction, message)
                return not token.stop.is_set()

            try:
                result, error = work(report), None
            except Exception as exc:  # noqa: BLE001 - handed to done()
                result, error = None, exc
            self._finish(token, result, error, done)
            return

        def report(fraction, message=""):
            now = time.monotonic()
            if now - token.last_shown > 0.1 or fraction >= 1.0:  # at most ~10 messages a second
                token.last_shown = now
                loop.call_soon_threadsafe(self._show, token, fraction, message)
            return not token.stop.is_set()

        def run():
            try:
                result, error = work(report), None
            except Exception as exc:  # noqa: BLE001 - handed to done() on the main thread
                result, error = None, exc
            try:
                loop.call_soon_threadsafe(self._finish, token, result, error, done)
            except RuntimeError:  # the loop closed (kernel shutting down)
                pass

        self.thread = threading.Thread(target=run, name="levelwise-search", daemon=True)
        self.thread.start()

    def _show(self, token, fraction, message) -> None:
        if token is not self._token:
            return
        self.progress.value = float(fraction)
        if message:
            self.message.value = html.escape(str(message))

    def _finish(self, token, result, error, done) -> None:
        if token is not self._token or not token.wanted:
            return
        self._token = None
        self.stop_button.layout.display = "none"
        if error is None:
            self.progress.value = 1.0
        self.message.value = ""
        done(result, error)

    def stop(self) -> None:
        """Ask the running work to stop; it returns the best result so far, which is still shown."""
        if self._token is not None:
            self._token.stop.set()
            self.message.value = "Stopping: keeping the best found so far…"

    def discard(self) -> None:
        """Stop the running work and drop its result (the inputs changed)."""
        if self._token is not None:
            self._token.stop.set()
            self._token.wanted = False
            self._token = None
            self.stop_button.layout.display = "none"
            self.message.value = ""


#: Per shared model, the views that show its error, in the order they were made, and the view the user last
#: acted in. The shared model's error (a model typo, a failed fit) is shown once, in that view (else the first).
_ERROR_VIEWS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_ERROR_OWNER: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


XLSX_MIME = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


def download_link(payload: bytes, filename: str, mime: str, text: str) -> str:
    """An ``<a download>`` link carrying *payload* (works in Voilà and JupyterLab, no server route)."""
    import base64

    data = base64.b64encode(payload).decode("ascii")
    return f'<a download="{html.escape(filename)}" href="data:{mime};base64,{data}">{html.escape(text)}</a>'


def table_bytes(frame, kind: str, units: dict | None = None) -> bytes:
    """*frame* as CSV (UTF-8) or XLSX bytes, units in the headers as ``name [units]``; text that a spreadsheet
    would read as a formula is written as text (``levelwise._cells``)."""
    from ._exports import safe_table_bytes

    return safe_table_bytes(frame, kind, units)


class TableExport:
    """CSV and XLSX download links for a table a view shows (``lw-table-export``). Attach ``widget`` to the
    view and call :meth:`update` whenever the table changes; :meth:`payload` gives the bytes in Python."""

    def __init__(self, name: str, label: str = "table"):
        self.name, self.label = name, label
        self.frame, self.units = None, None
        self.widget = ipw.HTML().add_class("lw-table-export")

    def update(self, frame, units: dict | None = None) -> None:
        self.frame, self.units = frame, units
        links = [download_link(table_bytes(frame, "csv", units), f"{self.name}.csv", "text/csv",
                               f"{self.label} (CSV)"),
                 download_link(table_bytes(frame, "xlsx", units), f"{self.name}.xlsx", XLSX_MIME,
                               f"{self.label} (XLSX)")]
        self.widget.value = "Download: " + " · ".join(links)

    def payload(self, kind: str) -> bytes:
        from levelwise import LevelwiseError

        if self.frame is None:
            raise LevelwiseError(f"There is no {self.label} to export yet.")
        return table_bytes(self.frame, kind, self.units)


class FigureExport:
    """"Save figure": PNG and SVG drawn on the server by matplotlib (``levelwise.figures``), with units and a
    caption, offered as download links (``lw-save-figure``, links in ``lw-figure-links``).

    *make_figure* returns a matplotlib figure of what the view shows (labels with units, a caption).
    """

    def __init__(self, view, make_figure, name: str):
        self.make_figure, self.name = make_figure, name
        self.button = ipw.Button(description="Save figure (PNG, SVG)", layout=ipw.Layout(width="auto")).add_class(
            "lw-save-figure")
        self.links = ipw.HTML().add_class("lw-figure-links")
        self.button.on_click(view.safely(lambda _: self.render()))
        self.widget = ipw.HBox([self.button, self.links])

    def render(self) -> dict:
        """Draw the figure now; returns ``{"png": bytes, "svg": bytes}`` and shows the links."""
        from levelwise.figures import figure_bytes

        fig = self.make_figure()
        out = {"png": figure_bytes(fig, "png"), "svg": figure_bytes(fig, "svg")}
        self.links.value = " · ".join([
            download_link(out["png"], f"{self.name}.png", "image/png", f"{self.name}.png"),
            download_link(out["svg"], f"{self.name}.svg", "image/svg+xml", f"{self.name}.svg"),
        ])
        return out

    def save(self, path):
        """Write the figure to a .png or .svg file (by suffix)."""
        from levelwise.figures import save_figure

        return save_figure(self.make_figure(), path)


class View:
    """Base of every view: a shared model, a status line, safe callbacks and ``close()``.

    Subclasses build ``self.widget`` and call :meth:`watch` for the shared-model traits they draw.
    """

    def __init_subclass__(cls, **kwargs):
        """Every view gets its "Save figure" / "Export table" bar once it is built (see ``_exports``)."""
        super().__init_subclass__(**kwargs)
        init = cls.__dict__.get("__init__")
        if init is None:
            return

        def built(self, *args, **kw):
            init(self, *args, **kw)
            if type(self).__init__ is built:  # the outermost constructor has finished
                from ._exports import attach_exports

                attach_exports(self)

        built.__doc__, built.__wrapped__ = init.__doc__, init
        cls.__init__ = built

    def __init__(self, shared):
        self.shared = shared
        self.status = ipw.HTML().add_class("lw-status")
        self._watched = []
        try:
            _ERROR_VIEWS.setdefault(shared, []).append(weakref.ref(self))
        except TypeError:
            pass

    def watch(self, handler, names) -> None:
        """Observe *names* of the shared model with *handler*, made safe for the event loop."""
        safe = self.safely(handler)
        self.shared.observe(safe, names=names)
        self._watched.append((safe, names))

    def claim_shared_errors(self) -> None:
        """Show the shared model's errors in this view from now on (call it where the user edits the model)."""
        try:
            _ERROR_OWNER[self.shared] = weakref.ref(self)
        except TypeError:
            pass

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
        """Show the shared model's error here if this view is the one to show it (see :meth:`safely`)."""
        self.status.value = error_html(self.shared.error) if self._shows_shared_error() else ""

    def _shows_shared_error(self) -> bool:
        try:
            views = _ERROR_VIEWS.get(self.shared, [])
        except TypeError:
            return True
        live = [ref() for ref in views if ref() is not None and not getattr(ref(), "_closed", False)]
        owner = _ERROR_OWNER.get(self.shared)
        owner = owner() if owner is not None else None
        if owner is None or owner not in live or not hasattr(owner, "status"):
            owner = live[0] if live else self
        return owner is self

    def _repr_mimebundle_(self, **kwargs):
        """A view shows itself as the last line of a notebook cell (its widget)."""
        return self.widget._repr_mimebundle_(**kwargs)

    def close(self) -> None:
        self._closed = True
        for handler, names in self._watched:
            self.shared.unobserve(handler, names=names)
        self._watched = []
        self.widget.close()
