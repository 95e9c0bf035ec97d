"""The effect sliders: one slider per factor, a readout of the prediction, and per-factor traces.

Each trace shows the predicted response against one factor with the others held
at the current settings, with the confidence band for the mean (darker, solid
edge) and the prediction band for a single new run (lighter, dashed edge), and a
marker at the current setting.
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np

from kernel_core import LevelwiseError

from .shared_model import SharedModel
from .style import CI_COLOR, CURRENT_MARKER, MEAN_COLOR, PI_COLOR, WORDS, fmt


def band(mean, half):
    """Lower and upper edges of an interval band, float32 for the wire."""
    return np.vstack([mean - half, mean + half]).astype(np.float32)


class FactorSliders:
    """Sliders, prediction readout and per-factor traces bound to a :class:`SharedModel`.

    Attributes
    ----------
    sliders : dict of str -> ipywidgets.FloatSlider
    readout : ipywidgets.HTML
        The expected mean with its 95% confidence and prediction intervals, in words.
    traces : dict of str -> bqplot.Figure
    widget : ipywidgets.VBox
        The whole view, ready to display.
    """

    points = 50

    def __init__(self, shared: SharedModel):
        self.shared = shared
        self.sliders = {}
        for f in shared.factors:
            slider = ipw.FloatSlider(
                value=shared.settings[f.name],
                min=f.low,
                max=f.high,
                step=(f.high - f.low) / 100.0,
                description=f.label,
                continuous_update=True,
                readout_format=".4g",
                style={"description_width": "initial"},
                layout=ipw.Layout(width="420px"),
            )
            slider.add_class("lw-slider")
            slider.observe(self._on_slider, names="value")
            self.sliders[f.name] = slider
        self.readout = ipw.HTML().add_class("lw-readout")
        self.notice = ipw.HTML().add_class("lw-notice")
        self.y_scale = bq.LinearScale()
        self.traces, self._marks = {}, {}
        for f in shared.factors:
            self.traces[f.name] = self._trace_figure(f)
        self._refresh()
        shared.observe(self._refresh, names=["fit", "settings", "error"])
        self.widget = ipw.VBox(
            [
                ipw.HBox([ipw.VBox(list(self.sliders.values())), ipw.VBox([self.readout, self.notice])]),
                ipw.HBox(list(self.traces.values()), layout=ipw.Layout(flex_flow="row wrap")),
            ]
        ).add_class("lw-factor-sliders")

    def _trace_figure(self, factor):
        x_scale = bq.LinearScale(min=factor.low, max=factor.high)
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
        self._marks[factor.name] = (pi_band, ci_band, mean, marker)
        units = f" ({self.shared.response_units})" if self.shared.response_units else ""
        fig = bq.Figure(
            marks=[pi_band, ci_band, mean, marker],
            axes=[
                bq.Axis(scale=x_scale, label=factor.label, num_ticks=5),
                bq.Axis(scale=self.y_scale, side="left", label=f"{self.shared.response}{units}", num_ticks=5),
            ],
            title=factor.name,
            layout=ipw.Layout(width="300px", height="240px"),
            fig_margin={"top": 30, "bottom": 45, "left": 55, "right": 10},
            animation_duration=0,
        )
        fig.add_class("lw-trace")
        return fig

    def _on_slider(self, change):
        name = next(n for n, s in self.sliders.items() if s is change["owner"])
        try:
            self.shared.set_settings(**{name: change["new"]})
        except LevelwiseError as exc:
            self.shared.error = str(exc)

    def _refresh(self, change=None):
        shared, current_fit = self.shared, self.shared.fit
        for name, slider in self.sliders.items():
            if slider.value != shared.settings[name]:
                slider.value = shared.settings[name]
        units = f" {html.escape(shared.response_units)}" if shared.response_units else ""
        try:
            pred = current_fit.predict(shared.settings).iloc[0]
        except LevelwiseError as exc:
            self.readout.value = f'<div class="lw-error">{html.escape(str(exc))}</div>'
            return
        pct = f"{current_fit.level:.0%}"
        lines = [
            f'<b>{html.escape(shared.response)}</b>',
            f'{WORDS["mean"].capitalize()}: <span class="lw-mean">{fmt(pred["mean"])}</span>{units}',
            f'{pct} {WORDS["ci"]}: <span class="lw-ci">{fmt(pred["ci_low"])} to {fmt(pred["ci_high"])}</span>{units}',
            f'{pct} {WORDS["pi"]}: <span class="lw-pi">{fmt(pred["pi_low"])} to {fmt(pred["pi_high"])}</span>{units}',
        ]
        if shared.error:
            lines.append(f'<div class="lw-error">Last change not applied: {html.escape(shared.error)}</div>')
        self.readout.value = "<br>".join(lines)
        outside = shared.extrapolating()
        self.notice.value = (
            f'<div class="lw-extrapolation">Outside the tested region ({", ".join(map(html.escape, outside))}): '
            "the prediction is an extrapolation and may be badly wrong.</div>"
            if outside else ""
        )
        lows, highs = [], []
        for f in shared.factors:
            tr = current_fit.trace(f.name, shared.settings, points=self.points)
            pi_band, ci_band, mean, marker = self._marks[f.name]
            x = tr["x"].astype(np.float32)
            with pi_band.hold_sync(), ci_band.hold_sync(), mean.hold_sync(), marker.hold_sync():
                pi_band.x, pi_band.y = x, band(tr["mean"], tr["pi_half"])
                ci_band.x, ci_band.y = x, band(tr["mean"], tr["ci_half"])
                mean.x, mean.y = x, tr["mean"].astype(np.float32)
                marker.x = np.array([shared.settings[f.name]], dtype=np.float32)
                marker.y = np.array([pred["mean"]], dtype=np.float32)
            widest = tr["pi_half"] if np.isfinite(tr["pi_half"]).all() else 0.0
            lows.append(np.min(tr["mean"] - widest))
            highs.append(np.max(tr["mean"] + widest))
        low, high = float(min(lows)), float(max(highs))
        pad = 0.05 * (high - low or 1.0)
        self.y_scale.min, self.y_scale.max = low - pad, high + pad

    def close(self):
        self.shared.unobserve(self._refresh, names=["fit", "settings", "error"])
        self.widget.close()
