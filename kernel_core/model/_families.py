"""What the split-plot and GLM fits share: their prediction engine's arguments and exclusions by refitting.

Both fits hand their coefficients and a factor of their covariance to the one
:class:`~levelwise.model.PredictionEngine` (coding, settings check, model rows or polynomials, extrapolation
rule), which gives the slider path (``refresh``) and every prediction.
"""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError, describe
from ._engine import PredictionEngine


class FitFamily:
    """Mixin for fits with ``base`` (the least-squares fit of the model matrix), ``beta`` and ``cov_factor``."""

    def _engine(self, exponents, **changes):
        b = self.base
        c = b.coding
        xf = np.asarray(b.X)[:, self._engine_columns] @ self.cov_factor
        h_runs = np.einsum("ij,ij->i", xf, xf)
        args = dict(factor_names=b.factor_names, exponents=exponents, beta=self.beta, cov_factor=self.cov_factor,
                    center=c.center, scale=c.scale, low=c.low, high=c.high, dispersion=1.0,
                    categories=b.categories, contrasts=b.contrasts,
                    max_leverage=float(h_runs.max()) if len(h_runs) else np.inf, level=b.level)
        args.update(changes)
        return PredictionEngine(**args)

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
