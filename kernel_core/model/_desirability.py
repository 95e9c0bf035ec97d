"""Desirability functions of Derringer & Suich (1980), *J. Quality Technology* 12(4) 214-219, as printed in the
NIST/SEMATECH e-Handbook, section 5.5.3.2.2: one goal per response, and the overall desirability
D = (prod d_i^w_i)^(1 / sum w_i), w_i the relative weight of response i in D."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import LevelwiseError, describe

GOAL_KINDS = ("maximize", "minimize", "target")


# ----- desirability ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Goal:
    """A desirability goal for one response (Derringer & Suich 1980).

    With L the lower limit, T the target and U the upper limit:

    - ``maximize``: d = 0 below L, ((y - L)/(T - L))^s up to T, 1 above.
    - ``minimize``: d = 1 below T, ((U - y)/(U - T))^t up to U, 0 above.
    - ``target``: ((y - L)/(T - L))^s on [L, T], ((U - y)/(U - T))^t on [T, U], 0 outside.

    ``s`` and ``t`` are the exponents of the rising and falling sides; ``weight`` is the relative
    weight of this response in the overall desirability D (a weighted geometric mean).
    Build goals with :func:`maximize`, :func:`minimize` and :func:`target`.
    """

    kind: str
    lower_limit: float = float("nan")
    target: float = float("nan")
    upper_limit: float = float("nan")
    s: float = 1.0
    t: float = 1.0
    weight: float = 1.0

    def __post_init__(self):
        spelled = {"maximise": "maximize", "minimise": "minimize"}
        if isinstance(self.kind, str) and self.kind.lower() in spelled:
            object.__setattr__(self, "kind", spelled[self.kind.lower()])
        if self.kind not in GOAL_KINDS:
            raise LevelwiseError(f"A goal's 'kind' must be one of {GOAL_KINDS}. Got {describe(self.kind)} instead.")
        for name in ("lower_limit", "target", "upper_limit", "s", "t", "weight"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
                raise LevelwiseError(f"A goal's {name!r} must be a number. Got {describe(value)} instead.")
            object.__setattr__(self, name, float(value))
        needed = {"maximize": ("lower_limit", "target"), "minimize": ("target", "upper_limit"),
                  "target": ("lower_limit", "target", "upper_limit")}[self.kind]
        for name in needed:
            if not np.isfinite(getattr(self, name)):
                raise LevelwiseError(f"A {self.kind!r} goal needs a finite {name!r}. Got {getattr(self, name)!r}.")
        values = [getattr(self, name) for name in needed]
        if any(a >= b for a, b in zip(values, values[1:])):
            order = " < ".join(needed)
            raise LevelwiseError(
                f"A {self.kind!r} goal needs {order}. Got " + ", ".join(f"{n}={v:g}" for n, v in zip(needed, values))
                + " instead."
            )
        for name in ("s", "t", "weight"):
            if not getattr(self, name) > 0 or not np.isfinite(getattr(self, name)):
                raise LevelwiseError(
                    f"A goal's {name!r} must be a finite number > 0. Got {getattr(self, name)!r} instead."
                )

    def __call__(self, y):
        """The individual desirability d(y), in [0, 1]."""
        y = np.asarray(y, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            if self.kind == "maximize":
                rising = np.clip((y - self.lower_limit) / (self.target - self.lower_limit), 0.0, 1.0) ** self.s
                return np.where(y >= self.target, 1.0, rising)
            if self.kind == "minimize":
                falling = np.clip((self.upper_limit - y) / (self.upper_limit - self.target), 0.0, 1.0) ** self.t
                return np.where(y <= self.target, 1.0, falling)
            rising = np.clip((y - self.lower_limit) / (self.target - self.lower_limit), 0.0, 1.0) ** self.s
            falling = np.clip((self.upper_limit - y) / (self.upper_limit - self.target), 0.0, 1.0) ** self.t
            return np.where(y <= self.target, rising, falling)


def maximize(lower_limit: float, target: float, s: float = 1.0, weight: float = 1.0) -> Goal:
    """Goal: larger is better; unacceptable below *lower_limit*, fully satisfying from *target* on."""
    return Goal("maximize", lower_limit=lower_limit, target=target, s=s, weight=weight)


def minimize(target: float, upper_limit: float, t: float = 1.0, weight: float = 1.0) -> Goal:
    """Goal: smaller is better; fully satisfying up to *target*, unacceptable above *upper_limit*."""
    return Goal("minimize", target=target, upper_limit=upper_limit, t=t, weight=weight)


def target(lower_limit: float, target: float, upper_limit: float, s: float = 1.0, t: float = 1.0,
           weight: float = 1.0) -> Goal:
    """Goal: hit *target*; unacceptable below *lower_limit* or above *upper_limit*."""
    return Goal("target", lower_limit=lower_limit, target=target, upper_limit=upper_limit, s=s, t=t, weight=weight)


def as_goal(value, response: str = "?") -> Goal:
    """A :class:`Goal`, or a dict such as ``{"goal": "maximize", "lower_limit": 120, "target": 170}``."""
    if isinstance(value, Goal):
        return value
    if isinstance(value, dict):
        spec = dict(value)
        kind = spec.pop("goal", spec.pop("kind", None))
        allowed = {"lower_limit", "target", "upper_limit", "s", "t", "weight"}
        unknown = sorted(set(spec) - allowed)
        renamed = {"low": "lower_limit", "high": "upper_limit", "importance": "weight"}
        if any(key in renamed for key in unknown):
            raise LevelwiseError(
                f"The goal for {response!r} uses old key(s) {[k for k in unknown if k in renamed]}; the keys are now "
                + ", ".join(f"{renamed[k]!r} (was {k!r})" for k in unknown if k in renamed) + "."
            )
        if unknown:
            raise LevelwiseError(
                f"The goal for {response!r} has unknown key(s) {unknown}; allowed: goal, {', '.join(sorted(allowed))}."
            )
        try:
            return Goal(kind, **spec)
        except LevelwiseError as exc:
            raise LevelwiseError(f"The goal for {response!r}: {exc}") from None
    raise LevelwiseError(
        f"The goal for {response!r} must be a Goal or a dict with a 'goal' key. Got {describe(value)} instead."
    )


def overall_desirability(d, weight) -> np.ndarray:
    """Weighted geometric mean (prod d_i^w_i)^(1/sum w_i) along the last axis; 0 when any d_i is 0."""
    d = np.asarray(d, dtype=float)
    r = np.asarray(weight, dtype=float)
    with np.errstate(divide="ignore"):
        logs = np.log(d)
    return np.exp((logs * r).sum(axis=-1) / r.sum())


