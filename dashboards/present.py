"""Composition of the read-only stakeholder dashboard (used by ``present.ipynb``).

The page shows one study, read-only: the study in words, the caution banner, the effect
sliders with their traces, the surface slice, the predictions and the optimum, as far as
those views exist in :mod:`levelwise.widgets`. Read-only is enforced by the shared model in Python
(``read_only=True``): nothing a browser sends can change the data, the models or the
exclusions. The page carries no control that would try.
"""

from __future__ import annotations

import html
import json
import re

import ipywidgets as ipw

from levelwise import LevelwiseError, Study
from levelwise.widgets.style import NO_MATH, wrapped_html

from . import stored_optimum
from ._compose import find_view
from .kernel_guard import guard_kernel, log_line
from .study_source import goals_of, open_study, shared_model, study_path, title_of
from .summary import caution_html, fingerprint, fit_numbers, summary_html

#: The views of the stakeholder page, in page order (the workbench's mutating views, the design
#: builder, the residual inspector and the effects view with its term toggles, are deliberately absent).
READ_ONLY_VIEWS = ("FactorSliders", "SurfaceSlice", "PredictionsView", "OptimizerView")
#: The same page for a mixture study: the blend's sliders, its Cox-direction traces and the ternary slice.
MIXTURE_VIEWS = ("MixtureSliders", "CoxTraces", "TernarySlice", "PredictionsView", "OptimizerView")


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


class ShownHTML(ipw.HTML):
    """An HTML widget the page only shows: value updates arriving from a browser are ignored.

    A client can send any widget state (see the stack notes); for text the kernel owns, such as
    the study summary and its fingerprint, there is no legitimate update from the browser.
    """

    def set_state(self, sync_data):
        return None


class StudyReadout:
    """The study summary in words plus the fingerprint line, kept in step with the shared model."""

    def __init__(self, shared):
        self.shared = shared
        self.summary = ShownHTML().add_class("lw-summary")
        self.fingerprint = ShownHTML().add_class("lw-fingerprint")
        self.refresh()
        shared.observe(self.refresh, names=["fit", "fits", "revision", "exclusions"])
        self.widget = ipw.VBox([self.summary, self.fingerprint])

    def refresh(self, change=None):
        fits = current_fits(self.shared)
        self.summary.value = summary_html(self.shared, fits)
        data, models, exclusions = _state_of(self.shared)
        numbers = {name: fit_numbers(f) for name, f in fits.items()}
        self.fingerprint.value = (
            f'<span class="lw-fp" data-fits="{html.escape(json.dumps(numbers))}">'
            f"Study fingerprint {fingerprint(data, models, exclusions)}</span>"
        )


def study_goals(shared) -> dict:
    """The optimiser's goals from the study's recorded goals, limits from the observed range of each response."""
    goals = {}
    for name, spec in goals_of(shared.study).items():
        kind = (spec or {}).get("goal", "none")
        if kind not in ("maximize", "minimize", "target") or name not in shared.data:
            continue
        if getattr(shared.study.responses[name], "family", None):  # a pass rate or rate: its stored limits, or
            goal = shared.study_goals().get(name)  # the range of the runs' pass rates (not of the counts)
            if goal:
                goals[name] = {k: goal[k] for k in ("lower_limit", "target", "upper_limit") if k in goal} | {
                    "kind": kind}
            continue
        values = shared.data[name].to_numpy(dtype=float)
        values = values[values == values]
        if values.size < 2 or values.min() == values.max():
            continue
        low, high = float(values.min()), float(values.max())
        target = float(spec["target"]) if kind == "target" and spec.get("target") is not None else None
        goals[name] = {
            "maximize": {"lower_limit": low, "target": high},
            "minimize": {"target": low, "upper_limit": high},
            "target": {"lower_limit": low, "target": target, "upper_limit": high},
        }[kind] | {"kind": kind}
    return goals


def set_study_goals(view) -> bool:
    """Give an optimiser view the study's recorded goals; False when the study records none."""
    goals = study_goals(view.shared)
    if not goals:
        return False
    for response, goal in goals.items():
        kind = goal.pop("kind")
        if kind == "target" and goal.get("target") is None:
            continue
        view.set_goal(response, kind, **goal)
    return True


def _read_only_part(name: str, view, study_file=None):
    """The part of a view a stakeholder sees: no editors, only what shows the study and moves the settings.

    *study_file*: the published study file, beside which ``levelwise publish`` stored the optimum
    (:mod:`.stored_optimum`); the page searches only when no stored optimum matches.
    """
    if name == "PredictionsView":
        # Adding the current settings as a row is a viewer's note, not a change to the study.
        return ipw.VBox([view.add_button, view.table, view.download]).add_class("lw-predictions-view")
    if name == "OptimizerView":
        heading = ShownHTML("<h3>Best settings for the study's goals</h3>")
        if not set_study_goals(view):
            return ipw.VBox([heading, ShownHTML("<p>The study records no goals to optimise.</p>")])
        stored = stored_optimum.read(study_file, view) if study_file is not None else None
        try:
            if stored is not None:
                view._found(stored, None)
            else:
                view.run()
        except Exception as exc:  # the page shows why, it never fails to render
            return ipw.VBox([heading, ShownHTML(f"<p>No optimum: {html.escape(str(exc))}</p>")])
        return ipw.VBox([heading, view.result, view.use_button]).add_class("lw-optimizer-view")
    return view.widget


def widget_closure(root) -> dict:
    """Every widget *root* shows or refers to (children, layouts, styles, figures' marks, scales and axes...),
    by model id: the widget models a browser showing *root* needs."""
    found, todo = {}, [root]
    while todo:
        item = todo.pop()
        if isinstance(item, ipw.Widget):
            if item.comm is None or item.model_id in found:
                continue
            found[item.model_id] = item
            todo.extend(getattr(item, name, None) for name in item.keys)
        elif isinstance(item, (list, tuple)):
            todo.extend(item)
        elif isinstance(item, dict):
            todo.extend(item.values())
    return found


def close_unshown(page, views) -> int:
    """Close the widgets of *views* that the read-only *page* does not show (the optimiser's goal editors, the
    predictions' editors...): a browser opening the page then creates only the models it shows (about 220 of
    540 on the demo page), and nothing it cannot see is sent to it. Returns how many were closed."""
    shown = widget_closure(page)
    closed = 0
    for view in views:
        full = getattr(view, "widget", None)
        if not isinstance(full, ipw.Widget):
            continue
        for model_id, widget in widget_closure(full).items():
            if model_id not in shown:
                widget.close()
                closed += 1
    return closed


_QUOTED_PATH = re.compile(r"""(['"])(?:[A-Za-z]:)?[/\\][^'"]*?([^/\\'"]*)\1""")
_BARE_PATH = re.compile(r"""(?<![\w.:])(?:[A-Za-z]:)?[/\\](?:[^\s'"/\\]+[/\\])*([^\s'"/\\]*)""")


def without_paths(text: str) -> str:
    """*text* with every absolute path cut to its last part (a viewer never sees where the server keeps files).

    Examples
    --------
    >>> without_paths("The study file '/srv/plant 3/study.json' does not exist.")
    "The study file 'study.json' does not exist."
    >>> without_paths("[Errno 13] Permission denied: /srv/data/study.json")
    '[Errno 13] Permission denied: study.json'
    """
    text = _QUOTED_PATH.sub(lambda m: m.group(1) + m.group(2) + m.group(1), text)
    return _BARE_PATH.sub(lambda m: m.group(1) or "(folder)", text)


def unavailable(exc) -> ipw.VBox:
    """The page shown when the study cannot be read: the reason without server paths, and the caution.

    The full reason goes to the server's log.
    """
    log_line(f"the dashboard cannot show its study: {exc}")
    message = ShownHTML(
        f'<h2>This dashboard cannot show its study</h2><div class="lw-error">{html.escape(without_paths(str(exc)))}'
        "</div>"
    ).add_class("lw-unavailable")
    page = ipw.VBox([message, ShownHTML(caution_html())]).add_class("lw-present").add_class(NO_MATH)
    page.shared, page.views, page.study = None, [], None
    return page


def build(source=None) -> ipw.VBox:
    """The read-only stakeholder page for *source* (a Study, a path, ``"demo"``, or None: see :func:`open_study`)."""
    guard_kernel()
    try:
        study = source if isinstance(source, Study) else open_study(source)
        study_file = None if isinstance(source, Study) else study_path(source)
        shared = shared_model(study, read_only=True)
    except (LevelwiseError, OSError) as exc:  # the page says what is wrong; it never shows a traceback
        return unavailable(exc)
    title = ShownHTML(wrapped_html(title_of(study), "h2")).add_class("lw-title")
    banner = ShownHTML(caution_html()).add_class("lw-banner")
    readout = StudyReadout(shared)
    children = [title, banner, readout.widget]
    views = [readout]
    if len(shared.responses) > 1:
        chooser = ipw.ToggleButtons(options=list(shared.responses), value=shared.response,
                                    description="Response shown").add_class("lw-response-choice")
        chooser.observe(lambda change: setattr(shared, "response", change["new"]), names="value")
        children.append(chooser)
    for name in MIXTURE_VIEWS if getattr(shared, "is_mixture", False) else READ_ONLY_VIEWS:
        view_class = find_view(name)
        if view_class is None:
            continue
        view = view_class(shared)
        views.append(view)
        children.append(_read_only_part(name, view, study_file))
    page = ipw.VBox(children).add_class("lw-present").add_class(NO_MATH)  # no text on the page is typeset
    close_unshown(page, views)
    page.shared, page.views, page.study = shared, views, study
    return page
