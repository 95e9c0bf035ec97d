"""Exception and warning types raised by levelwise.

Every error that bad input can cause is a :class:`LevelwiseError` (a
``ValueError``), whose message names the field, says what is allowed and echoes
what arrived. Callers (the widgets, the CLI) catch this one type and show the
message; anything else escaping levelwise is a bug.
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


class StudyFileError(LevelwiseError):
    """A study file that cannot be read, is not a study, or cannot be written; the message names the field."""


class OutsideEditError(StudyFileError):
    """The data block of a study file does not match its SHA-256: it was edited outside levelwise.

    ``Study.load(path, accept_outside_edits=True)`` accepts such a file and records the fact in the audit log.
    """


class StudyConflictError(StudyFileError):
    """The study file changed on disk since this study was loaded or last saved (another process saved it).

    Saving would overwrite those changes, so the save is refused. Load the file again to see them, save to another
    path, or save with ``overwrite=True`` to replace them.
    """


class ImportDataError(LevelwiseError):
    """A CSV or XLSX import with problems; ``problems`` lists each one with its row and column."""

    def __init__(self, message: str, problems=()):
        super().__init__(message)
        self.problems = tuple(problems)
