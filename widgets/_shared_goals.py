"""The optimisation goals of a :class:`~levelwise.widgets.SharedModel`: set, started from the data, saved."""

from __future__ import annotations

import numpy as np
import pandas as pd

from levelwise import LevelwiseError
from levelwise._errors import describe
from levelwise.study._goals import USED, is_complete

from . import _count_display as counts


class GoalsMixin:
    """Goals of the shared model (mixed into ``SharedModel``; uses its traits ``goals``, ``data`` and ``study``)."""

    def set_goals(self, goals: dict) -> None:
        """Set the optimisation goals, ``{response: {"goal": "maximize", ...}}`` (allowed read-only)."""
        if not isinstance(goals, dict):
            raise LevelwiseError(f"The 'goals' must be a dict of response -> goal. Got {describe(goals)}.")
        for name in goals:
            self._check_response_name(name)
        self.goals = dict(goals)
        if not self.read_only:
            self._write_goals(goals)

    #: How the starting limits of a goal are chosen (shown on screen beside the goals).
    GOAL_DEFAULTS = ("Starting limits come from the recorded values: to maximise, from the smallest (desirability 0) "
                     "to the largest (desirability 1) value seen; to minimise, from the largest (0) down to the "
                     "smallest (1); to hit a target, the observed range on either side of the target. A pass/fail "
                     "response uses each run's pass rate (passes / trials), a count per exposure its rate.")

    def goal_for(self, response: str, kind: str, target=None) -> dict | None:
        """A goal of *kind* for *response* with limits from its recorded values (see ``GOAL_DEFAULTS``).

        None when the response has fewer than two different recorded values (no range to start from).
        """
        values = pd.to_numeric(self.data[response], errors="coerce").to_numpy(dtype=float) \
            if response in self.data else np.array([])
        if response in self.data and counts.response_family(self, response):  # a pass rate or a rate
            values = counts.observed_means(self, response)
        values = values[np.isfinite(values)]
        if values.size < 2 or values.min() == values.max():
            return None
        lo, hi = float(values.min()), float(values.max())
        if kind == "maximize":
            return {"goal": kind, "lower_limit": lo, "target": hi, "s": 1.0, "weight": 1.0}
        if kind == "minimize":
            return {"goal": kind, "target": lo, "upper_limit": hi, "t": 1.0, "weight": 1.0}
        if kind == "target":
            aim = float(target) if target is not None else (lo + hi) / 2
            span = hi - lo
            lower = lo if lo < aim else aim - span
            upper = hi if hi > aim else aim + span
            return {"goal": kind, "lower_limit": lower, "target": aim, "upper_limit": upper, "s": 1.0, "t": 1.0,
                    "weight": 1.0}
        return None

    def study_goals(self) -> dict:
        """The goals the study stores: the fields it keeps (format 4: limits, target, exponents, weight), the
        others started from the data (see ``GOAL_DEFAULTS``)."""
        out = {}
        for name, spec in self.study.responses.items():
            if spec.goal == "none":
                continue
            stored = {key: getattr(spec, key) for key in USED[spec.goal] if getattr(spec, key) is not None}
            goal = self.goal_for(name, spec.goal, spec.target)
            if goal is None and not is_complete({"goal": spec.goal, **stored}):
                continue  # no range in the data and no stored limits: nothing to start from
            goal = {"goal": spec.goal, "s": 1.0, "t": 1.0, "weight": 1.0, **(goal or {}), **stored}
            out[name] = {key: value for key, value in goal.items() if key == "goal" or key in USED[spec.goal]}
        return out

    def _write_goals(self, goals: dict) -> None:
        """Write each changed goal back to the study, every field its kind uses (limits, target, exponents s
        and t, weight), each change with its audit entry. A goal as the study already shows it (stored fields,
        the rest from the data) writes nothing, so editing one response does not store the others' defaults."""
        study = self.study
        shown = {name: _fields(goal) for name, goal in self.study_goals().items()}
        before = study.revision
        for name in study.responses:
            kind, fields = _fields(goals.get(name))
            if (kind, fields) == shown.get(name, ("none", {})):
                continue
            fields = dict(fields)
            target = fields.pop("target", None)
            study.set_goal(name, kind, target, **fields)
        if study.revision != before:
            self._sync()


def _fields(goal) -> tuple:
    """``(kind, {field: float})`` of a goal dict: only the fields its kind uses."""
    goal = goal or {}
    kind = goal.get("goal", goal.get("kind", "none"))
    return kind, {key: float(goal[key]) for key in USED.get(kind, ()) if goal.get(key) is not None}
