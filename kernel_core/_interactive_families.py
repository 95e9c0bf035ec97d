"""The slider-event call (``refresh``) shared by the split-plot and GLM fits.

Both fits hand their coefficients and a square root of their covariance to the shared
:class:`~levelwise.prediction.Predictor`; each says how a mean and its variance become interval bands
(``_bands``). Trace grids are built once per fit and number of points, so one event is one settings check
and one batched model evaluation, with no DataFrames.
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

from ._errors import LevelwiseError, describe
from .prediction import InteractivePlan


class InteractiveFamily:
    """Mixin: ``refresh`` for fits that define ``base``, ``predictor``, ``_bands(mean, var, level)`` and, for the
    polynomial fast path, ``_plan_scaling()`` -> (s, quantile function) and ``_bands_from_halves(mean, ci, pi, level)``.

    With every factor continuous the traces use the least-squares fit's polynomial plan
    (:class:`~levelwise.prediction.InteractivePlan`) with the covariance factor divided by *s*, so that its
    "confidence" half-width is quantile * sqrt(x Cov x) and its "prediction" half-width
    quantile * sqrt(s^2 + x Cov x).
    """

    @cached_property
    def _plan(self):
        base = self.base
        exponents = np.asarray(self.predictor.exponents)
        if base.contrasts or not base.factor_names or exponents.shape[1] != len(base.factor_names):
            return None
        s, _ = self._plan_scaling()
        c = base.coding
        return InteractivePlan(exponents, self.beta, self.cov_factor / s, c.center, c.scale, c.low, c.high)

    def _trace_grid(self, points):
        grids = self.__dict__.setdefault("_trace_grids", {})
        if points not in grids:
            base = self.base
            names = base.factor_names
            blocks, xs = [], {}
            for j, name in enumerate(names):
                if name in base.categories:
                    values = np.arange(len(base.categories[name]), dtype=float)
                    xs[name] = np.asarray(base.categories[name], dtype=object)
                else:
                    values = np.linspace(base.coding.low[j], base.coding.high[j], points)
                    xs[name] = values
                block = np.full((len(values), len(names)), np.nan)
                block[:, j] = values
                blocks.append(block)
            template = np.vstack(blocks) if blocks else np.empty((0, len(names)))
            bounds = np.cumsum([0] + [len(b) for b in blocks])
            grids[points] = (template, np.isnan(template), bounds, xs)
        return grids[points]

    def refresh(self, settings, level: float | None = None, points: int | None = 50, slice_axes=None,
                shape=(100, 100), point: bool = True) -> dict:
        """One slider event: ``point`` (a dict of floats), ``traces`` ({factor: arrays}) and ``slice``.

        The bands are those of :meth:`predict`; traces hold ``x`` and the band arrays per factor (every
        level of a categorical factor). ``slice`` holds ``x``, ``y`` and the band arrays on a grid of *shape*.
        """
        natural = self.base.settings_vector(settings)
        level = self.level if level is None else level
        out = {"point": None, "traces": None, "slice": None}
        plan = self._plan
        if plan is not None:
            s, quantile = self._plan_scaling()
            ts = quantile(level) * s
            powers = plan.powers(natural)
        if point:
            if plan is not None:
                row = plan.point(natural, powers, ts, np.inf)
                mean = np.array([row["mean"]])
                bands = self._bands_from_halves(mean, np.array([row["ci_high"]]) - mean,
                                                np.array([row["pi_high"]]) - mean, level)
            else:
                bands = self._bands(*self.predictor.mean_and_leverage(natural[None, :]), level)
            out["point"] = {key: float(value[0]) for key, value in bands.items()}
        if points is not None:
            if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not 2 <= points <= 100_000:
                raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 100000 or None. "
                                     f"Got {describe(points)}.")
            if plan is not None:
                xs, mean, ci, pi = plan.traces(powers, ts, int(points))
                bands = self._bands_from_halves(mean, ci, pi, level)  # (k, points) arrays, one call
                out["traces"] = {name: {"x": xs[j], **{key: value[j] for key, value in bands.items()}}
                                 for j, name in enumerate(self.base.factor_names)}
                points = None
        if points is not None:
            template, blank, bounds, xs = self._trace_grid(int(points))
            bands = self._bands(*self.predictor.mean_and_leverage(np.where(blank, natural, template)), level)
            out["traces"] = {
                name: {"x": xs[name], **{key: value[bounds[j]:bounds[j + 1]] for key, value in bands.items()}}
                for j, name in enumerate(self.base.factor_names)
            }
        if slice_axes is not None:
            out["slice"] = self._slice(natural, slice_axes, shape, level)
        return out

    def _slice(self, natural, slice_axes, shape, level):
        names = list(self.base.factor_names)
        try:
            x, y = slice_axes
            ix, iy = names.index(x), names.index(y)
        except (TypeError, ValueError):
            raise LevelwiseError(f"The 'slice_axes' parameter must name two continuous factors of {names}. "
                                 f"Got {describe(slice_axes)} instead.") from None
        if x in self.base.categories or y in self.base.categories or ix == iy:
            raise LevelwiseError(f"The 'slice_axes' parameter must name two different continuous factors. "
                                 f"Got {describe(slice_axes)} instead.")
        nx, ny = (int(v) for v in shape)
        c = self.base.coding
        gx, gy = np.linspace(c.low[ix], c.high[ix], nx), np.linspace(c.low[iy], c.high[iy], ny)
        grid = np.repeat(natural[None, :], nx * ny, axis=0)
        grid[:, ix] = np.tile(gx, ny)
        grid[:, iy] = np.repeat(gy, nx)
        bands = self._bands(*self.predictor.mean_and_leverage(grid), level)
        return {"x": gx, "y": gy, **{key: value.reshape(ny, nx) for key, value in bands.items()}}

    # -- exclusions: refit without the run (the model is not linear in the data, so no rank-one update) -------
    exclusions: tuple = ()
    _origin = None  # (data, response column, refit(data) -> fit, {run id: data row})

    def _remember(self, data, response, refit, rows):
        self._origin = (data, response, refit, dict(rows))
        return self

    @property
    def missing_runs(self) -> tuple:
        """Runs without a response (excluded runs are listed in :attr:`exclusions` instead)."""
        excluded = {run for run, _ in self.exclusions}
        return tuple(run for run in self.base.missing_runs if run not in excluded)

    def _with_exclusions(self, exclusions, model=None):
        """Refit on the original data less *exclusions*, with *model* (a formula) or this fit's model."""
        data, response, refit, rows = self._origin
        changed = data.copy()
        column = list(changed.columns).index(response)
        for run, _ in exclusions:
            changed.iloc[rows[run], column] = np.nan
        out = refit(changed, self.base.spec.formula if model is None else model)
        out.exclusions = tuple(exclusions)
        out._origin = self._origin
        return out

    def exclude(self, run, reason: str):
        """A new fit without *run* (a run id), refitted; *reason* says why (kept in :attr:`exclusions`)."""
        if not isinstance(reason, str) or not reason.strip():
            raise LevelwiseError(f"The 'reason' parameter of exclude must be a non-empty text saying why run "
                                 f"{run!r} is left out. Got {describe(reason)} instead.")
        if self._origin is None or run not in list(self.runs):
            raise LevelwiseError(f"The 'run' parameter of exclude must be a run in this fit "
                                 f"{list(self.runs)[:20]}. Got {describe(run)} instead.")
        return self._with_exclusions(self.exclusions + ((run, reason),))

    def include(self, run):
        """A new fit with the excluded *run* back in."""
        excluded = [r for r, _ in self.exclusions]
        if run not in excluded:
            raise LevelwiseError(f"The 'run' parameter of include must be an excluded run {excluded}. "
                                 f"Got {describe(run)} instead.")
        return self._with_exclusions(tuple(item for item in self.exclusions if item[0] != run))
