"""Adding responses and changing their goals: a part of :class:`Study`, kept in its own module.

A response is a measurement, or a count (binomial passes out of trials, a Poisson count) whose family, link and
trials or exposure response are recorded with it (see :mod:`._count_responses`).
"""

from __future__ import annotations

from .._errors import LevelwiseError, describe
from ._count_responses import COUNT_KEYS, check_runs, count_spec
from ._values import GOALS, _finite, _name, _text


class StudyResponses:
    """Responses of a :class:`Study` (a part of the class)."""

    def add_response(self, name: str, units: str = "", goal: str = "none", target: float | None = None, *,
                     family: str | None = None, trials: str | None = None, exposure: str | None = None,
                     link: str | None = None) -> None:
        """Add a response with its units and goal (``"none"``, ``"maximize"``, ``"minimize"``, ``"target"``).

        A count response gives its ``family``: ``"binomial"`` (passes out of trials; ``trials`` names the
        response holding each run's number of trials; ``link`` ``"logit"`` (default) or ``"probit"``) or
        ``"poisson"`` (a count; optional ``exposure`` names the response holding each run's area, length or
        time; ``link`` ``"log"``). :meth:`fit` then fits a generalised linear model, and every value recorded
        is checked: whole numbers >= 0, passes at most the trials, trials >= 1, exposure > 0.
        """
        name = _name(name, "response name")
        if name in self._responses or name in self.factor_names:
            raise LevelwiseError(f"The 'response name' {name!r} is already used by a response or a factor.")
        spec = self._response_spec(name, units, goal, target)
        spec.update(count_spec(self._responses, name, family, trials, exposure, link))
        if spec.get("family"):  # the partner may hold values already: check them against the new role
            check_runs({**self._responses, name: spec}, self._runs.values())
        self._responses[name] = spec
        kind = ""
        if family:
            partner = spec.get("trials") or spec.get("exposure")
            kind = f", {family} ({spec['link']})" + (f" with {'trials' if family == 'binomial' else 'exposure'} "
                                                    f"{partner!r}" if partner else "")
        self._log("add_response", f"response {name!r} added ({spec['units'] or 'no units'}, goal {goal}{kind})")

    def set_goal(self, response: str, goal: str, target: float | None = None) -> None:
        """Change a response's goal."""
        name = self._response(response)
        spec = self._response_spec(name, self._responses[name]["units"], goal, target)
        spec.update({k: v for k, v in self._responses[name].items() if k in COUNT_KEYS})
        self._responses[name] = spec
        self._log("set_goal", f"goal of {name!r} set to {goal}" + (f" {spec['target']}" if goal == "target" else ""))

    @staticmethod
    def _response_spec(name, units, goal, target) -> dict:
        units = _text(units, f"units of response {name!r}", kind="units")
        if goal not in GOALS:
            raise LevelwiseError(f"The 'goal' of response {name!r} must be one of {list(GOALS)}. Got {describe(goal)}.")
        if goal == "target":
            target = _finite(target, f"target of response {name!r}")
        elif target is not None:
            raise LevelwiseError(f"The 'target' of response {name!r} is only allowed with goal='target'.")
        return {"units": units, "goal": goal, "target": target}

