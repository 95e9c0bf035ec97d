"""Adding responses and changing their goals: a part of :class:`Study`, kept in its own module.

A response is a measurement, or a count (binomial passes out of trials, a Poisson count) whose family, link and
trials or exposure response are recorded with it (see :mod:`._count_responses`). Its goal may keep the
desirability fields (see :mod:`._goals`).
"""

from __future__ import annotations

from .._errors import LevelwiseError
from ._count_responses import COUNT_KEYS, check_runs, count_spec
from ._goals import goal_words, response_spec
from ._values import _name


class StudyResponses:
    """Responses of a :class:`Study` (a part of the class)."""

    def add_response(self, name: str, units: str = "", goal: str = "none", target: float | None = None, *,
                     family: str | None = None, trials: str | None = None, exposure: str | None = None,
                     link: str | None = None, **goal_fields) -> None:
        """Add a response with its units and goal (``"none"``, ``"maximize"``, ``"minimize"``, ``"target"``).

        *goal_fields* are the optional desirability fields of :meth:`set_goal`.

        A count response gives its ``family``: ``"binomial"`` (passes out of trials; ``trials`` names the
        response holding each run's number of trials; ``link`` ``"logit"`` (default) or ``"probit"``) or
        ``"poisson"`` (a count; optional ``exposure`` names the response holding each run's area, length or
        time; ``link`` ``"log"``). :meth:`fit` then fits a generalised linear model, and every value recorded
        is checked: whole numbers >= 0, passes at most the trials, trials >= 1, exposure > 0.
        """
        name = _name(name, "response name")
        if name in self._responses or name in self.setting_names:
            raise LevelwiseError(f"The 'response name' {name!r} is already used by a response or a factor.")
        spec = self._response_spec(name, units, goal, target, **goal_fields)
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

    def set_goal(self, response: str, goal: str, target: float | None = None, *, lower_limit=None,
                 upper_limit=None, s=None, t=None, weight=None) -> None:
        """Change a response's goal, with the desirability fields to keep in the file (each optional).

        ``lower_limit``, ``target``, ``upper_limit``, the exponents ``s`` and ``t`` and the relative ``weight``
        are those of :class:`levelwise.Goal`; a field its kind does not use is refused (a maximise goal has no
        upper limit or ``t``). Fields left out are not stored (the workbench starts them from the data). A
        count response keeps its family; its limits are on the response scale of the fit (a probability or a
        rate).
        """
        name = self._response(response)
        spec = self._response_spec(name, self._responses[name]["units"], goal, target, lower_limit=lower_limit,
                                   upper_limit=upper_limit, s=s, t=t, weight=weight)
        spec.update({key: value for key, value in self._responses[name].items() if key in COUNT_KEYS})
        if spec == self._responses[name]:
            return
        self._responses[name] = spec
        self._log("set_goal", goal_words(name, spec))

    @staticmethod
    def _response_spec(name, units, goal, target, **goal_fields) -> dict:
        return response_spec(name, units, goal, target, **goal_fields)
