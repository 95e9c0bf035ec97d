"""A response's stored goal: its kind and, from format 4, its desirability fields.

A study stores per response the goal kind (``none``, ``maximize``, ``minimize``, ``target``) and the target
of a target goal (format 2). Format 4 adds optional keys: ``lower_limit``, ``upper_limit``, the exponents
``s`` (rising side) and ``t`` (falling side) and ``weight`` (the response's relative weight in the overall
desirability), the fields of :class:`levelwise.Goal` (Derringer & Suich 1980). A maximise or minimise goal
may also store its ``target`` (where its desirability reaches 1). Absent keys keep the format-3 meaning: the
workbench starts them from the recorded values.
"""

from __future__ import annotations

from .._errors import LevelwiseError, describe
from ._values import GOALS, _finite, _text

#: Optional goal fields of format 4, in the order they are shown.
GOAL_FIELDS = ("lower_limit", "upper_limit", "s", "t", "weight")

#: The limits each kind uses (a field another kind uses is refused, so a file never holds a field that means
#: nothing for its goal).
USED = {"none": (), "maximize": ("lower_limit", "target", "s", "weight"),
        "minimize": ("target", "upper_limit", "t", "weight"),
        "target": ("lower_limit", "target", "upper_limit", "s", "t", "weight")}

#: Needed, in increasing order, for the goal to be complete.
ORDER = {"maximize": ("lower_limit", "target"), "minimize": ("target", "upper_limit"),
         "target": ("lower_limit", "target", "upper_limit")}


def response_spec(name: str, units, goal, target=None, **fields) -> dict:
    """The stored form of a response: ``units``, ``goal``, ``target`` and the optional goal fields that are set.

    Raises
    ------
    LevelwiseError
        Naming the field of the response and what arrived: an unknown goal, a missing target of a target goal,
        a field its kind does not use, a value that is not finite, an exponent or weight not above 0, or limits
        out of order (maximise: lower limit < target; minimise: target < upper limit; target: lower < target <
        upper).
    """
    units = _text(units, f"units of response {name!r}", kind="units")
    if goal not in GOALS:
        raise LevelwiseError(f"The 'goal' of response {name!r} must be one of {list(GOALS)}. Got {describe(goal)}.")
    unknown = sorted(set(fields) - set(GOAL_FIELDS))
    if unknown:
        raise LevelwiseError(f"The goal of response {name!r} has no field {unknown[0]!r}; the fields are "
                             f"{['target', *GOAL_FIELDS]}.")
    given = {key: value for key, value in {"target": target, **fields}.items() if value is not None}
    for key in given:
        if key not in USED[goal]:
            allowed = "nothing" if goal == "none" else str(list(USED[goal]))
            raise LevelwiseError(f"The {key!r} of response {name!r} is not used by a {goal!r} goal (it uses "
                                 f"{allowed}). Got {describe(given[key])}.")
    if goal == "target" and "target" not in given:
        given["target"] = target  # refused just below, naming the field
    out = {key: _finite(value, f"{key} of response {name!r}") for key, value in given.items()}
    for key in ("s", "t", "weight"):
        if key in out and not out[key] > 0:
            raise LevelwiseError(f"The '{key} of response {name!r}' must be a number > 0. Got {out[key]!r} instead.")
    present = [key for key in ORDER.get(goal, ()) if key in out]
    values = [out[key] for key in present]
    if any(a >= b for a, b in zip(values, values[1:])):
        raise LevelwiseError(f"The goal of response {name!r} needs {' < '.join(present)}. Got "
                             + ", ".join(f"{k}={v:g}" for k, v in zip(present, values)) + " instead.")
    spec = {"units": units, "goal": goal, "target": out.pop("target", None)}
    spec.update({key: out[key] for key in GOAL_FIELDS if key in out})
    return spec


def is_complete(spec: dict) -> bool:
    """True when the stored goal has every limit its kind needs (it can be used as stored)."""
    needed = ORDER.get(spec.get("goal"), None)
    return needed is not None and all(spec.get(key) is not None for key in needed)


def goal_words(name: str, spec: dict) -> str:
    """The audit text of a goal change: the kind, then each stored field."""
    parts = [f"{key.replace('_', ' ')} {spec[key]:g}" for key in ("lower_limit", "target", "upper_limit", "s", "t",
                                                                   "weight") if spec.get(key) is not None]
    return f"goal of {name!r} set to {spec['goal']}" + (f" ({', '.join(parts)})" if parts else "")
