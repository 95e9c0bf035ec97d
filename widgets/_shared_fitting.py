"""Which study a :class:`~levelwise.widgets.SharedModel` shows, and its refits (one new fits dict per refit)."""

from __future__ import annotations

import numpy as np

from levelwise import Design, Factor, LevelwiseError, Study
from levelwise._errors import describe

from ._count_display import shown_responses
from ._shared_mixture import default_blend
from ._study_table import DEFAULT_MODEL


def is_categorical(factor: Factor) -> bool:
    """True for a factor with named levels (levelwise ``Factor(name, levels=[...])``)."""
    return bool(getattr(factor, "is_categorical", False))


def default_setting(factor: Factor):
    """Where a factor starts: its centre, or the first level of a categorical factor."""
    return factor.levels[0] if is_categorical(factor) else factor.center


class FittingMixin:
    """Switching studies and refitting (mixed into ``SharedModel``, which owns the traits and the writing guard)."""

    def use_study(self, study: Study) -> None:
        """Switch to another study (a loaded file or an imported table): every view follows at once.

        Refused when read-only.
        """
        self._check_writable("switching the study")
        if not isinstance(study, Study):
            raise LevelwiseError(f"The 'study' must be a levelwise Study. Got {describe(study)} instead.")
        if not study.response_names:
            raise LevelwiseError("The study has no responses yet: add one with study.add_response(name, units).")
        with self._writing(), self.hold_trait_notifications():
            self.fits = {}
            self.fit = None
            self.design = None
            self.goals = {}
            self.error = ""
            self._attach(study)
            self.response = shown_responses(study)[0]
            self.settings = {f.name: default_setting(f) for f in study.factors} | default_blend(study)
        self._refit()
        self.goals = self.study_goals()

    def new_study(self, design: Design, responses, *, models=None) -> None:
        """Replace the whole study by a fresh one on *design* with blank responses.

        *responses* maps each response name to its units (or is a list of names).
        Refused when read-only.
        """
        self._check_writable("creating a study")
        if not isinstance(design, Design):
            raise LevelwiseError(f"The 'design' parameter must be a levelwise Design. Got {describe(design)}.")
        units = dict(responses) if isinstance(responses, dict) else {name: "" for name in responses}
        if not units:
            raise LevelwiseError("A new study needs at least one response name.")
        names = tuple(units)
        clashes = [n for n in names if n in design.table.columns]
        if clashes or any(not isinstance(n, str) or not n.strip() for n in names):
            raise LevelwiseError(
                f"Response names must be non-empty and differ from the run-sheet columns. Got {list(names)}."
            )
        study = Study(list(design.factors))
        study.add_stage("design", design)
        for name in names:
            study.add_response(name, units=str(units[name]))
            study.set_model(name, (models or {}).get(name, DEFAULT_MODEL))
        with self._writing(), self.hold_trait_notifications():
            self.fits = {}
            self.fit = None
            self.design = design
            self.goals = {}
            self._attach(study)
            self.response = names[0]
            self.settings = {f.name: default_setting(f) for f in design.factors}
        self._refit()
        self.goals = self.study_goals()

    # ----- refitting ----------------------------------------------------------------------------
    def excluded_mask(self) -> np.ndarray:
        """True for every row of ``data`` whose run is excluded from every response."""
        if not self.exclusions:
            return np.zeros(len(self.data), dtype=bool)
        return np.isin(self.run_ids(), np.array(list(self.exclusions)))

    def label_of(self, run):
        """The row label of ``data`` for run id *run*: the run id itself (``data`` is indexed by run id)."""
        if run not in self.data.index:
            raise LevelwiseError(f"The run id {run!r} must name a run of the study.")
        return run

    def _exclusions_for(self, name: str) -> list:
        """(run id, reason) of every exclusion that applies to response *name*."""
        return [(int(row.run), row.reason) for row in self.study.exclusions.itertuples()
                if row.response is None or row.response == name]

    def _fit_one(self, name: str, model: str | None = None):
        """Fit one response on every run of the study, then leave the excluded runs out by the kernel's update."""
        model = self.models[name] if model is None else model
        # The study's fit: a split-plot study (runs with whole plots) gets the REML fit (MixedFit).
        result = self.study.fit(name, model, level=self.level, apply_exclusions=False)
        for run, reason in self._exclusions_for(name):
            if run in result.runs:  # a run with no value for this response is not in its fit
                result = result.exclude(run, reason)
        return result

    def fit_model(self, model: str, response: str | None = None):
        """A fresh kernel fit of *model* for *response* (default: displayed) on the current runs.

        Nothing in the shared model changes (allowed read-only): views use it to look at a
        candidate model, e.g. every two-factor interaction for a half-normal plot.
        """
        name = self._check_response_name(self.response if response is None else response)
        return self._fit_one(name, model)

    def _refit(self, responses=None) -> None:
        """New fits for *responses* (default all); a failure keeps that response's last good fit."""
        targets = list(self.responses) if responses is None else list(responses)
        fits, errors = dict(self.fits), dict(self.errors)
        for name in targets:
            try:
                fits[name] = self._fit_one(name)
            except LevelwiseError as exc:
                errors[name] = f"{name}: {exc}"
            else:
                errors.pop(name, None)
        self._publish(fits, errors, targets)

    def _publish(self, fits, errors, targets) -> None:
        """Replace ``fits`` (one notification) and ``fit`` when the displayed response's fit changed."""
        with self._writing(), self.hold_trait_notifications():
            self.errors = errors
            self.error = next((errors[name] for name in targets if name in errors), "")
            self.fits = {name: fits[name] for name in self.responses if name in fits}
            shown = self.fits.get(self.response)
            if shown is not self.fit:
                self.fit = shown
