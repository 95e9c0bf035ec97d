"""Composition of the read-only stakeholder dashboard (used by ``present.ipynb``).

The page shows one study, read-only: the study in words, the caution banner, the effect
sliders with their traces, the surface slice, the predictions and the optimum, as far as
those views exist in :mod:`widgets`. Read-only is enforced by the shared model in Python
(``read_only=True``): nothing a browser sends can change the data, the models or the
exclusions. The page carries no control that would try.
"""

from __future__ import annotations

import html
import json

import ipywidgets as ipw

import widgets

from .study_source import StudySource, open_study, shared_model
from .summary import CAUTION, fingerprint, fit_numbers, summary_html

#: Views composed into the stakeholder page when :mod:`widgets` provides them, in page order.
#: Each is built read-only on the shared model; mutating views (design builder, residual
#: inspector, effects toggles) are deliberately absent.
READ_ONLY_VIEWS = ("SurfaceSlice", "PredictionsView", "OptimiserView")


def current_fits(shared) -> dict:
    """``{response: Fit}`` of a shared model (one- or many-response)."""
    fits = getattr(shared, "fits", None)
    if fits:
        return dict(fits)
    return {shared.response: shared.fit} if shared.fit is not None else {}


def _state_of(shared) -> tuple:
    models = dict(getattr(shared, "models", {}) or {}) or {shared.response: getattr(shared, "model", "")}
    exclusions = dict(getattr(shared, "exclusions", {}) or {})
    return shared.data, models, exclusions


class StudyReadout:
    """The study summary in words plus the fingerprint line, kept in step with the shared model."""

    def __init__(self, source: StudySource, shared):
        self.source, self.shared = source, shared
        self.summary = ipw.HTML().add_class("lw-summary")
        self.fingerprint = ipw.HTML().add_class("lw-fingerprint")
        self.refresh()
        shared.observe(self.refresh, names=[n for n in ("fit", "fits", "data", "exclusions") if shared.has_trait(n)])
        self.widget = ipw.VBox([self.summary, self.fingerprint])

    def refresh(self, change=None):
        fits = current_fits(self.shared)
        self.summary.value = summary_html(self.source, fits)
        data, models, exclusions = _state_of(self.shared)
        numbers = {name: fit_numbers(f) for name, f in fits.items()}
        self.fingerprint.value = (
            f'<span class="lw-fp" data-fits="{html.escape(json.dumps(numbers))}">'
            f"Study fingerprint {fingerprint(data, models, exclusions)}</span>"
        )


def build(source=None) -> ipw.VBox:
    """The read-only stakeholder page for *source* (a path, ``"demo"``, or None: see :func:`open_study`)."""
    source = source if isinstance(source, StudySource) else open_study(source)
    shared = shared_model(source, read_only=True)
    title = ipw.HTML(f"<h2>{html.escape(source.title)}</h2>").add_class("lw-title")
    banner = ipw.HTML(f'<div class="lw-caution">{CAUTION}</div>').add_class("lw-banner")
    readout = StudyReadout(source, shared)
    children = [title, banner, readout.widget]
    views = [readout]
    if len(source.responses) > 1 and shared.has_trait("responses"):
        chooser = ipw.ToggleButtons(options=list(source.responses), value=shared.response,
                                    description="Response shown").add_class("lw-response-choice")
        chooser.observe(lambda change: setattr(shared, "response", change["new"]), names="value")
        children.append(chooser)
    sliders = widgets.FactorSliders(shared)
    children.append(sliders.widget)
    views.append(sliders)
    for name in READ_ONLY_VIEWS:
        view_class = getattr(widgets, name, None)
        if view_class is not None:
            view = view_class(shared)
            children.append(view.widget)
            views.append(view)
    page = ipw.VBox(children).add_class("lw-present")
    page.shared, page.views, page.source = shared, views, source
    return page
