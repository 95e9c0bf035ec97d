"""Exception and warning types raised by kernel_core.

Every error that bad input can cause is a :class:`LevelwiseError` (a
``ValueError``), whose message names the field, says what is allowed and echoes
what arrived. Callers (the widgets, the CLI) catch this one type and show the
message; anything else escaping kernel_core is a bug.
"""

from __future__ import annotations


class LevelwiseError(ValueError):
    """Bad input or an impossible request, with a message naming the field."""


class LevelwiseWarning(UserWarning):
    """Something the user should know that does not stop the computation."""


def describe(value, limit: int = 60) -> str:
    """Return a short ``repr`` of *value* for use in an error message."""
    text = repr(value)
    if len(text) > limit:
        text = text[: limit - 3] + "..."
    return text
