"""The one shared fitted model that every view observes: a thin traitlets view over a :class:`levelwise.Study`.

:class:`SharedModel` is a plain ``traitlets.HasTraits`` (not a widget, nothing is
synced to the browser). The study it wraps (``shared.study``) is the single source
of truth: the factors, the runs named by run id, the responses with their units and
models, and the exclusions with their reasons all live there, and every change made
here is made to the study (and so lands in its audit log). The traits ``factors``,
``responses``, ``units``, ``models`` and ``exclusions`` mirror the study's metadata so
that views can observe them; ``data`` is the study's table, read from it. The
outputs are ``fits`` (one immutable :class:`levelwise.Fit` per response, the whole
dict *replaced* on every refit) and ``fit`` (the fit of the displayed ``response``).
Each refit notifies the observers of ``fits`` and of ``fit`` exactly once.

Every change is a method with a code equivalent, usable from a notebook cell::

    shared.exclude(7, "operator noted a wrong powder batch")
    shared.include(7)
    shared.set_model("Impact", "full_second_order")
    shared.settings = {"Oven": 195.0, "Dwell": 12.0, "Film": 70.0, "Catalyst": 1.0}
    shared.response = "Gloss"          # what the views display

A refit that fails keeps that response's last good fit and puts the message in
``error`` (and ``errors[response]``); nothing raises into the event loop.

Read-only is enforced here, in Python: a model built with ``read_only=True``
refuses every change to the study, the design, the models, the exclusions and
the fits, whatever a browser sends (a :class:`ReadOnlyError`). Only the factor
settings and the display choices (``response``, ``goals``) may change, and the
settings must then stay inside the study's region.
"""

from __future__ import annotations

import abc
from contextlib import contextmanager

import numpy as np
import pandas as pd
import traitlets

from levelwise import Design, Factor, Fit, LevelwiseError, Study
from levelwise._errors import describe
from levelwise.model import GlmFit, MixedFit

from ._count_display import shown_responses
from ._shared_fitting import FittingMixin, default_setting, is_categorical
from ._shared_goals import GoalsMixin
from ._shared_mixture import MixtureMixin, default_blend
from ._study_table import DEFAULT_MODEL, study_from_table

#: Traits that only a writable model may change (the inputs and the outputs of fitting).
PROTECTED = ("factors", "design", "responses", "units", "models", "exclusions", "fits", "fit", "study", "revision")
#: Traits that mirror the study: only the model's own methods write them.
MIRRORS = ("factors", "responses", "units", "models", "exclusions", "revision", "study")


class ReadOnlyError(LevelwiseError):
    """A change was asked of a read-only shared model."""


class AnyFit(abc.ABC):  # noqa: B024 - a type to register fits with, no methods of its own
    """What the ``fit`` trait holds: a least-squares :class:`levelwise.Fit`, or a fit of another family (the
    split-plot ``MixedFit``, the ``GlmFit``) that predicts through the same ``Fit.engine``."""


AnyFit.register(Fit)
AnyFit.register(MixedFit)
AnyFit.register(GlmFit)


class _NoneChecked(traitlets.Instance):
    """An Instance trait whose validators also see ``None`` (traitlets skips them for None by default),
    so that setting it to None cannot slip past the read-only guard."""

    def _validate(self, obj, value):
        if value is None and self.allow_none:
            return self._cross_validate(obj, value) if obj._cross_validation_lock is False else value
        return super()._validate(obj, value)


class SharedModel(MixtureMixin, GoalsMixin, FittingMixin, traitlets.HasTraits):
    """A view over a :class:`levelwise.Study` (factors, runs, responses, models, exclusions) with its current fits.

    Build it on a study with :meth:`from_study`; the constructor builds the study from a table.

    Parameters
    ----------
    factors : sequence of Factor
    data : pandas.DataFrame
        One row per run in natural units: the factor columns and one column per response.
        A ``run`` column gives the run ids; without one the runs are numbered 1..n in row order.
    response : str, optional
        The response displayed first (default: the first of *responses*).
    model : str, optional
        Model of *response* (Wilkinson formula or preset). Used when *models* is not given.
    responses : sequence of str, optional
        Every response column of the study (default: ``[response]``).
    models : dict of str -> str, optional
        Model per response (default ``"main_effects"`` for a response without one).
    units : dict of str -> str, optional
        Units per response.
    response_units : str, optional
        Units of *response* (a shortcut for ``units={response: ...}``).
    design : levelwise.Design, optional
        The planned design, when known.
    exclusions : dict, optional
        ``{run id: reason}`` of runs left out of every fit.
    settings : dict, optional
        Starting factor settings (default: the centre of every factor).
    read_only : bool, default False
        Refuse every change except the settings (kept inside the region) and the display choices.
    level : float, default 0.95
        Confidence level of every interval shown.

    Examples
    --------
    >>> from levelwise import demo
    >>> shared = SharedModel(demo.FACTORS, demo.demo_data(), demo.RESPONSE, demo.MODEL)
    >>> shared.set_model(demo.RESPONSE, "Oven + Dwell")
    >>> shared.fit.terms
    ('Intercept', 'Oven', 'Dwell')
    >>> shared.study.models[demo.RESPONSE]
    'Oven + Dwell'
    """

    study = _NoneChecked(Study, allow_none=True, help="The levelwise Study this model is a view of.")
    factors = traitlets.Tuple(help="The study's factors (levelwise.Factor), in column order (mirrors the study).")
    design = _NoneChecked(Design, allow_none=True, help="The planned design, when known.")
    responses = traitlets.Tuple(help="Names of the responses of the study (mirrors the study).")
    units = traitlets.Dict(help="Units of each response: {response: units} (mirrors the study).")
    models = traitlets.Dict(help="Model of each response, Wilkinson notation or preset (mirrors the study).")
    exclusions = traitlets.Dict(help="Runs left out of every fit, with the reason: {run id: reason} (mirrors "
                                     "the study).")
    revision = traitlets.Int(0, help="The study's revision: changes whenever the study changes.")
    response = traitlets.Unicode(help="The response the views display (a display choice).")
    goals = traitlets.Dict(
        help="Optimisation goals per response (an exploration choice, allowed read-only): {response: goal dict}."
    )
    settings = traitlets.Dict(help="Current factor settings, natural units: {factor name: value}.")
    fits = traitlets.Dict(help="Current fit of each response; the dict is replaced on every refit, never mutated.")
    fit = _NoneChecked(AnyFit, allow_none=True, help="Fit of the displayed response (None until it can be fitted).")
    errors = traitlets.Dict(help="Message of the last failed refit of each response.")
    error = traitlets.Unicode("", help="Message of the last failed refit or rejected change ('' when none).")
    level = traitlets.Float(0.95, read_only=True, help="Confidence level of every interval shown.")
    read_only = traitlets.Bool(False, read_only=True, help="When true, only settings and display choices change.")

    def __init__(
        self,
        factors,
        data,
        response=None,
        model=None,
        *,
        responses=None,
        models=None,
        units=None,
        response_units="",
        design=None,
        exclusions=None,
        settings=None,
        read_only=False,
        level=0.95,
        study=None,
    ):
        if study is None:
            factors = tuple(factors)
            for position, item in enumerate(factors):
                if not isinstance(item, Factor):
                    raise LevelwiseError(
                        f"Item {position} of 'factors' must be a Factor. Got {describe(item)} instead."
                    )
            responses = tuple(responses) if responses is not None else ((response,) if response is not None else ())
            if not responses:
                raise LevelwiseError("The shared model needs at least one response: give 'response' or 'responses'.")
            models = dict(models or {})
            if model is not None:
                models.setdefault(responses[0] if response is None else response, model)
            units = {name: str((units or {}).get(name, "")) for name in responses}
            if response_units:
                units[responses[0] if response is None else response] = response_units
            if response is not None and response not in responses:
                raise LevelwiseError(f"The 'response' parameter must be one of {list(responses)}. Got {response!r}.")
            study = study_from_table(factors, data, responses, models=models, units=units, exclusions=exclusions)
        if not isinstance(study, Study):
            raise LevelwiseError(f"The 'study' must be a levelwise Study. Got {describe(study)} instead.")
        names = list(shown_responses(study))
        if not names:
            raise LevelwiseError("The study has no responses yet: add one with study.add_response(name, units).")
        response = names[0] if response is None else response
        if response not in names:
            raise LevelwiseError(f"The 'response' parameter must be one of {names}. Got {describe(response)}.")
        self._internal = 0
        self._table = (None, None)
        with self._writing():
            super().__init__(design=design, response=response)
            self.set_trait("level", float(level))
            self._attach(study)
            self.settings = {f.name: default_setting(f) for f in study.factors} | default_blend(study) \
                | dict(settings or {})
            self._refit()
            self.goals = self.study_goals()
        self.set_trait("read_only", bool(read_only))  # last: the model is built before it is locked
        self.observe(self._on_response, names="response")

    @classmethod
    def from_study(cls, study, *, read_only=False, response=None, design=None, level=0.95):
        """A shared model over a :class:`levelwise.Study`: every change made here is made to the study.

        Exclusions, inclusions and model changes are recorded in the study (and so in its audit log);
        save the study to keep them. Runs excluded from one response only are left out of that
        response's fit.
        """
        return cls(None, None, response, study=study, read_only=read_only, design=design, level=level)

    # ----- the study, read through ----------------------------------------------------------------
    def _attach(self, study: Study) -> None:
        """Make *study* the one this model views, and mirror its metadata."""
        with self._writing(), self.hold_trait_notifications():
            self.study = study
            self._sync()

    def _sync(self) -> None:
        """Refresh the mirrored traits from the study (notifies only the traits whose value changed)."""
        study = self.study
        with self._writing(), self.hold_trait_notifications():
            self.factors = tuple(study.factors)
            self.responses = shown_responses(study)  # a count's trials or exposure column is not shown on its own
            self.units = {name: spec.units for name, spec in study.responses.items()}
            self.models = {name: study.models.get(name, DEFAULT_MODEL) for name in self.responses}
            self.exclusions = self.exclusions_of(study)
            self.revision = study.revision

    def refresh(self) -> bool:
        """Catch up with changes made to the study directly (``shared.study.record(...)``): mirror its
        metadata and refit every response, once. Returns False when the study had not changed.
        Refused when read-only."""
        self._check_writable("refreshing from the study")
        if self.revision == self.study.revision:
            return False
        self._sync()
        self._refit()
        return True

    @staticmethod
    def exclusions_of(study) -> dict:
        """``{run id: reason}`` of the runs a study leaves out of every response."""
        return {int(row.run): row.reason for row in study.exclusions.itertuples() if row.response is None}

    @property
    def data(self) -> pd.DataFrame:
        """The study's runs (index = run id): settings as run, every response, nothing dropped.

        Read from the study (the same object until the study changes); changing it changes nothing.
        """
        key, table = self._table
        if key != (id(self.study), self.study.revision):
            table = self.study.data(apply_exclusions=False)
            self._table = ((id(self.study), self.study.revision), table)
        return table

    @data.setter
    def data(self, value) -> None:
        self.set_data(value)

    # ----- read-only enforcement ----------------------------------------------------------------
    @contextmanager
    def _writing(self):
        """Let the model's own methods change protected traits (never reachable from a browser)."""
        self._internal += 1
        try:
            yield
        finally:
            self._internal -= 1

    @traitlets.validate(*PROTECTED)
    def _refuse_outside_changes(self, proposal):
        name = proposal["trait"].name
        if self.read_only:
            self.error = f"This dashboard is read-only: the {name} cannot be changed."
            raise ReadOnlyError(self.error)
        if name in ("fits", "fit") and not self._internal:
            raise LevelwiseError(f"The '{name}' of a SharedModel is computed; change the data or the models instead.")
        if name in MIRRORS and not self._internal:
            raise LevelwiseError(
                f"The '{name}' of a SharedModel mirrors its study; change it with the model's methods "
                "(set_model, exclude, include, set_data, new_study)."
            )
        return proposal["value"]

    def _check_writable(self, what: str) -> None:
        if self.read_only:
            self.error = f"This dashboard is read-only: {what} is not allowed."
            raise ReadOnlyError(self.error)

    @traitlets.validate("response")
    def _check_response(self, proposal):
        value = proposal["value"]
        if self.responses and value not in self.responses:
            raise LevelwiseError(f"The 'response' must be one of {list(self.responses)}. Got {describe(value)}.")
        return value

    @traitlets.validate("settings")
    def _check_settings(self, proposal):
        value = proposal["value"]
        if not isinstance(value, dict):
            raise LevelwiseError(f"The 'settings' must be a dict of factor name -> number. Got {describe(value)}.")
        by_name = {f.name: f for f in self.factors}
        value, amounts = self._split_blend(value)  # a mixture study's components: checked as one blend
        unknown = sorted(set(value) - set(by_name), key=str)
        if unknown:
            known = sorted(by_name) + self.component_names
            raise LevelwiseError(f"The settings name unknown factor(s) {unknown}; known: {known}.")
        clean = dict(self.settings) if self.settings else {}
        clean.update(self._checked_blend(amounts, clean))
        for name, raw in value.items():
            factor = by_name[name]
            if is_categorical(factor):
                matches = [level for level in factor.levels if level == raw or str(level) == str(raw)]
                if not matches:
                    raise LevelwiseError(
                        f"The setting of {name!r} must be one of its levels {list(factor.levels)}. "
                        f"Got {describe(raw)} instead."
                    )
                clean[name] = matches[0]
                continue
            if isinstance(raw, bool):
                raise LevelwiseError(f"The setting of {name!r} must be a number. Got {raw!r} instead.")
            try:
                number = float(raw)
            except (TypeError, ValueError):
                raise LevelwiseError(f"The setting of {name!r} must be a number. Got {describe(raw)}.") from None
            if not np.isfinite(number):
                raise LevelwiseError(f"The setting of {name!r} must be finite. Got {raw!r} instead.")
            if self.read_only and not factor.low <= number <= factor.high:
                raise ReadOnlyError(
                    f"This dashboard is read-only: the setting of {name!r} must stay in the tested range "
                    f"{factor.low:g} to {factor.high:g}. Got {number!r} instead."
                )
            clean[name] = number
        return clean

    # ----- run ids and reasons ------------------------------------------------------------------
    def run_ids(self) -> np.ndarray:
        """Run id of every row of ``data`` (its index), in the study's order."""
        return self.data.index.to_numpy()

    def _run_id(self, run):
        ids = self.study.run_ids
        if not isinstance(run, bool):
            for candidate in ids:
                if candidate == run:
                    return candidate
        shown = ids if len(ids) <= 12 else ids[:6] + ["..."] + ids[-3:]
        raise LevelwiseError(f"The 'run' must be a run id of the study {shown}. Got {describe(run)} instead.")

    @staticmethod
    def _reason(reason) -> str:
        if not isinstance(reason, str) or not reason.strip():
            raise LevelwiseError(
                f"The 'reason' for an exclusion must be a non-empty text. Got {describe(reason)} instead."
            )
        return reason.strip()

    def _check_response_name(self, response) -> str:
        if response not in self.responses:
            raise LevelwiseError(
                f"The 'response' must be one of {list(self.responses)}. Got {describe(response)} instead."
            )
        return response

    def _study_call(self, what: str, method, *args, **kwargs):
        """Make a change to the study; a refusal is shown in ``error`` and raised, and nothing changes."""
        try:
            return method(*args, **kwargs)
        except LevelwiseError as exc:
            self.error = f"{what}: {exc}"
            raise LevelwiseError(self.error) from None

    # ----- mutations, each usable from a notebook cell --------------------------------------------
    def set_model(self, response_or_model: str, model: str | None = None) -> None:
        """Change a response's model in the study and refit it (refused when read-only).

        ``shared.set_model("Impact", "full_second_order")``; with one argument the displayed
        response's model changes: ``shared.set_model("Oven + Dwell")``. A model the study refuses
        (an unknown factor, say) changes nothing; the message is in ``error``.
        """
        response, model = (self.response, response_or_model) if model is None else (response_or_model, model)
        self._check_writable("changing a model")
        self._check_response_name(response)
        if not isinstance(model, str) or not model.strip():
            raise LevelwiseError(f"The 'model' must be a non-empty formula or preset. Got {describe(model)} instead.")
        try:
            self.study.set_model(response, model.strip())
        except LevelwiseError as exc:
            self.error = f"{response}: {exc}"
            return
        self._sync()
        self._refit([response])

    def set_data(self, data: pd.DataFrame) -> None:
        """Replace the runs by those of *data* (a new study with the same factors, responses and models) and
        refit every response (refused when read-only). Exclusions of runs still present are kept."""
        self._check_writable("changing the data")
        if not isinstance(data, pd.DataFrame):
            raise LevelwiseError(f"The 'data' parameter must be a pandas DataFrame. Got {describe(data)} instead.")
        missing = [name for name in self.responses if name not in data.columns]
        if missing:
            raise LevelwiseError(f"The new data has no column for response(s) {missing}.")
        runs = set(data["run"].tolist()) if "run" in data else set(range(1, len(data) + 1))
        kept = {run: why for run, why in self.exclusions.items() if run in runs}
        study = study_from_table(self.factors, data, self.responses, models=self.models, units=self.units,
                                 exclusions=kept)
        self._attach(study)
        self._refit()

    def exclude(self, run, reason: str) -> None:
        """Leave run *run* out of every fit, for the stated *reason* (refused when read-only).

        The exclusion is recorded in the study; each response's fit loses the run by levelwise's
        rank-one update (``Fit.exclude``). If the kernel refuses (say the run's leverage is 1),
        nothing changes and the error says why.
        """
        self._check_writable("excluding a run")
        run, reason = self._run_id(run), self._reason(reason)
        if run in self.exclusions:
            raise LevelwiseError(f"Run {run!r} is already excluded ({self.exclusions[run]}).")
        fits = dict(self.fits)
        try:
            for name, current in self.fits.items():
                if run in current.runs:
                    fits[name] = current.exclude(run, reason)
        except LevelwiseError as exc:
            self.error = f"Run {run} was not excluded: {exc}"
            raise LevelwiseError(self.error) from None
        self._study_call(f"Run {run} was not excluded", self.study.exclude, run, reason)
        self._sync()
        for name in [name for name in self.responses if name not in self.fits]:  # no current fit: a full try
            try:
                fits[name] = self._fit_one(name)
            except LevelwiseError:
                pass
        self._publish(fits, dict(self.errors), [])

    def include(self, run) -> None:
        """Put an excluded run back into every fit (refused when read-only)."""
        self._check_writable("including a run")
        run = self._run_id(run)
        if run not in self.exclusions:
            raise LevelwiseError(f"Run {run!r} is not excluded; excluded runs: {sorted(self.exclusions, key=str)}.")
        self._study_call(f"Run {run} was not included", self.study.include, run)
        self._sync()
        self._refit()

    def set_settings(self, **settings) -> None:
        """Move some factor settings, e.g. ``shared.set_settings(Oven=195)``."""
        self.settings = {**self.settings, **settings}

    def _on_response(self, change) -> None:
        with self._writing():
            self.fit = self.fits.get(self.response)

    # ----- derived values the views share --------------------------------------------------------
    @property
    def model(self) -> str:
        """Model of the displayed response."""
        return self.models.get(self.response, "")

    @property
    def response_units(self) -> str:
        """Units of the displayed response."""
        return self.units.get(self.response, "")

    def factor(self, name: str) -> Factor:
        """The factor called *name*."""
        for f in self.factors:
            if f.name == name:
                return f
        raise LevelwiseError(f"The factor must be one of {[f.name for f in self.factors]}. Got {describe(name)}.")

    def continuous_factors(self) -> list[Factor]:
        """The factors with a low and a high setting (those a slider or a slice axis can move)."""
        return [f for f in self.factors if not is_categorical(f)]

    def extrapolating(self) -> list[str]:
        """Names of factors whose current setting lies outside the tested range."""
        return [
            f.name for f in self.factors
            if not is_categorical(f) and not f.low <= self.settings[f.name] <= f.high
        ]
