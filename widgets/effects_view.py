"""The effects view: half-normal plot with Lenth's margins, ranked effects, model terms, ANOVA and coefficients.

Every number comes from levelwise: ``Fit.half_normal``, ``Fit.lenth`` (Lenth 1989),
``Fit.effects``, ``Fit.coefficients`` and ``Fit.anova``. Toggling a term writes a new
formula through :meth:`SharedModel.set_model`, keeping the model hierarchical: adding
a term adds the terms it contains (A and B for A:B), removing one removes the terms
that contain it.
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np
import pandas as pd

from levelwise import LevelwiseError, parse_model
from levelwise.model._reduce import formula_of

from . import _count_display as counts
from . import _count_effects as count_effects
from ._base import View, f32, set_if_changed
from ._label_room import rotated_tick_margins, scale_max_for_labels
from .shared_model import SharedModel
from .style import ACTIVE_COLOR, INACTIVE_COLOR, ME_LINE, OKABE_ITO, SME_LINE, fmt

#: Width of the half-normal plot (px); its labels are kept inside the plot area of this width less margins.
HALF_NORMAL_PX = 420


def table_html(frame: pd.DataFrame, css: str, digits: int = 4) -> str:
    """A plain HTML table of *frame*, numbers to *digits* significant digits, NaN as blank."""

    def cell(value):
        if isinstance(value, (float, np.floating)):
            return "" if not np.isfinite(value) else fmt(float(value), digits)
        return html.escape(str(value))

    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in [frame.index.name or "", *frame.columns])
    body = "".join(
        "<tr>" + f"<th>{html.escape(str(idx))}</th>" + "".join(f"<td>{cell(v)}</td>" for v in row) + "</tr>"
        for idx, row in zip(frame.index, frame.itertuples(index=False))
    )
    return f'<table class="{css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def contains(big, small) -> bool:
    """True when term *small* is a proper part of term *big* (A in A:B, A in A^2)."""
    big, small = np.asarray(big), np.asarray(small)
    return bool(np.all(small <= big) and np.any(small < big))


class EffectsView(View):
    """Effects of the displayed response: half-normal plot, ranked bars, term toggles and tables.

    Parameters
    ----------
    shared : SharedModel
    scope : str, default "two_factor_interactions"
        Preset or formula whose terms are offered as toggles (with the current model's terms).
    alpha : float, default 0.05
        Error rate of Lenth's margins.

    Attributes
    ----------
    half_normal : bqplot.Figure
        ``lw-half-normal``; marks ``hn_points`` (Scatter), ``hn_labels`` (Label, active effects),
        ``me_line`` and ``sme_line`` (Lines at Lenth's ME and SME).
    lenth_text : ipywidgets.HTML
        PSE, ME, SME and the active effects in words (``lw-lenth``).
    measure : ipywidgets.ToggleButtons
        ``"effect"`` (|effect|) or ``"t"`` (|t|) for the ranked chart (``lw-rank-measure``).
    bars : bqplot.Figure
        Ranked bar chart (``lw-ranked-effects``); mark ``bar_mark``.
    term_toggles : dict of str -> ipywidgets.ToggleButton
        One per candidate term (``lw-term-toggle``); value True when the term is in the model.
    model_text : ipywidgets.Text
        The model formula, editable (``lw-model-text``; applied when its value changes).
    anova_table, coefficient_table : ipywidgets.HTML
        ``lw-anova`` and ``lw-coefficients``.
    widget : ipywidgets.VBox
        The whole view (``lw-effects-view``).
    """

    def __init__(self, shared: SharedModel, *, scope: str = "two_factor_interactions", alpha: float = 0.05):
        super().__init__(shared)
        self.scope, self.alpha = scope, float(alpha)
        self.hx, self.hy = bq.LinearScale(min=0.0), bq.LinearScale(min=0.0)
        scales = {"x": self.hx, "y": self.hy}
        self.hn_points = bq.Scatter(scales=scales, colors=[INACTIVE_COLOR], default_size=45, stroke="white")
        self.hn_active = bq.Scatter(scales=scales, colors=[ACTIVE_COLOR], default_size=60, stroke="white")
        self.hn_labels = bq.Label(scales=scales, colors=[OKABE_ITO["black"]], default_size=12, x_offset=6,
                                  y_offset=-4)
        self.me_line = bq.Lines(scales=scales, **ME_LINE)
        self.sme_line = bq.Lines(scales=scales, **SME_LINE)
        self.half_normal = bq.Figure(
            marks=[self.me_line, self.sme_line, self.hn_points, self.hn_active, self.hn_labels],
            axes=[bq.Axis(scale=self.hx, label="|effect|", num_ticks=5),
                  bq.Axis(scale=self.hy, side="left", label="Half-normal quantile", num_ticks=5)],
            layout=ipw.Layout(width=f"{HALF_NORMAL_PX}px", height="340px"),
            fig_margin={"top": 20, "bottom": 50, "left": 60, "right": 20},
            animation_duration=0,
            title="Half-normal plot of the effects",
        ).add_class("lw-half-normal")
        self.lenth_text = ipw.HTML(layout=ipw.Layout(max_width=f"{HALF_NORMAL_PX}px")).add_class("lw-lenth")
        self.basis = ipw.Dropdown(
            description="Effects of",
            options=[("every candidate term (screening)", "scope"), ("the current model", "model")],
            value="scope", layout=ipw.Layout(width="400px"),  # the longest choice is shown whole
        ).add_class("lw-effects-basis")
        self.basis.observe(self.safely(self._redraw_effects), names="value")
        self.measure = ipw.ToggleButtons(options=[("|effect|", "effect"), ("|t|", "t")], value="effect")
        self.measure.add_class("lw-rank-measure")
        self.bx, self.by = bq.OrdinalScale(), bq.LinearScale(min=0.0)
        self.bar_mark = bq.Bars(scales={"x": self.bx, "y": self.by}, colors=[OKABE_ITO["blue"]], padding=0.25)
        self.bar_axis_y = bq.Axis(scale=self.by, side="left", label="|effect|", num_ticks=5)
        self.bars = bq.Figure(
            marks=[self.bar_mark],
            axes=[bq.Axis(scale=self.bx, label="Term", tick_rotate=-35, label_offset="4em"), self.bar_axis_y],
            layout=ipw.Layout(width="460px", height="320px"),
            fig_margin={"top": 20, "bottom": 80, "left": 60, "right": 20},
            animation_duration=0,
            title="Terms ranked",
        ).add_class("lw-ranked-effects")
        self.toggle_box = ipw.HBox(layout=ipw.Layout(flex_flow="row wrap")).add_class("lw-term-toggles")
        self.term_toggles = {}
        self.model_text = ipw.Text(description="Model", continuous_update=False,
                                   layout=ipw.Layout(width="520px")).add_class("lw-model-text")
        self.model_text.observe(self.safely(self._on_model_text), names="value")
        if shared.read_only:
            self.model_text.disabled = True
        self.anova_table = ipw.HTML().add_class("lw-anova")
        self.coefficient_table = ipw.HTML().add_class("lw-coefficients")
        self.widget = ipw.VBox(
            [
                ipw.HBox([
                    ipw.VBox([self.basis, self.half_normal, self.lenth_text]),
                    ipw.VBox([self.measure, self.bars]),
                ], layout=ipw.Layout(flex_flow="row wrap", max_width="100%")),  # side by side where there is room
                ipw.HTML("<b>Terms in the model</b> (a pressed button is in; hierarchy is kept)"),
                self.toggle_box,
                self.model_text,
                ipw.HBox([self.anova_table, self.coefficient_table]),
                self.status,
            ]
        ).add_class("lw-effects-view")
        self.measure.observe(self.safely(self._draw_bars), names="value")
        self.watch(self._on_fit, names=["fit", "fits", "response", "error", "models"])
        self._on_fit()

    # ----- terms --------------------------------------------------------------------------------
    def _candidates(self):
        """Exponent rows and names of every term offered: the current model's, then the scope's new ones."""
        names = [f.name for f in self.shared.factors]
        rows, terms = [], []
        current = self.shared.fit
        specs = ([current.spec] if current is not None else []) + [parse_model(self.scope, names)]
        for spec in specs:
            if list(spec.factor_names) != names:
                continue
            for row, term in zip(spec.exponents, spec.terms):
                if not row.any():
                    continue
                if not any(np.array_equal(row, r) for r in rows):
                    rows.append(np.asarray(row, dtype=int))
                    terms.append(term)
        return rows, terms

    def _build_toggles(self):
        rows, terms = self._candidates()
        current = self.shared.fit
        in_model = set(current.terms) if current is not None else set()
        if list(self.term_toggles) != terms:
            for toggle in self.term_toggles.values():
                toggle.close()
            self.term_toggles = {}
            for term in terms:
                toggle = ipw.ToggleButton(description=term, layout=ipw.Layout(width="auto"))
                toggle.add_class("lw-term-toggle")
                toggle.observe(self.safely(self._on_toggle), names="value")
                self.term_toggles[term] = toggle
            self.toggle_box.children = list(self.term_toggles.values())
        self._rows = dict(zip(terms, rows))
        self._syncing = True
        try:
            for term, toggle in self.term_toggles.items():
                toggle.value = term in in_model
                toggle.disabled = self.shared.read_only
        finally:
            self._syncing = False

    def _on_toggle(self, change):
        if getattr(self, "_syncing", False):
            return
        term = change["owner"].description
        current = self.shared.fit
        chosen = {t for t in (current.terms if current is not None else ()) if t in self._rows}
        row = self._rows[term]
        if change["new"]:
            chosen |= {term} | {t for t, r in self._rows.items() if contains(row, r)}
        else:
            chosen -= {term} | {t for t, r in self._rows.items() if contains(r, row)}
        keep = [self._rows[t] for t in self._rows if t in chosen]
        intercept = current is None or current.spec.has_intercept
        exponents = ([np.zeros(len(self.shared.factors), dtype=int)] if intercept else []) + keep
        names = [f.name for f in self.shared.factors]
        formula = formula_of(exponents, names) if keep else ("1" if intercept else "0")
        try:
            self.shared.set_model(self.shared.response, formula)
        except LevelwiseError as exc:
            self.show_error(str(exc))
            self._build_toggles()  # show the model as it is

    def _on_model_text(self, change):
        if getattr(self, "_syncing", False) or change["new"] == self.shared.model:
            return
        self.claim_shared_errors()  # a typo here is reported here, once
        try:
            self.shared.set_model(self.shared.response, change["new"])
        except LevelwiseError as exc:
            self.show_error(str(exc))
            self._syncing = True
            try:
                self.model_text.value = self.shared.model
            finally:
                self._syncing = False

    # ----- drawing ------------------------------------------------------------------------------
    def _on_fit(self, change=None):
        self.show_shared_error()
        self._syncing = True
        try:
            self.model_text.value = self.shared.model
        finally:
            self._syncing = False
        current = self.shared.fit
        if current is None:
            self.lenth_text.value = "No fit yet: record some responses first."
            return
        self._build_toggles()
        self._draw_half_normal()
        self._draw_bars()
        if counts.family(current):  # a count: likelihood-ratio tests, link-scale coefficients with ratios
            self.anova_table.value = count_effects.anova_html(current)
            self.coefficient_table.value = count_effects.coefficients_html(current)
            return
        self.anova_table.value = "<b>Analysis of variance</b>" + table_html(
            current.anova.rename(columns={"within": "part of", "df": "df", "sum_sq": "sum of squares",
                                          "mean_sq": "mean square", "F": "F", "p_value": "p"}),
            "lw-table lw-anova-table",
        )
        coefficients = current.coefficients.rename(
            columns={"estimate": "estimate (coded)", "std_error": "std. error", "p_value": "p",
                     "ci_low": "95% CI low", "ci_high": "95% CI high", "vif": "VIF"}
        )
        basis = "(coded units: -1 at low, +1 at high)"
        info = getattr(current, "mixture_info", None)
        if info is not None:  # a mixture fit: blending coefficients, no intercept
            basis = ("(blending coefficients over " + ("L-pseudo-components" if info.pseudo else "the proportions "
                     "amount / total") + "; process factors coded -1 to +1; no intercept)")
        self.coefficient_table.value = f"<b>Coefficients</b> {basis}" + table_html(
            coefficients, "lw-table lw-coefficient-table"
        )

    def _redraw_effects(self, change=None):
        self._draw_half_normal()
        self._draw_bars()

    def effects_fit(self):
        """The fit whose effects are drawn: the candidate (scope) model, or the current one.

        Falls back to the current model (saying so) when the scope cannot be fitted, e.g. aliased terms.
        """
        key = (id(self.shared.fit), id(self.shared.exclusions), id(self.shared.data), self.shared.response,
               self.basis.value)
        cached = getattr(self, "_effects_cache", None)
        if cached is not None and cached[0] == key:
            self._basis_note = cached[2]
            return cached[1]
        self._basis_note = ""
        chosen = self.shared.fit
        if self.basis.value == "scope":
            try:
                chosen = self.shared.fit_model(self.scope)
            except LevelwiseError as exc:
                self._basis_note = f"The candidate terms cannot all be estimated ({exc}); showing the current model. "
        self._effects_cache = (key, chosen, self._basis_note)
        return chosen

    def _draw_half_normal(self):
        current = self.effects_fit()
        if current is None:
            return
        if counts.family(current):  # effects at the centre instead of Lenth's method
            for mark in (self.hn_points, self.hn_active, self.hn_labels, self.me_line, self.sme_line):
                with mark.hold_sync():
                    set_if_changed(mark, x=f32([]), y=f32([]))
            self.lenth_text.value = html.escape(self._basis_note) + count_effects.effects_html(current)
            return
        try:
            coords = current.half_normal()
            result = current.lenth(self.alpha)
        except LevelwiseError as exc:
            self.lenth_text.value = f"Half-normal plot and Lenth's method not available: {html.escape(str(exc))}"
            for mark in (self.hn_points, self.hn_active, self.hn_labels, self.me_line, self.sme_line):
                with mark.hold_sync():
                    set_if_changed(mark, x=f32([]), y=f32([]))
            return
        active = coords["term"].isin(result.active).to_numpy()
        x, y = coords["abs_effect"].to_numpy(), coords["quantile"].to_numpy()
        top = float(y.max()) * 1.1 if len(y) else 1.0
        with self.hn_points.hold_sync(), self.hn_active.hold_sync(), self.hn_labels.hold_sync():
            set_if_changed(self.hn_points, x=f32(x[~active]), y=f32(y[~active]))
            set_if_changed(self.hn_active, x=f32(x[active]), y=f32(y[active]))
            set_if_changed(self.hn_labels, x=f32(x[active]), y=f32(y[active]))
            self.hn_labels.text = list(coords["term"][active])
        with self.me_line.hold_sync(), self.sme_line.hold_sync():
            set_if_changed(self.me_line, x=f32([result.me, result.me]), y=f32([0.0, top]))
            set_if_changed(self.sme_line, x=f32([result.sme, result.sme]), y=f32([0.0, top]))
        with self.hx.hold_sync(), self.hy.hold_sync():
            margin = self.half_normal.fig_margin
            plot_px = HALF_NORMAL_PX - margin["left"] - margin["right"]
            floor = float(max(x.max(initial=0.0), result.sme)) * 1.15 or 1.0
            # Room on the right for the labels of the active effects: each label stays inside the plot.
            self.hx.min, self.hx.max = 0.0, scale_max_for_labels(x[active], coords["term"][active], plot_px,
                                                                 floor=floor)
            self.hy.min, self.hy.max = 0.0, top
        units = self.shared.response_units
        unit = f" {html.escape(units)}" if units else ""
        names = ", ".join(map(html.escape, result.active)) or "none"
        self.lenth_text.value = html.escape(self._basis_note) + (
            f"Lenth's pseudo standard error {fmt(result.pse)}{unit}; margin of error (ME, dashed) "
            f"{fmt(result.me)}{unit}; simultaneous margin (SME, dash-dot) {fmt(result.sme)}{unit}. "
            f'Active effects (|effect| &gt; ME): <span class="lw-active-effects">{names}</span>.'
        )

    def _draw_bars(self, change=None):
        current = self.effects_fit()
        if current is None:
            return
        if counts.family(current):
            values, label = count_effects.bars(current, self.measure.value)
        elif self.measure.value == "effect" and getattr(current, "mixture_info", None) is None:
            values = current.effects.abs()
            label = "|effect|"
        else:  # |t| (a mixture model's coefficients are not effects)
            t = current.coefficients["t"].drop(index="Intercept", errors="ignore")
            values = t.abs()
            label = "|t|"
        values = values[np.isfinite(values.to_numpy(dtype=float))].sort_values(ascending=False)
        margins = rotated_tick_margins(values.index, 35.0)  # rotated term names stay inside the figure
        margin = {"top": 20, **margins}
        if margin != self.bars.fig_margin:
            self.bars.fig_margin = margin
            self.bars.layout.height = f"{240 + margin['bottom']}px"
        with self.bar_mark.hold_sync():
            self.bar_mark.x = list(values.index)
            self.bar_mark.y = f32(values.to_numpy())
        self.bar_axis_y.label = label

    def export_tables(self) -> dict:
        """The tables for "Export table (CSV, XLSX)": the ANOVA and the coefficients."""
        from ._view_tables import effects_tables

        return effects_tables(self)
