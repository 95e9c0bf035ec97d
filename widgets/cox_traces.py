"""Effect traces along the Cox directions (Cox 1971): one curve per component on one common axis.

From the current blend (the reference), component i moves while the others keep their relative proportions. Every
component's curve is drawn against the *change in that component's proportion from the reference blend* (0 at the
reference), over the amounts the bounds allow, with the confidence band for the mean (darker, solid edge) and the
prediction band for a single new run (lighter, dashed edge). Every number comes from one ``Fit.refresh`` call per
event (the mixture fit's engine, :func:`levelwise.cox_traces`).
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np

from ._base import View, f32, set_if_changed
from .factor_sliders import band
from .shared_model import SharedModel
from .style import CURRENT_MARKER, OKABE_ITO, WORDS

#: One colour per component (Okabe & Ito 2008), repeated past eight components.
COMPONENT_COLORS = [OKABE_ITO[k] for k in ("blue", "vermillion", "bluish_green", "reddish_purple", "orange",
                                            "sky_blue", "black", "yellow")]
AXIS_LABEL = "change in proportion from the reference blend"


class CoxTraces(View):
    """Cox-direction effect traces of the displayed response, one curve per component, with CI and PI bands.

    Attributes
    ----------
    figure : bqplot.Figure
        ``lw-cox-traces``; per component a mean curve (``means[name]``), a CI band and a PI band.
    caption : ipywidgets.HTML
        ``lw-cox-caption``: what is drawn, in words.
    widget : ipywidgets.VBox
        The whole view (``lw-cox-view``).
    """

    def __init__(self, shared: SharedModel, *, points: int = 50):
        super().__init__(shared)
        self.points = int(points)
        self.sx, self.sy = bq.LinearScale(), bq.LinearScale()
        self.x_axis = bq.Axis(scale=self.sx, label=AXIS_LABEL, num_ticks=7)
        self.y_axis = bq.Axis(scale=self.sy, side="left", label="", num_ticks=5)
        self.marker = bq.Scatter(scales={"x": self.sx, "y": self.sy}, **CURRENT_MARKER)
        self.figure = bq.Figure(axes=[self.x_axis, self.y_axis], layout=ipw.Layout(width="560px", height="380px"),
                                fig_margin={"top": 20, "bottom": 50, "left": 60, "right": 20},
                                legend_location="top-right", animation_duration=0).add_class("lw-cox-traces")
        self.caption = ipw.HTML().add_class("lw-cox-caption")
        self.widget = ipw.VBox([self.figure, self.caption, self.status]).add_class("lw-cox-view")
        self.means, self.ci_bands, self.pi_bands, self.curves = {}, {}, {}, {}
        self._build()
        self.watch(self._build, names=["study"])
        self.watch(self._refresh, names=["fits", "fit", "settings", "response", "error"])

    def _build(self, change=None):
        names = self.shared.component_names
        scales = {"x": self.sx, "y": self.sy}
        self.means, self.ci_bands, self.pi_bands = {}, {}, {}
        marks = []
        for i, name in enumerate(names):
            color = COMPONENT_COLORS[i % len(COMPONENT_COLORS)]
            self.pi_bands[name] = bq.Lines(scales=scales, fill="between", colors=[color, color], fill_colors=[color],
                                           fill_opacities=[0.06], line_style="dashed", stroke_width=1,
                                           opacities=[0.6, 0.6])
            self.ci_bands[name] = bq.Lines(scales=scales, fill="between", colors=[color, color], fill_colors=[color],
                                           fill_opacities=[0.18], stroke_width=1, opacities=[0.8, 0.8])
            self.means[name] = bq.Lines(scales=scales, colors=[color], stroke_width=2.5, labels=[name],
                                        display_legend=True)
            marks += [self.pi_bands[name], self.ci_bands[name], self.means[name]]
        self.figure.marks = marks + [self.marker]
        self._refresh()

    def _refresh(self, change=None):
        shared = self.shared
        self.show_shared_error()
        current = shared.fit
        if shared.mixture is None:
            self.caption.value = ("<p>This study has no mixture components: Cox-direction traces apply to blends. "
                                  "The factor sliders draw each factor's trace.</p>")
            return
        if current is None:
            self.caption.value = "No fit to draw yet: record some responses first."
            return
        result = current.refresh(shared.settings, points=self.points)
        self.curves = {name: result["traces"][name] for name in shared.component_names}
        lows, highs = [], []
        for name, tr in self.curves.items():
            x = f32(tr["x"])
            with self.pi_bands[name].hold_sync(), self.ci_bands[name].hold_sync(), self.means[name].hold_sync():
                set_if_changed(self.pi_bands[name], x=x, y=band(tr["mean"], tr["pi_half"]))
                set_if_changed(self.ci_bands[name], x=x, y=band(tr["mean"], tr["ci_half"]))
                set_if_changed(self.means[name], x=x, y=f32(tr["mean"]))
            if len(tr["mean"]):
                widest = tr["pi_half"] if np.isfinite(tr["pi_half"]).all() else 0.0
                lows.append(float(np.min(tr["mean"] - widest)))
                highs.append(float(np.max(tr["mean"] + widest)))
        with self.marker.hold_sync():
            set_if_changed(self.marker, x=f32([0.0]), y=f32([result["point"]["mean"]]))
        if lows:
            low, high = min(lows), max(highs)
            pad = 0.05 * (high - low or 1.0)
            with self.sy.hold_sync():
                self.sy.min, self.sy.max = low - pad, high + pad
        units = shared.response_units
        self.y_axis.label = f"{shared.response} ({units})" if units else shared.response
        level = f"{current.level:.0%}"
        self.caption.value = (
            f"<b>{html.escape(shared.response)}</b>: {WORDS['mean']} as each component moves from the current blend "
            "(the diamond) while the others keep their relative proportions (the Cox direction), against the "
            f"{AXIS_LABEL}. Dark band, solid edge: {level} {WORDS['ci']}; light band, dashed edge: {level} "
            f"{WORDS['pi']}. Each curve "
            "spans the amounts the bounds allow."
        )
