"""The mixture sliders: one slider per component (and per process factor) and the prediction readout.

Moving a component's slider moves the blend along that component's Cox direction (Cox 1971): the other components
keep their relative proportions, so the blend always sums to the total (``SharedModel.move_component``, which calls
:func:`levelwise.move_component`). Each slider spans the amounts the bounds allow (the implied bounds), and the
declared bounds are written beside it. The readout comes from one ``Fit.refresh`` call per response and event
(the mixture fit's engine). A study without components says so in words.
"""

from __future__ import annotations

import html

import ipywidgets as ipw

from levelwise import LevelwiseError

from ._base import Coalescer, View, snapped_echo
from .factor_sliders import readout_html
from .shared_model import SharedModel
from .style import fmt, inert_html


class MixtureSliders(View):
    """Component sliders (Cox-direction moves), process-factor sliders and the readout, bound to a SharedModel.

    Attributes
    ----------
    sliders : dict of str -> ipywidgets.FloatSlider
        One per component (``lw-mix-slider``) and per process factor (``lw-slider``).
    bounds : dict of str -> ipywidgets.HTML
        The declared bounds of each component, in words (``lw-mix-bounds``).
    total : ipywidgets.HTML
        The blend's sum and the mixture total (``lw-mix-total``).
    readout : ipywidgets.HTML
        ``lw-readout`` with spans ``lw-mean``, ``lw-ci``, ``lw-pi`` per response.
    notice : ipywidgets.HTML
        ``lw-notice``; ``div.lw-extrapolation`` when the blend lies beyond the runs' leverage.
    widget : ipywidgets.VBox
        The whole view (``lw-mixture-sliders``).
    """

    def __init__(self, shared: SharedModel):
        super().__init__(shared)
        self._pending: dict = {}
        self._coalescer = Coalescer(self.safely(self._apply_pending), delay=0.01)
        self.readout = ipw.HTML().add_class("lw-readout")
        self.notice = ipw.HTML().add_class("lw-notice")
        self.total = ipw.HTML().add_class("lw-mix-total")
        self.slider_box = ipw.VBox().add_class("lw-slider-box")
        self.widget = ipw.VBox([ipw.HBox([ipw.VBox([self.slider_box, self.total]),
                                          ipw.VBox([self.readout, self.notice, self.status])])])
        self.widget.add_class("lw-mixture-sliders")
        self.sliders, self.bounds = {}, {}
        self._build()
        self.watch(self._build, names=["study", "factors"])
        self.watch(self._refresh, names=["fits", "fit", "settings", "response", "error"])

    # ----- construction -------------------------------------------------------------------------
    def _build(self, change=None):
        for old in self.sliders.values():
            old.close()
        self.sliders, self.bounds = {}, {}
        mixture = self.shared.mixture
        if mixture is None:
            self.slider_box.children = [ipw.HTML("<p>This study has no mixture components: its factors are moved "
                                                  "by the factor sliders.</p>").add_class("lw-not-mixture")]
            self.readout.value = self.total.value = ""
            return
        rows = []
        units = {c.name: c.units for c in mixture.components}
        for i, c in enumerate(mixture.components):
            low, high = float(mixture.lows[i]), float(mixture.highs[i])
            slider = self._slider(c.label, self.shared.settings[c.name], low, high).add_class("lw-mix-slider")
            unit = f" {html.escape(units[c.name])}" if units[c.name] else ""
            declared = (f"bounds {fmt(float(mixture.declared_lows[i]))} to {fmt(float(mixture.declared_highs[i]))}"
                        f"{unit}")
            if (low, high) != (float(mixture.declared_lows[i]), float(mixture.declared_highs[i])):
                declared += f" (reachable {fmt(low)} to {fmt(high)} with the others' bounds)"
            self.bounds[c.name] = ipw.HTML(declared).add_class("lw-mix-bounds")
            self.sliders[c.name] = slider
            rows.append(ipw.HBox([slider, self.bounds[c.name]]))
        for f in self.shared.continuous_factors():
            slider = self._slider(f.label, self.shared.settings[f.name], f.low, f.high).add_class("lw-slider")
            self.sliders[f.name] = slider
            rows.append(slider)
        self.slider_box.children = rows
        self._refresh()

    def _slider(self, label, value, low, high):
        slider = ipw.FloatSlider(value=value, min=low, max=high, step=(high - low) / 200.0,
                                 description=inert_html(label), description_allow_html=True,
                                 continuous_update=True, readout_format=".4g",
                                 style={"description_width": "initial"}, layout=ipw.Layout(width="420px"))
        slider.observe(self.safely(self._on_slider), names="value")
        return slider

    # ----- browser -> kernel ----------------------------------------------------------------------
    def _on_slider(self, change):
        if getattr(self, "_restoring", False):
            return
        name = next(n for n, s in self.sliders.items() if s is change["owner"])
        if snapped_echo(change["owner"], change["new"], self.shared.settings.get(name)):
            self._pending.pop(name, None)  # back where the kernel has it: no move, and none pending
            return
        self._pending[name] = change["new"]
        self._coalescer.request()

    def _apply_pending(self):
        pending, self._pending = self._pending, {}
        components = set(self.shared.component_names)
        try:
            for name, value in pending.items():
                if name in components:
                    self.shared.move_component(name, float(value))
                else:
                    self.shared.set_settings(**{name: value})
        except LevelwiseError as exc:
            self.shared.error = str(exc)
        self._show_settings()

    def move(self, component: str, amount: float) -> None:
        """Move *component*'s slider to *amount* as a browser would (the others follow the Cox direction)."""
        self.sliders[component].value = amount
        self._coalescer.flush()

    # ----- kernel -> browser ----------------------------------------------------------------------
    def _show_settings(self):
        self._restoring = True
        try:
            for name, slider in self.sliders.items():
                value = self.shared.settings.get(name)
                if value is not None and slider.value != value:
                    slider.value = min(max(value, slider.min), slider.max)
        finally:
            self._restoring = False

    def _refresh(self, change=None):
        shared = self.shared
        self.show_shared_error()
        mixture = shared.mixture
        if mixture is None:
            return
        self._show_settings()
        blend = shared.blend()
        unit = mixture.components[0].units
        self.total.value = (f"Blend total: {fmt(sum(blend.values()))}{' ' + html.escape(unit) if unit else ''} "
                            f"(every blend sums to {fmt(mixture.total)}; moving one component rescales the others "
                            "in proportion)")
        blocks, outside = [], False
        for response in shared.responses:
            current = shared.fits.get(response)
            if current is None:
                blocks.append(f"<b>{html.escape(response)}</b>: no fit yet (no recorded values or the model failed).")
                continue
            point = current.refresh(shared.settings, points=None)["point"]
            outside = outside or (current is shared.fit and point["extrapolated"])
            blocks.append(readout_html(shared, response, point, current.level))
        self.readout.value = "<hr>".join(blocks)
        self.notice.value = (
            '<div class="lw-extrapolation">This blend lies outside the region the runs support (its leverage '
            "exceeds every run's): the prediction is an extrapolation and may be badly wrong.</div>"
            if outside else ""
        )
