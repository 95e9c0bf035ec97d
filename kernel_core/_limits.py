"""The longest text levelwise accepts in each kind of field: one place, checked by the API, on load and on import.

A 5,000-character name would stretch every label of a view; the limits keep text to what a person types.
"""

from __future__ import annotations

from ._errors import LevelwiseError, describe

#: Characters allowed per kind of field.
TEXT_LIMITS = {
    "name": 80,  # factor, response and stage names, and text levels of a categorical factor
    "units": 60,  # room for compound units ("mL/min per kg of dry mass") and the markup payloads of the attack tests
    "title": 200,
    "notes": 2000,  # the study's notes and a stage's description
    "reason": 2000,  # the reason given for an exclusion or a change
}


def check_length(value: str, field: str, kind: str) -> str:
    """*value* if it is no longer than the limit for *kind*; else a LevelwiseError naming the field,
    the limit and the length received."""
    limit = TEXT_LIMITS[kind]
    if isinstance(value, str) and len(value) > limit:
        raise LevelwiseError(
            f"The '{field}' may be at most {limit} characters long. Got {len(value)} characters "
            f"({describe(value, 40)}) instead."
        )
    return value
