"""What a :class:`~levelwise.Fit` answers through the one prediction engine (``fit.engine``) and the analysis
modules: predictions, one slider event's numbers, traces, slices, effects, Lenth, half-normal, Box-Cox."""

from __future__ import annotations

import pandas as pd


class FitQueries:
    """Mixed into ``Fit``: every method reads ``self.engine`` or hands the fit to an analysis module."""

    def predict(self, settings, level: float | None = None) -> pd.DataFrame:
        """Predicted mean with confidence and prediction intervals at natural-unit *settings*.

        *settings* is a dict (one setting), a dict of equal-length lists or a DataFrame; it needs
        only the factors the model uses (see :mod:`levelwise.model._engine` for the one settings
        check). Returns a DataFrame with ``mean``, ``ci_low``, ``ci_high`` (confidence interval for
        the mean), ``pi_low``, ``pi_high`` (prediction interval for one new run), ``leverage`` and
        ``extrapolated``: a factor the model uses outside its range, or a leverage above the
        largest leverage among the runs of the fit.
        """
        return self.engine.predict(settings, level)

    def refresh(self, settings, level: float | None = None, points: int | None = 50, slice_axes=None,
                shape=(100, 100), point: bool = True) -> dict:
        """Everything one slider event needs, in one call, as numpy arrays (no DataFrames).

        Parameters
        ----------
        settings : dict
            ``{factor: natural setting}`` for every factor the model uses (a level for a categorical one).
        level : float, optional
            Confidence level of the intervals (the fit's level by default).
        points : int or None
            Points per factor trace (an integer from 2 to 100000); None computes no traces.
        slice_axes : (str, str), optional
            The factors across and up a surface slice; None computes no slice.
        shape : (int, int)
            Grid points of the slice along its two axes.
        point : bool
            False computes no point prediction (a view that shows only the slice).

        Returns
        -------
        dict
            ``point``: ``mean``, ``ci_low``, ``ci_high``, ``pi_low``, ``pi_high``, ``leverage`` (floats)
            and ``extrapolated`` (bool), as one row of :meth:`predict` (or None); ``traces``: as
            :meth:`traces` (or None); ``slice``: as :meth:`slice` (or None).
        """
        return self.engine.refresh(settings, level, points, slice_axes, shape, point)

    def trace(self, factor: str, settings, points: int = 50, level: float | None = None) -> dict:
        """The predicted response along one factor's range, the others held at *settings*.

        Returns a dict of arrays: ``x`` (natural units; the levels for a categorical factor),
        ``mean``, ``ci_half`` and ``pi_half``.
        """
        return self.engine.trace(factor, settings, points, level)

    def traces(self, settings, points: int = 50, level: float | None = None) -> dict:
        """:meth:`trace` for every factor at once: ``{factor: {"x", "mean", "ci_half", "pi_half"}}``."""
        return self.engine.traces(settings, points, level)

    def slice(self, x, y, settings, shape=(100, 100), level=None) -> dict:
        """Surface-slice grids of mean and CI/PI half-widths over factors *x* and *y*.

        Returns ``x`` (nx,), ``y`` (ny,) in natural units and ``mean``, ``ci_half``, ``pi_half`` of
        shape (ny, nx), where ``[i, j]`` is the value at (x[j], y[i]).
        """
        return self.engine.slice(x, y, settings, shape, level)


    # ----- delegations to the analysis modules (imported lazily) ------------------------------
    @property
    def effects(self):
        """Effects (2 x coded coefficient for two-level terms); see :mod:`levelwise.model._effects`."""
        from ._effects import effects

        return effects(self)

    def lenth(self, alpha: float = 0.05):
        """Lenth's (1989) PSE, ME, SME and the active effects; see :mod:`levelwise.model._effects`."""
        from ._effects import lenth

        return lenth(self, alpha)

    def half_normal(self):
        """Half-normal plot coordinates of the effects; see :mod:`levelwise.model._effects`."""
        from ._effects import half_normal

        return half_normal(self)

    def box_cox(self):
        """Box–Cox λ with a 95% CI and a suggestion; see :mod:`levelwise.model._boxcox`."""
        from ._boxcox import box_cox

        return box_cox(self)
