"""Desirability optimisation and the path of steepest ascent over categorical factors.

With every categorical factor held at one level, each model column is a constant (the product of the
contrast entries of those levels) times a monomial in the continuous factors, so the fit restricted to that
level combination is a polynomial fit in the continuous factors (:class:`LevelSlice`) and the continuous
search of :func:`levelwise.optimize` runs on it unchanged. :func:`optimize_levels` runs that search at every
combination of levels (each level of each categorical factor, all combinations) and reports each one and the
winner; predictions with their intervals always come from the full fit (``Fit.predict``).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe

#: Level combinations searched at most (each is a full continuous search).
MAX_COMBINATIONS = 256


@dataclass(frozen=True)
class _Coding:
    names: tuple
    center: np.ndarray
    scale: np.ndarray
    low: np.ndarray
    high: np.ndarray


@dataclass(frozen=True)
class _Spec:
    formula: str
    exponents: np.ndarray
    terms: tuple


class LevelSlice:
    """A fit with its categorical factors held at given levels, seen as a fit in its continuous factors.

    It offers what the continuous searches read (``factor_names``, ``coding``, ``spec.exponents``, ``beta``, ``engine``,
    ``categories``, ``predict``); ``predict`` adds the held levels and asks the full fit.
    """

    def __init__(self, fit, levels: dict):
        names = list(fit.factor_names)
        self.fit = fit
        self.levels = dict(levels)
        self.response = fit.response
        self.categories = {}
        continuous = [j for j, n in enumerate(names) if n not in fit.categories]
        self.factor_names = tuple(names[j] for j in continuous)
        pick = np.array(continuous, dtype=int)
        c = fit.coding
        self.coding = _Coding(self.factor_names, np.asarray(c.center)[pick], np.asarray(c.scale)[pick],
                              np.asarray(c.low)[pick], np.asarray(c.high)[pick])
        # Coded variables of the fit: one per continuous factor, L - 1 per categorical factor.
        E = np.asarray(fit.spec.exponents)
        const = np.ones(len(E))
        keep_vars = []
        position = 0
        for j, name in enumerate(names):
            if name in fit.categories:
                contrast = fit.contrasts[j]
                row = contrast[list(fit.categories[name]).index(self.levels[name])]
                width = contrast.shape[1]
                const *= np.prod(row[None, :] ** E[:, position:position + width], axis=1)
                position += width
            else:
                keep_vars.append(position)
                position += 1
        self.spec = _Spec(fit.spec.formula, E[:, keep_vars], tuple(fit.spec.terms))
        self.beta = np.asarray(fit.beta, dtype=float) * const
        # x (X'X)^-1 x' with x = const * monomials: scale the rows of the square root R^-1 by const.
        self.rinv = np.asarray(fit.rinv, dtype=float) * const[:, None]
        self.s = fit.s
        self.level = fit.level
        self.t_quantile = fit.t_quantile
        self._engine = None

    @property
    def engine(self):
        """The prediction engine of the slice: the polynomial in the continuous factors (the one engine class,
        fed the slice's coefficients and covariance factor; intervals and extrapolation as the full fit's)."""
        if self._engine is None:
            from ._engine import PredictionEngine

            fit = self.fit
            pick = [j for j, n in enumerate(fit.factor_names) if n not in fit.categories]
            used = np.asarray(fit.group_exponents).any(axis=0)[pick] if len(fit.group_exponents) else None
            self._engine = PredictionEngine(
                factor_names=self.factor_names, exponents=self.spec.exponents, beta=self.beta, cov_factor=self.rinv,
                center=self.coding.center, scale=self.coding.scale, low=self.coding.low, high=self.coding.high,
                dispersion=fit.s**2, df=fit.df_resid, used=used,
                max_leverage=float(fit.leverage.max()) if fit.n else np.inf, level=fit.level,
            )
        return self._engine

    def _full(self, frame: pd.DataFrame) -> pd.DataFrame:
        frame = pd.DataFrame(frame).copy()
        for name, level in self.levels.items():
            frame[name] = [level] * len(frame)
        return frame[list(self.fit.factor_names)]

    def predict(self, settings, level=None) -> pd.DataFrame:
        return self.fit.predict(self._full(settings), level)


def _categorical_levels(fits: dict, region) -> dict:
    """Categorical factor -> levels to search (levels common to every fit, narrowed by *region*)."""
    levels = {}
    for fit in fits.values():
        for name, values in fit.categories.items():
            levels[name] = [v for v in levels.get(name, values) if v in values]
    region = dict(region or {})
    for name in list(levels):
        if name in region:
            wanted = region.pop(name)
            wanted = list(wanted) if isinstance(wanted, (list, tuple, set)) else [wanted]
            bad = [w for w in wanted if w not in levels[name]]
            if bad or not wanted:
                raise LevelwiseError(
                    f"The 'region' of categorical factor {name!r} must be one of its levels or a list of them "
                    f"{levels[name]}. Got {describe(wanted)} instead."
                )
            levels[name] = wanted
        if not levels[name]:
            raise LevelwiseError(f"The fits share no level of categorical factor {name!r}.")
    return levels, region


@dataclass(frozen=True, eq=False)
class LevelOptimum:
    """The result of an optimisation over categorical factors (see :func:`optimize_levels`).

    The fields of :class:`levelwise.Optimum` for the winning combination, plus ``winner`` (categorical factor ->
    winning level) and ``by_level`` (one row per level combination: its levels, the best continuous settings and
    its overall desirability ``overall_D``, best first).
    """

    settings: dict
    predictions: pd.DataFrame
    desirability: pd.Series
    overall: float
    starts: pd.DataFrame
    winner: dict = field(default_factory=dict)
    by_level: pd.DataFrame = None
    search_complete: bool = True
    stopped: str | None = None


def optimize_levels(fits: dict, goals: dict, region=None, constraints=None, starts: int = 20, seed=None,
                    progress=None):
    """:func:`levelwise.optimize` when some fit has categorical factors: a continuous search at every
    combination of their levels; the combination with the highest overall desirability wins.

    ``region`` may hold a level or a list of levels for a categorical factor (the levels searched).
    """
    from ._optimize import optimize

    if not isinstance(fits, dict) or not fits:
        raise LevelwiseError(
            f"The 'fits' parameter must be a non-empty dict of response -> Fit. Got {describe(fits)} instead."
        )
    if region is not None and not isinstance(region, dict):
        raise LevelwiseError(
            f"The 'region' parameter must be a dict of factor -> (low, high) or level(s). Got {describe(region)}."
        )
    levels, continuous_region = _categorical_levels(fits, region)
    names = list(levels)
    combos = list(itertools.product(*[levels[n] for n in names]))
    if len(combos) > MAX_COMBINATIONS:
        raise LevelwiseError(
            f"The categorical factors {names} have {len(combos)} level combinations; at most {MAX_COMBINATIONS} "
            "are searched. Hold some factors at a level with region={factor: level}."
        )
    if not any(n not in fit.categories for fit in fits.values() for n in fit.factor_names):
        raise LevelwiseError("optimize needs at least one continuous factor in the fits.")
    from .._progress import Reporter

    reporter = Reporter(progress, "Optimisation starts")
    results = []
    for k, combo in enumerate(combos):
        held = dict(zip(names, combo))
        sliced = {r: LevelSlice(fit, {n: held[n] for n in fit.categories}) for r, fit in fits.items()}

        def step(fraction, message="", k=k, held=held):  # this combination's share of the whole search
            words = ", ".join(f"{n} = {v}" for n, v in held.items())
            return reporter.report((k + fraction) / len(combos), f"{words}: {message}")

        found = optimize(sliced, goals, region=continuous_region or None, constraints=constraints, starts=starts,
                         seed=seed, progress=step)
        results.append((found.overall, held, found))
        if found.stopped is not None:
            reporter.stopped = reporter.stopped or found.stopped
            break
    reporter.finish("The optimisation")
    results.sort(key=lambda item: -item[0])
    best_value, winner, found = results[0]
    rows = [{**held, **opt.settings, "overall_D": value} for value, held, opt in results]
    by_level = pd.DataFrame(rows)
    settings = {**found.settings, **winner}
    return LevelOptimum(settings=settings, predictions=found.predictions, desirability=found.desirability,
                        overall=float(best_value), starts=found.starts, winner=winner, by_level=by_level,
                        search_complete=reporter.stopped is None, stopped=reporter.stopped)


@dataclass(frozen=True, eq=False)
class LevelPath:
    """The path of steepest ascent (descent) with categorical factors held at their winning levels.

    ``direction``, ``coded`` and ``path`` as in :class:`levelwise.SteepestPath` (``path`` also names the held
    levels); ``winner`` maps each categorical factor to its best level and ``level_effects`` gives every
    level's effect (its deviation from the mean over levels, from the sum-to-zero coefficients).
    """

    direction: pd.Series
    coded: pd.DataFrame
    path: pd.DataFrame
    winner: dict
    level_effects: pd.DataFrame


def steepest_path_levels(fit, step: float = 1.0, steps: int = 10, ascent: bool = True, key=None) -> LevelPath:
    """:func:`levelwise.steepest_path` for a first-order model with categorical factors: each categorical factor
    is held at the level with the largest (ascent) or smallest (descent) effect, and the continuous factors
    follow their first-order coefficients."""
    from ._optimize import steepest_path

    order = np.asarray(fit.group_exponents).sum(axis=1)
    if (order > 1).any():
        extra = [label for (label, _), o in zip(fit.groups, order) if o > 1]
        raise LevelwiseError(
            f"The path of steepest ascent needs a first-order model (main effects only); the model "
            f"{fit.spec.formula!r} also has {extra}. Fit the main effects only."
        )
    names = list(fit.factor_names)
    rows, winner = [], {}
    for name in fit.categories:
        j = names.index(name)
        group = next((cols for label, cols in fit.groups if label == name), ())
        coefs = np.asarray(fit.beta, dtype=float)[list(group)] if group else np.zeros(fit.contrasts[j].shape[1])
        effects = fit.contrasts[j] @ coefs
        pick = int(np.argmax(effects) if ascent else np.argmin(effects))
        winner[name] = fit.categories[name][pick]
        rows += [{"factor": name, "level": lv, "effect": float(e), "chosen": i == pick}
                 for i, (lv, e) in enumerate(zip(fit.categories[name], effects))]
    if all(n in fit.categories for n in names):
        raise LevelwiseError("The path of steepest ascent needs at least one continuous factor in the model.")
    found = steepest_path(LevelSlice(fit, winner), step=step, steps=steps, ascent=ascent, key=key)
    path = found.path.copy()
    for position, name in enumerate(fit.categories):
        path.insert(len(found.direction) + position, name, winner[name])
    return LevelPath(direction=found.direction, coded=found.coded, path=path, winner=winner,
                     level_effects=pd.DataFrame(rows))


__all__ = ["LevelOptimum", "LevelPath", "LevelSlice", "optimize_levels", "steepest_path_levels"]
