"""The optimiser view: a goal per response, a desirability search, and "Use these settings".

Goals are the Derringer–Suich desirability goals of :func:`levelwise.optimize`
(maximise, minimise, hit a target; lower limit, target, upper limit; the exponents s and t of the
rising and falling sides; the weight of the response in the overall desirability D). Run calls
:func:`levelwise.optimize` on the shared fits; the result shows the best settings,
each response's prediction with its intervals, the individual desirabilities and
the overall desirability. Goals and runs are explorations: allowed read-only.
"""

from __future__ import annotations

import html

import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError, optimize

from . import _count_display as counts
from ._base import LongTask, View
from ._number import NumberField
from .shared_model import SharedModel
from .style import fmt, inert_html

#: The goal fields in the response's units (a pass rate's are edited in %; s, t and the weight have none).
LIMITS = ("lower_limit", "target", "upper_limit")

GOAL_CHOICES = [("no goal", "none"), ("maximise", "maximize"), ("minimise", "minimize"), ("hit a target", "target")]


#: Editor fields of a goal (Goal's own names) and their labels in plain words.
GOAL_FIELDS = (("lower_limit", "lower limit"), ("target", "target"), ("upper_limit", "upper limit"),
               ("s", "exponent s"), ("t", "exponent t"), ("weight", "weight in D"))


def goal_dict(kind, lower_limit, target, upper_limit, s=1.0, t=1.0, weight=1.0) -> dict:
    """The goal as :func:`levelwise.optimize` reads it: only the fields its kind uses."""
    if kind == "maximize":
        return {"goal": kind, "lower_limit": lower_limit, "target": target, "s": s, "weight": weight}
    if kind == "minimize":
        return {"goal": kind, "target": target, "upper_limit": upper_limit, "t": t, "weight": weight}
    return {"goal": kind, "lower_limit": lower_limit, "target": target, "upper_limit": upper_limit, "s": s, "t": t,
            "weight": weight}


class OptimizerView(View):
    """Goals per response, the desirability search, and moving the sliders to its result.

    Parameters
    ----------
    shared : SharedModel
    starts : int, default 20
        Local searches of :func:`levelwise.optimize`.
    seed : int, optional
        Seed of the search's starting points (repeatable results).

    Attributes
    ----------
    goal_rows : dict of str -> dict of widgets
        Per response: ``kind`` (Dropdown, ``lw-goal-kind``), ``lower_limit``, ``target``, ``upper_limit``
        (NumberField, ``lw-goal-limit``), ``s`` and ``t`` (NumberField, ``lw-goal-exponent``) and ``weight``
        (NumberField, ``lw-goal-weight``: the response's weight in D).
    run_button : ipywidgets.Button
        ``lw-optimize``.
    result : ipywidgets.HTML
        Best settings, predictions with intervals, individual and overall desirability (``lw-optimum``;
        overall D in ``span.lw-overall-desirability``).
    use_button : ipywidgets.Button
        "Use these settings" (``lw-use-optimum``).
    task : LongTask
        Progress of the starts (``lw-search-progress``) and a Stop button (``lw-search-stop``) that keeps the
        best settings found so far; inside a kernel the search runs on a worker thread, so the page stays live.
    optimum : levelwise.optimize.Optimum or None
        The last result.
    widget : ipywidgets.VBox
        The whole view (``lw-optimizer-view``).
    """

    def __init__(self, shared: SharedModel, *, starts: int = 20, seed=None):
        super().__init__(shared)
        self.starts, self.seed = int(starts), seed
        self.optimum = None
        self.goal_rows = {}
        self.goal_box = ipw.VBox().add_class("lw-goals")
        self.run_button = ipw.Button(
            description="Find the best settings", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-optimize")
        self.use_button = ipw.Button(
            description="Use these settings", disabled=True, layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-use-optimum")
        self.result = ipw.HTML().add_class("lw-optimum")
        self.task = LongTask("Starts")
        self.task.widget.add_class("lw-optimizer-progress")
        self.run_button.on_click(self.safely(lambda _: self.run()))
        self.use_button.on_click(self.safely(lambda _: self.use()))
        self.defaults_note = ipw.HTML(f"<i>{html.escape(SharedModel.GOAL_DEFAULTS)}</i>").add_class("lw-goal-defaults")
        self.widget = ipw.VBox(
            [self.defaults_note, self.goal_box, self.run_button, self.task.widget, self.result, self.use_button,
             self.status]
        ).add_class("lw-optimizer-view")
        self._build()
        self.watch(self._build, names=["responses"])
        self.watch(self._on_goals, names=["goals"])
        self.watch(self.show_shared_error, names=["error"])

    # ----- goal editors -------------------------------------------------------------------------
    def _build(self, change=None):
        rows = []
        self.goal_rows = {}
        for response in self.shared.responses:
            k = counts.response_scale(self.shared, response)  # a pass rate is edited in %
            values = counts.observed_means(self.shared, response) * k
            values = values[np.isfinite(values)]
            lo, hi = (float(values.min()), float(values.max())) if values.size else (0.0, 1.0)
            units = "%" if k != 1.0 else self.shared.units.get(response, "")
            unit = f" ({units})" if units else ""
            kind = ipw.Dropdown(options=GOAL_CHOICES, value="none", description=inert_html(f"{response}{unit}"),
                                description_allow_html=True, style={"description_width": "initial"})
            row = {"kind": kind.add_class("lw-goal-kind")}
            start = {"lower_limit": lo, "target": (lo + hi) / 2, "upper_limit": hi}
            for key, label in GOAL_FIELDS:
                row[key] = NumberField(start.get(key, 1.0), description=label,
                                       style={"description_width": "initial"}, layout=ipw.Layout(width="170px"))
            for key in ("lower_limit", "target", "upper_limit"):
                row[key].add_class("lw-goal-limit")
            row["s"].add_class("lw-goal-exponent")
            row["t"].add_class("lw-goal-exponent")
            row["weight"].add_class("lw-goal-weight")
            for control in row.values():
                control.observe(self.safely(self._on_edit), names="value")
            self.goal_rows[response] = row
            rows.append(ipw.HBox(list(row.values())))
        self.goal_box.children = rows
        self._on_goals()

    def goals(self) -> dict:
        """The goals set in the editors, ``{response: goal dict}`` (responses with no goal left out)."""
        out = {}
        for response, row in self.goal_rows.items():
            kind = row["kind"].value
            if kind != "none":  # limits back on the fit's scale (a probability, not %)
                k = counts.response_scale(self.shared, response)
                out[response] = goal_dict(kind, **{key: row[key].value / (k if key in LIMITS else 1.0)
                                                   for key, _ in GOAL_FIELDS})
        return out

    def set_goal(self, response: str, kind: str, *, lower_limit=None, target=None, upper_limit=None, s=1.0, t=1.0,
                 weight=1.0):
        """Set one response's goal from code, e.g. ``view.set_goal("Impact", "maximize", lower_limit=8, target=12)``.

        Limits are on the fit's scale: a pass rate as a probability (``lower_limit=0.9``; the editor shows 90 %).
        """
        if response not in self.goal_rows:
            raise LevelwiseError(f"The response must be one of {list(self.goal_rows)}. Got {response!r}.")
        row = self.goal_rows[response]
        k = counts.response_scale(self.shared, response)
        self._quiet = True
        try:
            for key, value in (("lower_limit", lower_limit), ("target", target), ("upper_limit", upper_limit),
                               ("s", s), ("t", t), ("weight", weight)):
                if value is not None:
                    row[key].value = float(value) * (k if key in LIMITS else 1.0)
            row["kind"].value = kind
        finally:
            self._quiet = False
        self._on_edit()

    def _on_edit(self, change=None):
        if getattr(self, "_quiet", False):
            return
        for response, row in self.goal_rows.items():  # a new kind starts from the data's limits
            if change is not None and change.get("owner") is row["kind"] and change["new"] != "none":
                goal = self.shared.goal_for(response, change["new"])
                if goal is not None:
                    k = counts.response_scale(self.shared, response)
                    self._quiet = True
                    try:
                        for key, _ in GOAL_FIELDS:
                            if key in goal:
                                row[key].value = float(goal[key]) * (k if key in LIMITS else 1.0)
                    finally:
                        self._quiet = False
        self.shared.set_goals(self.goals())

    def _on_goals(self, change=None):
        """Show goals set elsewhere (e.g. from code on the shared model) in the editors."""
        self._quiet = True
        try:
            for response, row in self.goal_rows.items():
                goal = self.shared.goals.get(response)
                if goal is None:
                    row["kind"].value = "none"
                    continue
                k = counts.response_scale(self.shared, response)
                for key, _ in GOAL_FIELDS:
                    if key in goal:
                        row[key].value = float(goal[key]) * (k if key in LIMITS else 1.0)
                row["kind"].value = goal.get("goal", goal.get("kind", "none"))
        finally:
            self._quiet = False

    # ----- the search ---------------------------------------------------------------------------
    def run(self):
        """Search for the settings of highest overall desirability, with progress and a Stop button.

        Returns the Optimum when the search ran at once (no event loop: plain Python, tests), else None; the
        result is shown when the search ends (``task.stop()`` ends it early with the best settings so far).
        """
        goals = self.goals()
        if not goals:
            raise LevelwiseError("Set a goal for at least one response first.")
        missing = [r for r in goals if r not in self.shared.fits]
        if missing:
            raise LevelwiseError(f"No fit for response(s) {missing}: record values or fix the model first.")
        fits, starts, seed = dict(self.shared.fits), self.starts, self.seed
        self.use_button.disabled = True
        self.status.value = ""
        self.task.start(lambda report: optimize(fits, goals, starts=starts, seed=seed, progress=report),
                        self._found)
        return None if self.task.running else self.optimum

    def _found(self, optimum, error) -> None:
        if error is not None:
            self.show_error(str(error) if isinstance(error, LevelwiseError)
                            else f"Internal error in the search: {type(error).__name__}.")
            return
        self.optimum = optimum
        self.use_button.disabled = False
        self._show()
        if getattr(optimum, "stopped", None):
            self.status.value = ('<div class="lw-search-incomplete">The search was stopped: these are the best '
                                 "settings found so far, not necessarily the best there are.</div>")

    def use(self):
        """Move the factor settings (and so every view) to the last optimum."""
        if self.optimum is None:
            raise LevelwiseError("Run the search first.")
        self.shared.settings = {k: v for k, v in self.optimum.settings.items() if k in self.shared.settings}

    def _show(self):
        best = self.optimum
        factors = {f.name: f for f in self.shared.factors}
        settings = "".join(
            f"<li>{html.escape(factors[name].label if name in factors else name)}: "
            f"{html.escape(str(value)) if isinstance(value, str) else fmt(value)}</li>"
            for name, value in best.settings.items()
        )
        by_level = getattr(best, "by_level", None)  # categorical factors: the search at each level combination
        if by_level is not None and len(by_level):
            names = list(getattr(best, "winner", {}))
            items = "".join(
                f"<li>{html.escape(', '.join(f'{n} = {row[n]}' for n in names))}: overall desirability "
                f"{fmt(float(row['overall_D']), 3)}</li>"
                for _, row in by_level.iterrows()
            )
            settings += f'<div class="lw-level-results">Best at each level (best first)<ul>{items}</ul></div>'

        rows = []
        for response, pred in best.predictions.iterrows():
            fitted = self.shared.fits.get(response)
            units = counts.units(fitted, self.shared.units.get(response, ""))
            unit = f" {html.escape(units)}" if units else ""
            d = best.desirability.get(response, float("nan"))
            k = counts.scale(fitted)  # a pass rate in %
            pi = (counts.no_interval_html(fitted) if counts.family(fitted) else
                  f"{fmt(pred['pi_low'])} to {fmt(pred['pi_high'])}{unit}")
            rows.append(
                f"<tr><th>{html.escape(str(response))}</th><td>{fmt(pred['mean'] * k)}{unit}</td>"
                f"<td>{fmt(pred['ci_low'] * k)} to {fmt(pred['ci_high'] * k)}{unit}</td>"
                f"<td>{pi}</td><td>{fmt(d, 3)}</td></tr>"
            )
        self.result.value = (
            f"<b>Best settings found</b><ul>{settings}</ul>"
            '<table class="lw-table"><thead><tr><th>Response</th><th>expected mean</th>'
            "<th>95% confidence interval for the mean</th><th>95% prediction interval for one run</th>"
            "<th>desirability (0 to 1)</th></tr></thead>"
            f"<tbody>{''.join(rows)}</tbody></table>"
            f'Overall desirability: <span class="lw-overall-desirability">{fmt(best.overall, 3)}</span>'
        )

    def export_tables(self) -> dict:
        """The tables for "Export table (CSV, XLSX)": the best settings found."""
        from ._view_tables import optimum_tables

        return optimum_tables(self)
