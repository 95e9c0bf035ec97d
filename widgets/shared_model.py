"""The one shared fitted model that every view observes.

:class:`SharedModel` is a plain ``traitlets.HasTraits`` (not a widget, nothing is
synced to the browser). Inputs are traits (``data``, ``model``, ``settings``);
the output is ``fit``, an immutable :class:`kernel_core.Fit` that is *replaced*
on every refit, never changed, so each refit notifies observers exactly once.
A refit that fails keeps the last good fit and puts the message in ``error``.

Read-only is enforced here, in Python: a model built with ``read_only=True``
refuses every change to the data, the response or the model, whatever a
browser sends. Only the factor settings may move.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import traitlets

from kernel_core import Factor, Fit, LevelwiseError, fit


class ReadOnlyError(LevelwiseError):
    """A change was asked of a read-only shared model."""


class SharedModel(traitlets.HasTraits):
    """Study data, model and factor settings, with the current fit.

    Parameters
    ----------
    factors : list of Factor
    data : pandas.DataFrame
        One row per run, natural units.
    response : str
    model : str
        Wilkinson formula or preset.
    response_units : str, optional
    read_only : bool, default False
        Refuse every mutation except moving ``settings``.

    Examples
    --------
    In a notebook cell: ``shared.settings = {"Oven": 195, ...}`` moves every view;
    ``shared.set_model("Oven + Dwell")`` refits.
    """

    factors = traitlets.Tuple(help="The study's factors (kernel_core.Factor), in column order.")
    data = traitlets.Instance(pd.DataFrame, help="The runs, natural units, one column per factor and response.")
    response = traitlets.Unicode(help="Name of the modelled response column.")
    response_units = traitlets.Unicode("", help="Units of the response, shown in every readout.")
    model = traitlets.Unicode(help="The model, in Wilkinson notation or a preset.")
    settings = traitlets.Dict(help="Current factor settings, natural units: {factor name: value}.")
    fit = traitlets.Instance(Fit, allow_none=True, help="Current fit; replaced on every refit, never mutated.")
    error = traitlets.Unicode("", help="Message of the last failed refit or rejected change ('' when none).")
    read_only = traitlets.Bool(False, read_only=True, help="When true, only the settings may change.")

    def __init__(self, factors, data, response, model, *, response_units="", read_only=False):
        factors = tuple(factors)
        for item in factors:
            if not isinstance(item, Factor):
                raise LevelwiseError(f"Every item of 'factors' must be a Factor. Got {item!r} instead.")
        super().__init__(
            factors=factors,
            data=data,
            response=response,
            model=model,
            response_units=response_units,
            settings={f.name: f.center for f in factors},
        )
        self.set_trait("read_only", bool(read_only))
        self.fit = fit(data, response, model, factors=factors)  # a bad start is an error for the caller
        self.observe(self._refit, names=["data", "response", "model"])

    # ----- read-only enforcement ----------------------------------------------------------------
    @traitlets.validate("data", "response", "model", "factors")
    def _refuse_when_read_only(self, proposal):
        if self.read_only:
            name = proposal["trait"].name
            self.error = f"This dashboard is read-only: the {name} cannot be changed."
            raise ReadOnlyError(self.error)
        return proposal["value"]

    @traitlets.validate("settings")
    def _check_settings(self, proposal):
        value = dict(proposal["value"])
        names = {f.name for f in self.factors}
        unknown = sorted(set(value) - names)
        if unknown:
            raise LevelwiseError(f"The settings name unknown factor(s) {unknown}; known: {sorted(names)}.")
        clean = dict(self.settings) if self.settings else {}
        for name, raw in value.items():
            try:
                number = float(raw)
            except (TypeError, ValueError):
                raise LevelwiseError(f"The setting of {name!r} must be a number. Got {raw!r} instead.") from None
            if not np.isfinite(number):
                raise LevelwiseError(f"The setting of {name!r} must be finite. Got {raw!r} instead.")
            clean[name] = number
        return clean

    # ----- mutations, each usable from a notebook cell --------------------------------------------
    def set_model(self, model: str) -> None:
        """Change the model formula and refit (refused when read-only)."""
        self.model = model

    def set_data(self, data: pd.DataFrame) -> None:
        """Replace the run data and refit (refused when read-only)."""
        self.data = data

    def set_settings(self, **settings) -> None:
        """Move some factor settings, e.g. ``shared.set_settings(Oven=195)``."""
        self.settings = {**self.settings, **settings}

    def _refit(self, change=None) -> None:
        """Build a new Fit; on failure keep the last good one and report the error."""
        try:
            new = fit(self.data, self.response, self.model, factors=self.factors)
        except LevelwiseError as exc:
            self.error = str(exc)
            return
        self.error = ""
        self.fit = new

    # ----- derived values the views share --------------------------------------------------------
    def settings_row(self) -> np.ndarray:
        """Current settings as a (1, k) array in factor order."""
        return np.array([[self.settings[f.name] for f in self.factors]])

    def extrapolating(self) -> list[str]:
        """Names of factors whose current setting lies outside the tested range."""
        return [f.name for f in self.factors if not f.low <= self.settings[f.name] <= f.high]
