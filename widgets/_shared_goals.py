"""The optimisation goals of a :class:`~levelwise.widgets.SharedModel`: set, started from the data, saved."""

from __future__ import annotations

import numpy as np
import pandas as pd

from levelwise import LevelwiseError
from levelwise._errors import describe


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
                     "smallest (1); to hit a target, the observed range on either side of the target.")

    def goal_for(self, response: str, kind: str, target=None) -> dict | None:
        """A goal of *kind* for *response* with limits from its recorded values (see ``GOAL_DEFAULTS``).

        None when the response has fewer than two different recorded values (no range to start from).
        """
        values = pd.to_numeric(self.data[response], errors="coerce").to_numpy(dtype=float) \
            if response in self.data else np.array([])
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
        """The goals the study stores (kind, and the target of a target goal), with limits from the data."""
        out = {}
        for name, spec in self.study.responses.items():
            if spec.goal != "none":
                goal = self.goal_for(name, spec.goal, spec.target)
                if goal is not None:
                    out[name] = goal
        return out

    def _write_goals(self, goals: dict) -> None:
        """Write the goal kinds (and a target goal's target) back to the study, each change with its audit entry."""
        study = self.study
        changed = False
        for name, spec in study.responses.items():
            goal = goals.get(name)
            kind = "none" if goal is None else goal.get("goal", goal.get("kind", "none"))
            target = float(goal["target"]) if kind == "target" else None
            if kind != spec.goal or (kind == "target" and target != spec.target):
                study.set_goal(name, kind, target)
                changed = True
        if changed:
            self._sync()
