"""The path of steepest ascent (or descent) of a first-order model."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe


# ----- steepest ascent ------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SteepestPath:
    """The path of steepest ascent (or descent) of a first-order model.

    Attributes
    ----------
    direction : pandas.Series
        Coded change per step for each factor (proportional to the coded first-order coefficients).
    coded : pandas.DataFrame
        The path in coded units, one row per step (step 0 is the centre).
    path : pandas.DataFrame
        The same points in natural units, with the predicted ``mean``, its intervals and
        ``extrapolated``.
    """

    direction: pd.Series
    coded: pd.DataFrame
    path: pd.DataFrame


def steepest_path(fit, step: float = 1.0, steps: int = 10, ascent: bool = True, key: str | None = None
                  ) -> SteepestPath:
    """Points along the path of steepest ascent (descent) from the centre of a first-order model.

    The direction in coded units is the vector of first-order coefficients b (common practice; Box & Wilson
    1951, from memory), or -b for descent. Each step moves the *key* factor (by default the one with the
    largest |b|) by *step* coded units and every other factor by step * b_i / |b_key|.

    Parameters
    ----------
    fit : Fit
        A first-order model (intercept and main effects only) in coded units.
    step : float
        Coded change of the key factor per step.
    steps : int
        Number of steps after the centre.
    ascent : bool
        False for the path of steepest descent.
    key : str, optional
        The factor whose change per step is *step*.

    Raises
    ------
    LevelwiseError
        A model with terms other than main effects, or with all coefficients zero.
    """
    if getattr(fit, "categories", None):  # categorical factors held at their best level (issue 14)
        from ._categorical_search import steepest_path_levels

        return steepest_path_levels(fit, step, steps, ascent, key)
    exponents = np.asarray(fit.spec.exponents)
    order = exponents.sum(axis=1)
    if (order > 1).any():
        extra = [t for t, o in zip(fit.spec.terms, order) if o > 1]
        raise LevelwiseError(
            f"The path of steepest ascent needs a first-order model (main effects only); the model "
            f"{fit.spec.formula!r} also has {extra}. Fit the main effects only."
        )
    if isinstance(step, bool) or not isinstance(step, (int, float, np.floating)) or not step > 0:
        raise LevelwiseError(f"The 'step' parameter must be a number > 0. Got {describe(step)} instead.")
    if isinstance(steps, bool) or not isinstance(steps, (int, np.integer)) or steps < 1:
        raise LevelwiseError(f"The 'steps' parameter must be an integer >= 1. Got {describe(steps)} instead.")
    names = list(fit.factor_names)
    b = np.zeros(len(names))
    for row, value in zip(exponents, np.asarray(fit.beta, dtype=float)):
        if row.sum() == 1:
            b[int(np.argmax(row))] = value
    if not ascent:
        b = -b
    if key is None:
        j = int(np.argmax(np.abs(b)))
    elif key in names:
        j = names.index(key)
    else:
        raise LevelwiseError(f"The 'key' parameter must be one of the factors {names}. Got {describe(key)} instead.")
    if b[j] == 0:
        raise LevelwiseError(
            f"The first-order coefficient of the key factor {names[j]!r} is 0: there is no direction to follow."
        )
    direction = step * b / abs(b[j])
    coded = np.arange(steps + 1)[:, None] * direction[None, :]
    natural = coded * np.asarray(fit.coding.scale, float) + np.asarray(fit.coding.center, float)
    coded_frame = pd.DataFrame(coded, columns=names)
    coded_frame.index.name = "step"
    frame = pd.DataFrame(natural, columns=names)
    frame.index.name = "step"
    predicted = fit.predict(frame)
    predicted.index = frame.index
    return SteepestPath(
        direction=pd.Series(direction, index=names, name="coded step"),
        coded=coded_frame,
        path=pd.concat([frame, predicted], axis=1),
    )


__all__ = ["SteepestPath", "steepest_path"]
