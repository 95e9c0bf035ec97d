"""The effect sliders: one slider per factor, a readout per response, and per-factor traces.

Each trace shows the predicted response against one factor with the others held
at the current settings, with the confidence band for the mean (darker, solid
edge) and the prediction band for a single new run (lighter, dashed edge), and a
marker at the current setting. Every number comes from one ``Fit.refresh`` call
per response and event (levelwise's interactive path: the point prediction and
every factor's trace, without DataFrames).
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError

from . import _count_display as counts
from ._base import Coalescer, View, f32, set_if_changed, snapped_echo
from .shared_model import SharedModel, is_categorical
from .style import CI_COLOR, CURRENT_MARKER, MEAN_COLOR, OKABE_ITO, PI_COLOR, WORDS, fmt, inert_html

#: Colours of the per-level curves (Okabe & Ito 2008, without the mean curve's blue and the band's orange).
SERIES = [OKABE_ITO[k] for k in ("vermillion", "bluish_green", "reddish_purple", "sky_blue", "black", "yellow")]


def band(mean, half):
    """Lower and upper edges of an interval band, float32 for the wire."""
    return np.vstack([mean - half, mean + half]).astype(np.float32)


def readout_html(shared: SharedModel, response: str, pred, level: float, fit=None) -> str:
    """The prediction of one response in words and units (a count fit: a percentage or a rate, its transformed
    confidence interval, and why no prediction interval is given)."""
    units = counts.units(fit, shared.units.get(response, ""))
    unit = f" {html.escape(units)}" if units else ""
    pct = f"{level:.0%}"
    k = counts.scale(fit)
    pi = (counts.no_interval_html(fit) if counts.family(fit) else
          f'<span class="lw-pi">{fmt(pred["pi_low"])} to {fmt(pred["pi_high"])}</span>{unit}')
    return "<br>".join(
        [
            f"<b>{html.escape(response)}</b>",
            f'{counts.quantity(fit).capitalize()}: <span class="lw-mean">{fmt(pred["mean"] * k)}</span>{unit}',
            f'{pct} {WORDS["ci"]}: <span class="lw-ci">{fmt(pred["ci_low"] * k)} to {fmt(pred["ci_high"] * k)}'
            f'</span>{unit}',
            f'{pct} {WORDS["pi"]}: {pi}',
        ]
    )


class FactorSliders(View):
    """Sliders, prediction readout and per-factor traces bound to a :class:`SharedModel`.

    Parameters
    ----------
    shared : SharedModel
    points : int, default 50
        Points per trace.

    Attributes
    ----------
    sliders : dict of str -> ipywidgets.FloatSlider or ipywidgets.Dropdown
        One per factor (CSS class ``lw-slider``), bounded to the factor's tested range; a categorical
        factor gets a Dropdown of its levels (``lw-level-choice``) and no trace.
    readout : ipywidgets.HTML
        Per response: the expected mean with its 95% confidence and prediction intervals, in words
        (CSS ``lw-readout``; spans ``lw-mean``, ``lw-ci``, ``lw-pi``).
    response_choice : ipywidgets.Dropdown
        Which response the traces (and every view) display (``lw-response-choice``); allowed read-only.
    notice : ipywidgets.HTML
        The extrapolation notice (``lw-notice``; contains ``lw-extrapolation`` when outside the region).
    traces : dict of str -> bqplot.Figure
        Per factor, the displayed response against that factor (``lw-trace``).
    level_curves : ipywidgets.Dropdown
        ``lw-trace-levels``: a categorical factor whose every level gets its own mean curve in each trace
        (``None``: only the level chosen on its control); shown when the study has categorical factors.
    level_marks : dict of str -> bqplot.Lines
        Per continuous factor, the per-level mean curves (one row of ``y`` per level, ``labels`` the levels).
    widget : ipywidgets.VBox
        The whole view (``lw-factor-sliders``).
    """

    def __init__(self, shared: SharedModel, *, points: int = 50):
        super().__init__(shared)
        self.points = int(points)
        # Slider values arriving in a burst (a drag, or a client flooding the kernel) are applied once,
        # the latest value of each slider winning; with no event loop (plain Python) they apply at once.
        self._pending: dict = {}
        self._slider_coalescer = Coalescer(self.safely(self._apply_pending), delay=0.01)
        self._trace_coalescer = Coalescer(self.safely(self._draw_traces))
        self.readout = ipw.HTML().add_class("lw-readout")
        self.notice = ipw.HTML().add_class("lw-notice")
        self.slider_box = ipw.VBox().add_class("lw-slider-box")
        self.trace_box = ipw.HBox(layout=ipw.Layout(flex_flow="row wrap")).add_class("lw-trace-box")
        self.response_choice = ipw.Dropdown(
            description="Response shown in every view", options=list(shared.responses), value=shared.response,
            style={"description_width": "initial"},
        ).add_class("lw-response-choice")
        self.response_choice.observe(self.safely(self._on_response_choice), names="value")
        self.level_curves = ipw.Dropdown(description="A curve per level of", options=[("(chosen level only)", None)],
                                         value=None, style={"description_width": "initial"})
        self.level_curves.add_class("lw-trace-levels")
        self.level_curves.observe(self.safely(self._refresh), names="value")
        self.y_scale = bq.LinearScale()
        self.widget = ipw.VBox(
            [
                ipw.HBox([self.slider_box, ipw.VBox([self.readout, self.notice, self.status])]),
                ipw.HBox([self.response_choice, self.level_curves]),
                self.trace_box,
            ]
        ).add_class("lw-factor-sliders")
        self._build()
        self.watch(self._build, names="factors")
        self.watch(self._refresh, names=["fits", "fit", "settings", "response", "error"])

    # ----- construction -------------------------------------------------------------------------
    def _build(self, change=None):
        for old in getattr(self, "sliders", {}).values():
            old.close()
        self.sliders, self.traces, self._marks, self._y_axes, self.level_marks = {}, {}, {}, [], {}
        for f in self.shared.factors:
            if is_categorical(f):
                choice = ipw.Dropdown(options=list(f.levels), value=self.shared.settings[f.name],
                                      description=inert_html(f.label), description_allow_html=True,
                                      style={"description_width": "initial"})
                choice.add_class("lw-level-choice")
                choice.observe(self.safely(self._on_slider), names="value")
                self.sliders[f.name] = choice
                continue
            slider = ipw.FloatSlider(
                value=self.shared.settings[f.name],
                min=f.low,
                max=f.high,
                step=(f.high - f.low) / 100.0,
                description=inert_html(f.label),  # plain text: never typeset as math, never markup
                description_allow_html=True,
                continuous_update=True,
                readout_format=".4g",
                style={"description_width": "initial"},
                layout=ipw.Layout(width="420px"),
            )
            slider.add_class("lw-slider")
            slider.observe(self.safely(self._on_slider), names="value")
            slider.observe(self.safely(self._keep_bounds), names=["min", "max"])
            self.sliders[f.name] = slider
            self.traces[f.name] = self._trace_figure(f)
        note = []
        if getattr(self.shared, "is_mixture", False):
            note = [ipw.HTML("<p>The blend of this mixture study is set with the mixture sliders; these sliders "
                             "move its process factors only.</p>").add_class("lw-mixture-note")]
        self.slider_box.children = note + list(self.sliders.values())
        self.trace_box.children = list(self.traces.values())
        categorical = [f.name for f in self.shared.factors if is_categorical(f)]
        self.level_curves.options = [("(chosen level only)", None)] + [(n, n) for n in categorical]
        self.level_curves.layout.display = "" if categorical else "none"
        self._refresh()

    def _trace_figure(self, factor):
        x_scale = bq.LinearScale(min=factor.low, max=factor.high)  # continuous factors only
        scales = {"x": x_scale, "y": self.y_scale}
        pi_band = bq.Lines(
            scales=scales, fill="between", colors=[PI_COLOR, PI_COLOR], fill_colors=[PI_COLOR],
            fill_opacities=[0.18], line_style="dashed", stroke_width=1,
        )
        ci_band = bq.Lines(
            scales=scales, fill="between", colors=[CI_COLOR, CI_COLOR], fill_colors=[CI_COLOR],
            fill_opacities=[0.30], stroke_width=1,
        )
        mean = bq.Lines(scales=scales, colors=[MEAN_COLOR], stroke_width=2.5)
        marker = bq.Scatter(scales=scales, **CURRENT_MARKER)
        per_level = bq.Lines(scales=scales, colors=SERIES, stroke_width=1.5, display_legend=True, visible=False)
        self._marks[factor.name] = (pi_band, ci_band, mean, marker)
        self.level_marks[factor.name] = per_level
        y_axis = bq.Axis(scale=self.y_scale, side="left", label=self._y_label(), num_ticks=5)
        self._y_axes.append(y_axis)
        fig = bq.Figure(
            marks=[pi_band, ci_band, mean, per_level, marker],
            axes=[bq.Axis(scale=x_scale, label=factor.label, num_ticks=5), y_axis],
            title=factor.name,
            layout=ipw.Layout(width="300px", height="240px"),
            fig_margin={"top": 30, "bottom": 45, "left": 55, "right": 10},
            animation_duration=0,
        )
        fig.add_class("lw-trace")
        return fig

    def _y_label(self) -> str:
        units = counts.units(self.shared.fit, self.shared.response_units)
        return f"{self.shared.response} ({units})" if units else self.shared.response

    # ----- browser -> kernel ----------------------------------------------------------------------
    def _on_slider(self, change):
        if getattr(self, "_restoring", False):
            return
        name = next(n for n, s in self.sliders.items() if s is change["owner"])
        if snapped_echo(change["owner"], change["new"], self.shared.settings.get(name)):
            self._pending.pop(name, None)  # back where the kernel has it: no move, and none pending
            return
        self._pending[name] = (change["owner"], change["new"])
        self._slider_coalescer.request()

    def _apply_pending(self):
        pending, self._pending = self._pending, {}
        if not pending:
            return
        try:
            self.shared.set_settings(**{name: value for name, (_, value) in pending.items()})
        except LevelwiseError as exc:
            self.shared.error = str(exc)
            for name, (owner, _) in pending.items():
                owner.value = self.shared.settings[name]  # the model is unchanged: show it

    def _on_response_choice(self, change):
        if change["new"] in self.shared.responses and change["new"] != self.shared.response:
            self.shared.response = change["new"]  # a display choice: allowed read-only

    def _keep_bounds(self, change):
        """A slider's range is the factor's tested range, whatever a browser sends."""
        slider = change["owner"]
        name = next(n for n, s in self.sliders.items() if s is slider)
        factor = self.shared.factor(name)
        if (slider.min, slider.max) != (factor.low, factor.high):
            self._restoring = True  # a clamp caused by restoring the range is not a user's move
            try:
                slider.min, slider.max = factor.low, factor.high
                slider.value = min(max(self.shared.settings[name], factor.low), factor.high)
            finally:
                self._restoring = False

    # ----- kernel -> browser ----------------------------------------------------------------------
    def _refresh(self, change=None):
        shared = self.shared
        self.show_shared_error()
        if list(self.response_choice.options) != list(shared.responses):
            self.response_choice.options = list(shared.responses)
        if self.response_choice.value != shared.response:
            self.response_choice.value = shared.response
        for name, slider in self.sliders.items():
            if slider.value != shared.settings[name]:
                slider.value = shared.settings[name]
        blocks, shown = [], None
        for response in shared.responses:
            current = shared.fits.get(response)
            if current is None:
                blocks.append(f"<b>{html.escape(response)}</b>: no fit yet (no recorded values or the model failed).")
                continue
            # One kernel call per response and event (Fit.refresh: no DataFrames); the displayed
            # response's call also brings every factor's trace.
            with_traces = current is shared.fit
            result = current.refresh(shared.settings, points=self.points if with_traces else None)
            if with_traces:
                shown = result
            blocks.append(readout_html(shared, response, result["point"], current.level, current)
                          + (counts.note_html(current) if with_traces else ""))
        self.readout.value = "<hr>".join(blocks)
        outside = shared.extrapolating()
        self.notice.value = (
            f'<div class="lw-extrapolation">Outside the tested region ({", ".join(map(html.escape, outside))}): '
            "the prediction is an extrapolation and may be badly wrong.</div>"
            if outside else ""
        )
        for axis in self._y_axes:
            axis.label = self._y_label()
        # The readout is on its way; the traces follow, coalesced: a burst of events pushes the marks once,
        # with the latest settings (their arrays are most of an event's messages and of the browser's work).
        self._shown = (shared.fit, shown, dict(shared.settings))
        self._trace_coalescer.request()

    def flush(self) -> None:
        """Apply pending slider values and draw pending traces now (inside a running event loop both wait a
        few milliseconds; code that reads the marks' arrays right after a change calls this first)."""
        self._slider_coalescer.flush()
        self._trace_coalescer.flush()

    def _draw_traces(self):
        current, shown, settings = getattr(self, "_shown", (None, None, None))
        if current is None or current is not self.shared.fit:
            return
        if shown is None:
            shown = current.refresh(settings, points=self.points)
        mean_here = shown["point"]["mean"] * counts.scale(current)
        lows, highs = [], []
        curves = shown["traces"]  # every factor's curve, from the same kernel call
        for f in self.shared.factors:
            if f.name not in self._marks:
                continue
            tr = curves[f.name]
            pi_band, ci_band, mean, marker = self._marks[f.name]
            x = f32(tr["x"])
            # Shown units (a probability as a percentage); a count's CI is transformed, so not symmetric.
            centre, ci_low, ci_high, pi_low, pi_high = counts.bands(current, tr)
            with pi_band.hold_sync(), ci_band.hold_sync(), mean.hold_sync(), marker.hold_sync():
                pi_band.visible = pi_low is not None  # no prediction interval for a count
                if pi_low is not None:
                    set_if_changed(pi_band, x=x, y=np.vstack([pi_low, pi_high]).astype(np.float32))
                set_if_changed(ci_band, x=x, y=np.vstack([ci_low, ci_high]).astype(np.float32))
                set_if_changed(mean, x=x, y=f32(centre))
                set_if_changed(marker, x=f32([settings[f.name]]), y=f32([mean_here]))
            wide = pi_low is not None and np.isfinite(pi_low).all() and np.isfinite(pi_high).all()
            low_edge, high_edge = (pi_low, pi_high) if wide else (ci_low, ci_high)
            finite = np.isfinite(low_edge) & np.isfinite(high_edge)
            lows.append(np.min(np.where(finite, low_edge, centre)))
            highs.append(np.max(np.where(finite, high_edge, centre)))
        self._draw_level_curves(current, curves, lows, highs, settings)
        if lows:
            self._fit_y_scale(float(min(lows)), float(max(highs)))

    def _fit_y_scale(self, low: float, high: float) -> None:
        """Show [low, high] with a margin. The scale is kept while every band fits inside it and fills at least
        half of it: a new range makes every mark of every trace redraw in the browser, so it is not sent for
        each small move of a slider."""
        pad = 0.05 * (high - low or 1.0)
        old_low, old_high = self.y_scale.min, self.y_scale.max
        if old_low is not None and old_high is not None and old_low <= low and high <= old_high \
                and (high - low) >= 0.5 * (old_high - old_low) and np.isfinite([old_low, old_high]).all():
            return
        with self.y_scale.hold_sync():
            self.y_scale.min, self.y_scale.max = low - pad, high + pad

    def _draw_level_curves(self, current, curves, lows, highs, settings):
        """One mean curve per level of the chosen categorical factor, from one ``Fit.refresh`` per level."""
        name = self.level_curves.value
        factor = next((f for f in self.shared.factors if f.name == name), None)
        if factor is None or current is None or name not in (getattr(current, "categories", None) or {}):
            for mark in self.level_marks.values():
                mark.visible = False
            return
        levels = list(current.categories[name])
        per_level = [current.refresh({**settings, name: level}, points=self.points, point=False)["traces"]
                     for level in levels]
        for fname, mark in self.level_marks.items():
            x = f32(curves[fname]["x"])
            y = np.vstack([traces[fname]["mean"] for traces in per_level]) * counts.scale(current)
            with mark.hold_sync():
                set_if_changed(mark, x=x, y=y.astype(np.float32))
                mark.labels = [str(level) for level in levels]
                mark.colors = [SERIES[i % len(SERIES)] for i in range(len(levels))]
                mark.visible = True
            lows.append(float(np.min(y)))
            highs.append(float(np.max(y)))

    def export_tables(self) -> dict:
        """The tables for "Export table (CSV, XLSX)": the predictions at the current settings."""
        from ._view_tables import prediction_tables

        return prediction_tables(self)
