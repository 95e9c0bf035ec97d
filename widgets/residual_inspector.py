"""The residual inspector: residual plots, influence, and excluding or including runs with a reason.

Every number comes from the displayed response's fit (``Fit.diagnostics``, closed
forms from the QR, and ``Fit.box_cox``). Excluded runs stay visible as hollow grey
squares: on the plots against fitted values, run order and each factor their
residual is the observed value minus the current fit's prediction there.
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError

from . import _count_display as counts
from . import _count_residuals as count_residuals
from . import _residual_text as residual_text
from ._base import View, f32, set_if_changed
from .shared_model import SharedModel, is_categorical
from .style import EXCLUDED_COLOR, HIGHLIGHT_COLOR, OKABE_ITO, RUN_COLOR, fmt

#: Cook's distance levels drawn on the leverage plot (0.5 and 1: common practice).
COOK_LEVELS = (0.5, 1.0)


def cook_contour(level: float, p: int, leverage: np.ndarray) -> np.ndarray:
    """Studentized residual r on the curve D = level, from D = r^2 h / (p (1 - h)) (Cook 1977)."""
    return np.sqrt(level * p * (1.0 - leverage) / leverage)


class ResidualInspector(View):
    """Residual and influence plots of the displayed response, with exclusions.

    Parameters
    ----------
    shared : SharedModel

    Attributes
    ----------
    plot : ipywidgets.Dropdown
        Which plot (``lw-residual-plot-choice``): ``"normal"``, ``"fitted"``, ``"order"``,
        ``"leverage"`` or ``"factor:<name>"``.
    figure : bqplot.Figure
        ``lw-residual-figure``; marks ``used`` (runs in the fit), ``excluded`` (hollow), ``highlight``
        (the chosen run), ``guides`` (reference line or Cook's distance contours).
    run : ipywidgets.Dropdown
        The chosen run (``lw-residual-run``); clicking a point chooses it.
    detail : ipywidgets.HTML
        Settings, response, residual and influence of the chosen run (``lw-run-detail``).
    reason : ipywidgets.Text
        Why the run is left out (``lw-exclude-reason``).
    exclude_button, include_button : ipywidgets.Button
        ``lw-exclude``, ``lw-include``; disabled and hidden when read-only (the shared model refuses anyway).
    excluded_list : ipywidgets.HTML
        The excluded runs with their reasons (``lw-excluded-list``).
    box_cox : ipywidgets.HTML
        The Box–Cox suggestion (``lw-box-cox``).
    widget : ipywidgets.VBox
        The whole view (``lw-residual-inspector``).
    """

    def __init__(self, shared: SharedModel):
        super().__init__(shared)
        options = self._plot_options()
        self.plot = ipw.Dropdown(description="Plot", options=options, value=options[0][1])
        self.plot.add_class("lw-residual-plot-choice")
        self.sx, self.sy = bq.LinearScale(), bq.LinearScale()
        scales = {"x": self.sx, "y": self.sy}
        self.guides = bq.Lines(scales=scales, colors=[OKABE_ITO["bluish_green"]], line_style="dashed",
                               stroke_width=1.5)
        self.used = bq.Scatter(scales=scales, colors=[RUN_COLOR], default_size=40, stroke="white")
        self.excluded = bq.Scatter(scales=scales, colors=[EXCLUDED_COLOR], fill=False, marker="square",
                                   default_size=60)
        self.highlight = bq.Scatter(scales=scales, colors=[HIGHLIGHT_COLOR], fill=False, default_size=160,
                                    stroke_width=2)
        self.used.on_element_click(self.safely(self._on_point))
        self.used.on_hover(self.safely(self._on_point))
        self.excluded.on_element_click(self.safely(self._on_excluded_point))
        self.x_axis = bq.Axis(scale=self.sx, label="", num_ticks=5)
        self.y_axis = bq.Axis(scale=self.sy, side="left", label="", num_ticks=5)
        self.figure = bq.Figure(
            marks=[self.guides, self.used, self.excluded, self.highlight],
            axes=[self.x_axis, self.y_axis],
            layout=ipw.Layout(width="460px", height="360px"),
            fig_margin={"top": 20, "bottom": 50, "left": 60, "right": 20},
            animation_duration=0,
        ).add_class("lw-residual-figure")
        self.run = ipw.Dropdown(description="Run", options=self._run_options()).add_class("lw-residual-run")
        self.detail = ipw.HTML().add_class("lw-run-detail")
        self.reason = ipw.Text(placeholder="Why is this run left out?", description="Reason").add_class(
            "lw-exclude-reason"
        )
        self.exclude_button = ipw.Button(
            description="Leave this run out", icon="", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-exclude")
        self.include_button = ipw.Button(
            description="Put this run back", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-include")
        self.exclude_button.on_click(self.safely(self._on_exclude))
        self.include_button.on_click(self.safely(self._on_include))
        self.excluded_list = ipw.HTML().add_class("lw-excluded-list")
        self.box_cox = ipw.HTML().add_class("lw-box-cox")
        editing = [self.reason, ipw.HBox([self.exclude_button, self.include_button])]
        if shared.read_only:
            for control in (self.reason, self.exclude_button, self.include_button):
                control.disabled = True
                control.layout.display = "none"
        self.widget = ipw.VBox(
            [
                self.plot,
                ipw.HBox([self.figure, ipw.VBox([self.run, self.detail, *editing, self.excluded_list])]),
                self.box_cox,
                self.status,
            ]
        ).add_class("lw-residual-inspector")
        self._run_ids = np.array([])
        self._shown_runs = np.array([])
        self.plot.observe(self.safely(self._redraw), names="value")
        self.run.observe(self.safely(self._show_run), names="value")
        self.watch(self._on_fit, names=["fit", "exclusions", "revision", "response", "error", "factors"])
        self._on_fit()

    # ----- options ------------------------------------------------------------------------------
    def _split_plot(self) -> bool:
        """True when the displayed fit is a split-plot (REML) fit: residuals then come by whole plot."""
        return hasattr(self.shared.fit, "whole_plot_effects")

    def _plot_options(self):
        if counts.family(self.shared.fit):  # a count: deviance and Pearson residuals
            return count_residuals.plot_options(self.shared.factors)
        if self._split_plot():  # no studentized residuals or leverage for a mixed model: the whole plots instead
            return [
                ("Residual by whole plot, with each whole plot's predicted effect", "whole_plot"),
                ("Residual against fitted value", "fitted"),
                ("Residual against run order", "order"),
                *[(f"Residual against {f.label}", f"factor:{f.name}") for f in self.shared.factors],
            ]
        return [
            ("Normal probability of studentized residuals", "normal"),
            ("Residual against fitted value", "fitted"),
            ("Residual against run order", "order"),
            *[(f"Residual against {f.label}", f"factor:{f.name}") for f in self.shared.factors],
            ("Leverage against studentized residual", "leverage"),
        ]

    def _run_options(self):
        return [(f"Run {run}", run) for run in self.shared.run_ids().tolist()]

    # ----- events -------------------------------------------------------------------------------
    def _on_point(self, mark, content):
        index = int(content["data"]["index"])
        self.run.value = self._shown_runs[index]

    def _on_excluded_point(self, mark, content):
        index = int(content["data"]["index"])
        self.run.value = self._excluded_runs[index]

    def _on_exclude(self, button=None):
        try:
            self.shared.exclude(self.run.value, self.reason.value)
        except LevelwiseError as exc:
            self.show_error(str(exc))
            return
        self.reason.value = ""

    def _on_include(self, button=None):
        try:
            self.shared.include(self.run.value)
        except LevelwiseError as exc:
            self.show_error(str(exc))

    def _on_fit(self, change=None):
        options = self._run_options()
        if list(self.run.options) != options:
            keep = self.run.value
            self.run.options = options
            if keep in [v for _, v in options]:
                self.run.value = keep
        plots = self._plot_options()
        if list(self.plot.options) != plots:
            self.plot.options = plots
        self.show_shared_error()
        self._redraw()
        self._show_run()
        self._show_exclusions()
        self._show_box_cox()

    # ----- drawing ------------------------------------------------------------------------------
    def _frames(self):
        """Diagnostics of the fitted runs, and observed-minus-predicted residuals of excluded runs."""
        shared, current = self.shared, self.shared.fit
        glm = counts.family(current) is not None
        diag = count_residuals.frame(current) if glm else current.diagnostics
        used_runs = diag.index.to_numpy()  # the diagnostics are indexed by run id
        mask = shared.excluded_mask()
        excluded_rows = shared.data.loc[mask]
        excluded_rows = excluded_rows[np.isfinite(excluded_rows[shared.response].to_numpy(dtype=float))]
        if glm:
            ex_fitted, ex_resid, self._ex_pearson = count_residuals.excluded(current, excluded_rows)
        elif len(excluded_rows):
            pred = current.predict(excluded_rows[[f.name for f in shared.factors]])
            ex_fitted = pred["mean"].to_numpy()
            ex_resid = excluded_rows[shared.response].to_numpy(dtype=float) - ex_fitted
        else:
            ex_fitted = ex_resid = np.array([])
        ex_runs = np.array(excluded_rows["run"] if "run" in excluded_rows else excluded_rows.index)
        return diag, used_runs, excluded_rows, ex_runs, ex_fitted, ex_resid

    def _redraw(self, change=None):
        current = self.shared.fit
        if current is None:
            self.detail.value = "No fit yet: record some responses first."
            for mark in (self.used, self.excluded, self.highlight, self.guides):
                with mark.hold_sync():
                    set_if_changed(mark, x=f32([]), y=f32([]))
            return
        diag, used_runs, ex_rows, ex_runs, ex_fitted, ex_resid = self._frames()
        self._shown_runs, self._excluded_runs = used_runs, ex_runs
        choice = self.plot.value
        units = self.shared.response_units
        resid_label = f"Residual ({units})" if units else "Residual"
        words = count_residuals.labels(current, counts.units(current, units)) if counts.family(current) else {}
        if words:
            resid_label = words["pearson" if choice == "pearson" else "residual"]
        order_of = dict(zip(self.shared.run_ids().tolist(), range(1, len(self.shared.data) + 1)))
        guides_x = guides_y = np.array([], dtype=np.float32)
        ex_x = ex_y = np.array([])
        if choice == "whole_plot":
            # Marginal residuals (observed - X beta) grouped by whole plot, whole plots in run order at 1, 2, ...;
            # each whole plot's predicted random effect (MixedFit.whole_plot_effects) as a short dashed bar.
            effects = current.whole_plot_effects
            position = {label: k for k, label in enumerate(effects.index, start=1)}
            x = np.array([position[label] for label in diag["whole_plot"]], dtype=float)
            y = diag["residual"].to_numpy()
            if len(ex_runs):
                plot_of = self.shared.study.fit_table(apply_exclusions=False)["whole_plot"]
                ex_x = np.array([position.get(plot_of.loc[r], np.nan) for r in ex_runs], dtype=float)
                ex_y = ex_resid
            bars = [[k - 0.35, k + 0.35, np.nan] for k in position.values()]
            levels = [[v, v, np.nan] for v in effects.to_numpy()]
            guides_x, guides_y = f32(np.concatenate(bars)[:-1]), f32(np.concatenate(levels)[:-1])
            xlabel = (f"Whole plot ({len(position)} whole plots in run order; dashed: predicted whole-plot effect; "
                      f"whole-plot variance {fmt(current.variance_components['whole_plot'])}, residual variance "
                      f"{fmt(current.variance_components['residual'])})")
            ylabel = resid_label
        elif choice == "normal":
            x, y = diag["studentized"].to_numpy(), diag["normal_quantile"].to_numpy()
            finite = np.isfinite(x) & np.isfinite(y)
            lim = float(np.nanmax(np.abs(np.r_[x[finite], y[finite], 1.0])))
            guides_x = guides_y = f32([-lim, lim])
            xlabel, ylabel = words.get("normal", ("Studentized residual", "Normal quantile"))
        elif choice == "leverage":
            x, y = diag["leverage"].to_numpy(), diag["leverage_y" if words else "studentized"].to_numpy()
            h = np.linspace(max(1e-3, float(np.nanmin(x)) * 0.9), min(0.999, float(np.nanmax(x)) * 1.1 + 0.05), 60)
            xs, ys = [], []
            for level in COOK_LEVELS:
                r = cook_contour(level, current.p, h)
                xs += [h, [np.nan], h, [np.nan]]
                ys += [r, [np.nan], -r, [np.nan]]
            # No NaN after the last segment: bqplot places a line's label at its last point.
            guides_x, guides_y = f32(np.concatenate(xs[:-1])), f32(np.concatenate(ys[:-1]))
            xlabel, ylabel = words.get("leverage", ("Leverage", "Studentized residual (dashed: Cook's distance 0.5 "
                                                                  "and 1)"))
        else:
            y = diag["pearson" if choice == "pearson" else "residual"].to_numpy()
            ex_y = self._ex_pearson if choice == "pearson" else ex_resid
            if choice in ("fitted", "pearson"):
                x, ex_x = diag["fitted"].to_numpy(), ex_fitted
                xlabel = words.get("fitted") or (f"Fitted value ({units})" if units else "Fitted value")
            elif choice == "order":
                x = np.array([order_of[r] for r in used_runs], dtype=float)
                ex_x = np.array([order_of[r] for r in ex_runs], dtype=float)
                xlabel = "Run order"
            else:
                name = choice.split(":", 1)[1]
                factor = self.shared.factor(name)
                column = self.shared.data[name]
                if is_categorical(factor):  # levels drawn at 0, 1, 2, ... in the order the factor lists them
                    position = {level: i for i, level in enumerate(factor.levels)}
                    column = column.map(lambda v: position.get(v, position.get(str(v), np.nan)))
                by_run = dict(zip(self.shared.run_ids().tolist(), column.to_numpy(dtype=float)))
                x = np.array([by_run[r] for r in used_runs])
                ex_x = np.array([by_run[r] for r in ex_runs])
                xlabel = factor.label + (
                    " (levels " + ", ".join(f"{i} = {lv}" for i, lv in enumerate(factor.levels)) + ")"
                    if is_categorical(factor) else ""
                )
            ylabel = resid_label
            span = np.r_[x, ex_x] if len(ex_x) else x
            guides_x, guides_y = f32([np.nanmin(span), np.nanmax(span)]), f32([0.0, 0.0])
        with self.used.hold_sync(), self.excluded.hold_sync(), self.guides.hold_sync():
            set_if_changed(self.used, x=f32(x), y=f32(y))
            set_if_changed(self.excluded, x=f32(ex_x), y=f32(ex_y))
            set_if_changed(self.guides, x=guides_x, y=guides_y)
        self._set_ranges(np.r_[x, ex_x], np.r_[y, ex_y], choice)
        self.x_axis.label, self.y_axis.label = xlabel, ylabel
        self._current_xy = (x, y, ex_x, ex_y)
        self._show_highlight()

    def _set_ranges(self, x, y, choice):
        def padded(values):
            values = values[np.isfinite(values)]
            if not values.size:
                return -1.0, 1.0
            low, high = float(values.min()), float(values.max())
            pad = 0.08 * (high - low or 1.0)
            return low - pad, high + pad

        xlo, xhi = padded(x)
        ylo, yhi = padded(y)
        if choice == "leverage":
            xlo, xhi = 0.0, max(xhi, 1e-3)
        with self.sx.hold_sync(), self.sy.hold_sync():
            self.sx.min, self.sx.max, self.sy.min, self.sy.max = xlo, xhi, ylo, yhi

    def _show_highlight(self):
        x, y, ex_x, ex_y = getattr(self, "_current_xy", ([], [], [], []))
        run = self.run.value
        hx, hy = [], []
        if run in list(self._shown_runs):
            i = list(self._shown_runs).index(run)
            hx, hy = [x[i]], [y[i]]
        elif run in list(self._excluded_runs) and len(ex_x):
            i = list(self._excluded_runs).index(run)
            hx, hy = [ex_x[i]], [ex_y[i]]
        with self.highlight.hold_sync():
            set_if_changed(self.highlight, x=f32(hx), y=f32(hy))

    def _show_run(self, change=None):
        shared, current = self.shared, self.shared.fit
        run = self.run.value
        if run is None or current is None:
            self.detail.value = ""
            return
        self._show_highlight()
        row = shared.data.loc[shared.label_of(run)]
        units = shared.response_units
        unit = f" {html.escape(units)}" if units else ""
        settings = ", ".join(
            f"{html.escape(f.name)} = "
            + (html.escape(str(row[f.name])) if is_categorical(f) else fmt(float(row[f.name])))
            + (f" {html.escape(f.units)}" if f.units else "")
            for f in shared.factors
        )
        lines = [f"<b>Run {html.escape(str(run))}</b>: {settings}"]
        observed = float(row[shared.response]) if np.isfinite(float(row[shared.response])) else float("nan")
        lines.append(f"Observed {html.escape(shared.response)}: {fmt(observed)}{unit}")
        if run in shared.exclusions:
            pred = current.predict({f.name: row[f.name] for f in shared.factors}).iloc[0]
            lines.append(
                f'<span class="lw-excluded-mark">Left out of the fit: {html.escape(shared.exclusions[run])}</span>'
            )
            if counts.family(current):  # a count: the predicted pass rate or rate and the run's deviance residual
                _, dev, _ = count_residuals.excluded(current, shared.data.loc[[shared.label_of(run)]])
                shown = counts.units(current, units)
                lines.append(f"Predicted without it: {fmt(pred['mean'] * counts.scale(current))} {shown}; "
                             f"deviance residual: {fmt(dev[0])}")
            else:
                lines.append(f"Predicted without it: {fmt(pred['mean'])}{unit}; "
                             f"observed minus predicted: {fmt(observed - pred['mean'])}{unit}")
        elif run in current.diagnostics.index and counts.family(current):
            lines += count_residuals.detail_lines(current, current.diagnostics.loc[run],
                                                  counts.units(current, units))
        elif run in current.diagnostics.index and self._split_plot():
            d = current.diagnostics.loc[run]
            lines += [
                f"Whole plot: {html.escape(str(d['whole_plot']))}; predicted whole-plot effect: "
                f"{fmt(d['whole_plot_effect'])}{unit}",
                f"Fitted value: {fmt(d['fitted'])}{unit}; residual: {fmt(d['residual'])}{unit}",
                f"Residual within its whole plot (less the whole-plot effect): {fmt(d['conditional_residual'])}"
                f"{unit} ({fmt(d['standardized_conditional'])} residual standard deviations)",
            ]
        elif run in current.diagnostics.index:  # indexed by run id
            d = current.diagnostics.loc[run]
            lines += [
                f"Fitted value: {fmt(d['fitted'])}{unit}; residual: {fmt(d['residual'])}{unit}",
                f"Studentized residual: {fmt(d['studentized'])} (leaving the run out: "
                f"{fmt(d['studentized_external'])})",
                f"Leverage: {fmt(d['leverage'])}; Cook's distance: {fmt(d['cooks_distance'])}; "
                f"DFFITS: {fmt(d['dffits'])}",
            ]
            if bool(d["outlier"]):
                lines.append('<span class="lw-outlier">Flagged as an outlier (Bonferroni t test).</span>')
        else:
            lines.append("No value recorded for this response: the run is not in this fit.")
        self.detail.value = "<br>".join(lines)

    def _show_exclusions(self):
        self.excluded_list.value = residual_text.exclusions_html(self.shared.exclusions)

    def _show_box_cox(self):
        self.box_cox.value = residual_text.box_cox_html(self.shared.fit)

    def export_tables(self) -> dict:
        """The tables for "Export table (CSV, XLSX)": fitted values, residuals and influence per run."""
        from ._view_tables import residual_tables

        return residual_tables(self)
