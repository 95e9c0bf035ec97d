"""Responses that are counts: passes out of trials (binomial) and defects per unit of exposure (Poisson).

A count response records its ``family`` (``"binomial"`` or ``"poisson"``), its ``link`` (``"logit"`` or
``"probit"`` for a binomial, ``"log"`` for a Poisson response) and the other response of the study that holds
each run's number of trials (``trials``, binomial) or its exposure (``exposure``, Poisson, optional: area,
length, time). The keys are optional in the study file (format 4); a response without them is a measurement.

Every recorded value is checked against these roles, whenever it is recorded, imported or loaded: a count is a
whole number >= 0, passes are at most the run's trials, trials are whole numbers >= 1, an exposure is positive.
The errors name the run and the response column.
"""

from __future__ import annotations

from .._errors import LevelwiseError, describe
from ..model._glm import FAMILIES

#: The keys a count response adds to its entry in the study file (absent on a measured response).
COUNT_KEYS = ("family", "link", "trials", "exposure")


def count_spec(responses: dict, name: str, family=None, trials=None, exposure=None, link=None) -> dict:
    """The checked count keys of response *name* (``{}`` for a measurement); *responses* are the study's."""
    if family is None:
        for key, value in (("trials", trials), ("exposure", exposure), ("link", link)):
            if value is not None:
                raise LevelwiseError(f"The '{key}' of response {name!r} needs a count family "
                                     f"(family='binomial' or 'poisson'). Got {key}={describe(value)} and no family.")
        return {}
    if family not in FAMILIES:
        raise LevelwiseError(f"The 'family' of response {name!r} must be one of {list(FAMILIES)} (or None for a "
                             f"measurement). Got {describe(family)} instead.")
    link = FAMILIES[family][0] if link is None else link
    if link not in FAMILIES[family]:
        raise LevelwiseError(f"The 'link' of the {family} response {name!r} must be one of {list(FAMILIES[family])}. "
                             f"Got {describe(link)} instead.")
    spec = {"family": family, "link": link}
    if family == "binomial":
        if exposure is not None:
            raise LevelwiseError(f"The binomial response {name!r} takes 'trials', not 'exposure' (Poisson only).")
        if trials is None:
            raise LevelwiseError(f"The binomial response {name!r} needs 'trials': the response of the study that "
                                 f"holds each run's number of trials, one of {sorted(set(responses) - {name})}.")
        spec["trials"] = _partner(responses, name, trials, "trials")
    else:
        if trials is not None:
            raise LevelwiseError(f"The Poisson response {name!r} takes 'exposure', not 'trials' (binomial only).")
        if exposure is not None:
            spec["exposure"] = _partner(responses, name, exposure, "exposure")
    return spec


def _partner(responses, name, other, role) -> str:
    if not isinstance(other, str) or other not in responses or other == name:
        raise LevelwiseError(f"The '{role}' of response {name!r} must name another response of the study "
                             f"{sorted(set(responses) - {name})} (add it first with add_response). "
                             f"Got {describe(other)} instead.")
    if responses[other].get("family"):
        raise LevelwiseError(f"The '{role}' of response {name!r} names {other!r}, which is itself a count response; "
                             f"the {role} must be a plain column of numbers.")
    return other


def roles_of(responses: dict, name: str) -> list[tuple[str, str]]:
    """(role, partner) pairs of response *name*: ``("count", trials/exposure or "")``, ``("trials", passes)``,
    ``("exposure", counts)``."""
    out = []
    spec = responses.get(name, {})
    if spec.get("family"):
        out.append(("count", spec.get("trials") or spec.get("exposure") or ""))
    for other, other_spec in responses.items():
        if other_spec.get("trials") == name:
            out.append(("trials", other))
        elif other_spec.get("exposure") == name:
            out.append(("exposure", other))
    return out


def check_value(responses: dict, run: dict, name: str, value) -> None:
    """Refuse a bad value of response *name* for *run* (a run record), given the values already recorded."""
    if value is None:
        return
    for role, partner in roles_of(responses, name):
        where = f"Run {run['run']}: the response {name!r}"
        if role == "count":
            family = responses[name]["family"]
            what = (f"(passes out of the trials in {partner!r})" if family == "binomial" else "(a count)")
            if value < 0 or value != round(value):
                raise LevelwiseError(f"{where} {what} must be a whole number >= 0. Got {describe(value)} instead.")
            trials = run["responses"].get(partner) if family == "binomial" else None
            if trials is not None and value > trials:
                raise LevelwiseError(f"{where} holds {value:g} passes, more than the {trials:g} trials recorded in "
                                     f"{partner!r} for that run.")
        elif role == "trials":
            if value < 1 or value != round(value):
                raise LevelwiseError(f"{where} holds the number of trials of {partner!r}: a whole number >= 1. "
                                     f"Got {describe(value)} instead" + (" (zero trials)." if value == 0 else "."))
            passes = run["responses"].get(partner)
            if passes is not None and passes > value:
                raise LevelwiseError(f"{where} holds {value:g} trials, fewer than the {passes:g} passes recorded in "
                                     f"{partner!r} for that run.")
        elif not value > 0:
            raise LevelwiseError(f"{where} holds the exposure of {partner!r}: a positive number. "
                                 f"Got {describe(value)} instead.")


def check_runs(responses: dict, runs) -> None:
    """Check every recorded value of every run (a loaded file, a newly declared count response)."""
    for run in runs:
        for name, value in run["responses"].items():
            check_value(responses, run, name, value)
