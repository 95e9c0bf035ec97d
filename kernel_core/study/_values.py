"""Values a study holds and the checks every stored value passes (names, text, numbers, settings, run ids)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import UTC, datetime

import numpy as np

from .._errors import LevelwiseError, describe
from .._limits import check_length
from ..design import Factor

#: Column names used by :meth:`Study.data` and :meth:`Study.table`; no factor or response may take them.
RESERVED_NAMES = ("run", "stage", "block", "standard_order", "role", "excluded")

GOALS = ("none", "maximize", "minimize", "target")

@dataclass(frozen=True)
class Response:
    """A response: its name, units and goal, with the goal's desirability fields that are stored (None: not
    stored; the workbench starts them from the data).

    A count response also has its ``family`` (``"binomial"``: passes out of the trials held by the response
    named ``trials``; ``"poisson"``: a count, per unit of the response named ``exposure`` when given) and its
    ``link``; a measured response has ``family=None``.
    """

    name: str
    units: str = ""
    goal: str = "none"
    target: float | None = None
    lower_limit: float | None = None
    upper_limit: float | None = None
    s: float | None = None
    t: float | None = None
    weight: float | None = None
    family: str | None = None
    link: str | None = None
    trials: str | None = None
    exposure: str | None = None


@dataclass(frozen=True)
class Stage:
    """One design stage (e.g. ``"screen"``, ``"fold-over"``, ``"surface"``) and when it was added."""

    name: str
    description: str
    created: str


@dataclass(frozen=True)
class AuditEntry:
    """One line of the audit log: when, the kind of change, what changed, and the reason if one was given."""

    when: str
    action: str
    what: str
    reason: str | None = None


# ----- small validators ------------------------------------------------------------------------
def now() -> str:
    """The time stamped on audit entries (UTC, milliseconds). The demo campaign replaces it with a fixed clock."""
    return datetime.now(UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _text(value, field: str, *, empty: bool = True, kind: str | None = None) -> str:
    """A string that can be written as UTF-8 (no lone surrogates), no longer than the limit of its *kind*
    (:data:`levelwise._limits.TEXT_LIMITS`)."""
    if not isinstance(value, str):
        raise LevelwiseError(f"The '{field}' must be a string. Got {describe(value)} instead.")
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        raise LevelwiseError(
            f"The '{field}' holds characters that cannot be written as UTF-8 (a lone surrogate). "
            f"Got {describe(value)} instead."
        ) from None
    if not empty and not value.strip():
        raise LevelwiseError(f"The '{field}' must be a non-empty string. Got {describe(value)} instead.")
    if kind is not None:
        check_length(value, field, kind)
    return value


def _name(value, field: str) -> str:
    name = _text(value, field, empty=False, kind="name")
    if name in RESERVED_NAMES:
        raise LevelwiseError(
            f"The '{field}' may not be one of the reserved column names {list(RESERVED_NAMES)}. Got {name!r} instead."
        )
    return name


def _finite(value, field: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise LevelwiseError(f"The '{field}' must be a finite number. Got {describe(value)} instead.")
    try:
        number = float(value)
    except OverflowError:
        raise LevelwiseError(f"The '{field}' must be a finite number. Got a number too large for a float.") from None
    if not math.isfinite(number):
        raise LevelwiseError(f"The '{field}' must be a finite number. Got {number!r} instead.")
    return number


def _setting(factor: Factor, value, field: str):
    """A planned or achieved setting: a finite number, or one of a categorical factor's levels."""
    levels = getattr(factor, "levels", ())
    if not levels:
        return _finite(value, field)
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, str):
        value = value.strip()
    for level in levels:
        if type(level) is type(value) and level == value or (
            not isinstance(level, str) and not isinstance(value, (str, bool)) and level == value
        ):
            return level
    raise LevelwiseError(
        f"The '{field}' must be one of the levels {list(levels)!r} of factor {factor.name!r}. "
        f"Got {describe(value)} instead."
    )


def _plain(value):
    """A float for numbers (JSON-friendly), levels as they are."""
    return value if isinstance(value, str) else float(value)


def _factor_entry(f: Factor) -> dict:
    if _is_categorical(f):
        entry = {"name": f.name, "levels": list(f.levels), "units": f.units}
    else:
        entry = {"name": f.name, "low": f.low, "high": f.high, "units": f.units}
    if getattr(f, "hard_to_change", False):  # format 3, written only when true
        entry["hard_to_change"] = True
    return entry


def _is_categorical(factor) -> bool:
    return bool(getattr(factor, "levels", ()))


def _run_id(value, field: str = "run") -> int:
    integral = isinstance(value, (int, np.integer)) or (
        isinstance(value, (float, np.floating)) and math.isfinite(value) and float(value).is_integer()
    )
    if isinstance(value, bool) or not integral or not 1 <= value <= 2**53 - 1:
        raise LevelwiseError(
            f"The '{field}' must be a run id (an integer from 1 to 2**53 - 1). Got {describe(value)} instead."
        )
    return int(value)


def _reason(reason, field: str = "reason", required: bool = False) -> str | None:
    if reason is None and not required:
        return None
    return _text(reason, field, empty=False, kind="reason")




def checked_model(model: str, factor_names) -> str:
    """*model*, once the model parser has read it; raises its LevelwiseError naming a bad term or preset."""
    from ..model import parse_model

    parse_model(model, factor_names)
    return model
