"""Progress of long searches: a callback, a text line, or nothing; and how a search was stopped.

Every search that can take more than about a second (the minimum-aberration search behind
``fractional_factorial``, ``optimal_design``'s random starts) takes a ``progress`` parameter:

* ``None`` (default): a text line on standard error, shown only once the search has run for
  :data:`QUIET_SECONDS`, so quick searches stay silent. In a notebook the line shows under the cell.
* ``False``: silent.
* ``True``: the text line from the start.
* a callable ``progress(fraction_done, message)``: called as the search goes; returning ``False`` stops the
  search, which then returns the best result found so far, flagged incomplete.

Ctrl-C (``KeyboardInterrupt``) during a search also returns the best result so far, flagged incomplete
(``metadata["search_complete"] is False`` and ``metadata["stopped"] == "interrupted"``), with a
:class:`SearchStoppedWarning`. Pure Python: no notebook import here (the widgets draw their own bar).
"""

from __future__ import annotations

import sys
import time
import warnings

from ._errors import LevelwiseError, describe

#: Seconds a search runs before the automatic text line appears.
QUIET_SECONDS = 1.0
#: Least seconds between two text-line updates.
TEXT_INTERVAL = 0.25


class SearchStoppedWarning(UserWarning):
    """A search stopped before it finished (Ctrl-C or a progress callback); the result is the best so far."""


class TextProgress:
    """``progress(fraction, message)`` that writes one updating line (``\\r``) to *stream*.

    Parameters
    ----------
    label : str
        What is searched, shown before the percentage.
    stream : file-like, optional
        Default ``sys.stderr``.
    quiet_seconds : float
        Nothing is written until the search has run this long.
    """

    def __init__(self, label: str = "Search", stream=None, quiet_seconds: float = 0.0):
        self.label, self.stream, self.quiet_seconds = label, stream, float(quiet_seconds)
        self.started = time.monotonic()
        self._last = -1.0
        self.shown = False

    def __call__(self, fraction, message: str = "") -> bool:
        now = time.monotonic()
        if now - self.started < self.quiet_seconds:
            return True
        if self.shown and now - self._last < TEXT_INTERVAL and fraction < 1.0:
            return True
        self._last = now
        self.shown = True
        stream = self.stream or sys.stderr
        text = f"{self.label}: {100.0 * min(max(float(fraction), 0.0), 1.0):5.1f}%"
        if message:
            text += f" ({message})"
        stream.write("\r" + text.ljust(70))
        stream.flush()
        return True

    def finish(self, message: str = "done") -> None:
        """End the line (only if anything was written)."""
        if self.shown:
            stream = self.stream or sys.stderr
            stream.write(f"\r{self.label}: {message}".ljust(71) + "\n")
            stream.flush()


class Reporter:
    """The search side of ``progress``: call :meth:`report`; it says whether to go on.

    Keeps why a search stopped (``stopped``: ``None``, ``"cancelled"`` or ``"interrupted"``).
    """

    def __init__(self, progress, label: str = "Search"):
        if progress is not None and not isinstance(progress, bool) and not callable(progress):
            raise LevelwiseError(
                "The 'progress' parameter must be None (a text line for long searches), False (silent), True "
                f"(a text line) or a callable progress(fraction, message). Got {describe(progress)} instead."
            )
        self.text = None
        if progress is None:
            self.text = TextProgress(label, quiet_seconds=QUIET_SECONDS)
            self.callback = self.text
        elif progress is True:
            self.text = TextProgress(label)
            self.callback = self.text
        elif progress is False:
            self.callback = None
        else:
            self.callback = progress
        self.stopped = None

    def report(self, fraction: float, message: str = "") -> bool:
        """Pass progress on; False when the callback asked to stop (then ``stopped == "cancelled"``)."""
        if self.callback is None:
            return True
        if self.callback(min(max(float(fraction), 0.0), 1.0), message) is False:
            self.stopped = "cancelled"
            return False
        return True

    def interrupted(self) -> None:
        """Record a Ctrl-C (the caller keeps the best result so far)."""
        self.stopped = "interrupted"

    def finish(self, what: str) -> None:
        """End the text line and warn when the search did not finish."""
        if self.text is not None:
            self.text.finish("stopped: best so far kept" if self.stopped else "done")
        if self.stopped == "interrupted":
            warnings.warn(f"{what} was interrupted (Ctrl-C): the result is the best found so far and "
                          "metadata['search_complete'] is False.", SearchStoppedWarning, stacklevel=3)


__all__ = ["QUIET_SECONDS", "Reporter", "SearchStoppedWarning", "TextProgress"]
