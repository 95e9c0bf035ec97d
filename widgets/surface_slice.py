"""The response-surface slice: two axis factors, the others held at the current settings.

The predicted mean (or the CI half-width, the PI half-width, or the overall
desirability) is drawn as a canvas ``bqplot.HeatMap`` with contour lines computed
by ``contourpy`` and drawn as one ``Lines`` mark (NaN-separated segments). The
design points are projected onto the slice; the current setting carries the same
marker as in every view. Clicking the slice sets the two axis factors.

Grids come from one ``Fit.refresh`` call per redraw (exact separable polynomial
evaluation). Refreshes are coalesced: a burst of slider events redraws once, with
the latest settings, and a change of the axis factors' own settings only moves the
marker (the slice itself does not depend on them).
"""

from __future__ import annotations

import html

import bqplot as bq
import contourpy
import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError
from levelwise.model._optimize import as_goal, overall_desirability

from . import _count_display as counts
from ._base import Coalescer, View, click_catcher, click_through, f32, set_if_changed, take_click
from .shared_model import SharedModel
from .style import (
    CIVIDIS,
    CONTOUR_COLOR,
    CURRENT_MARKER,
    DESIGN_POINT_COLOR,
    EXCLUDED_COLOR,
    SURFACE_QUANTITIES,
)

#: What the surface slice says for a mixture study (whose components cannot vary two at a time).
MIXTURE_NOTE = ("<p>A surface slice varies two factors independently; the components of a mixture study always sum "
                "to the total, so they are drawn by the ternary slice instead.</p>")

#: Grid points per axis that a click on the slice snaps to (the nearest one).
CLICK_GRID = 41



#: The largest colour code; the codes 0..CODES span the quantity's finite range, CODES + 1 marks a cell that is
#: not finite (drawn beyond the colour map's end, and decoded as NaN).
CODES = 254


def quantise(z) -> tuple[np.ndarray, float, float]:
    """*z* as uint8 codes 0..CODES over its finite range [low, high] (CODES + 1 where not finite)."""
    z = np.asarray(z, dtype=float)
    finite = np.isfinite(z)
    if not finite.any():
        return np.full(z.shape, CODES + 1, np.uint8), 0.0, 1.0
    low, high = float(z[finite].min()), float(z[finite].max())
    span = high - low
    codes = np.zeros(z.shape) if span <= 0 else np.rint((np.where(finite, z, low) - low) / span * CODES)
    codes = codes.astype(np.uint8)
    codes[~finite] = CODES + 1
    return codes, low, (high if span > 0 else low + 1.0)


def decode(codes, low: float, high: float) -> np.ndarray:
    """The values that uint8 *codes* from :func:`quantise` stand for (NaN for the not-finite code)."""
    codes = np.asarray(codes)
    values = low + codes.astype(float) / CODES * (high - low)
    return np.where(codes > CODES, np.nan, values)


def contour_paths(x, y, z, levels):
    """Contour lines of *z* on the grid *x*, *y* as NaN-separated x/y arrays, via contourpy.

    Also returns, per level, a label position (the midpoint of its longest segment) or None.
    """
    # On a fine grid every other point is enough for the lines of a smooth fitted surface (the linear
    # interpolation between grid points moves them by far less than a pixel), and it halves their bytes.
    z = np.asanyarray(z)  # a masked array stays masked
    step = 3 if min(z.shape) >= 90 else 2 if min(z.shape) >= 60 else 1
    x, y, z = np.asarray(x)[::step], np.asarray(y)[::step], z[::step, ::step]
    generator = contourpy.contour_generator(x, y, z, line_type=contourpy.LineType.ChunkCombinedNan)
    xs, ys, labels = [], [], []
    for level in levels:
        chunks = [c for c in generator.lines(level)[0] if c is not None and len(c)]
        points = np.concatenate(chunks) if chunks else None
        if points is None:
            labels.append(None)
            continue
        xs.extend([points[:, 0], [np.nan]])
        ys.extend([points[:, 1], [np.nan]])
        finite = points[np.isfinite(points).all(axis=1)]
        middle = finite[len(finite) // 2] if len(finite) else points[0]
        labels.append((float(middle[0]), float(middle[1])) if np.all(np.isfinite(middle)) else None)
    if not xs:
        return np.array([], dtype=np.float32), np.array([], dtype=np.float32), labels
    # No NaN after the last segment: bqplot places a line's label at its last point.
    return (drawn(np.concatenate(xs[:-1]), float(np.min(x)), float(np.max(x))),
            drawn(np.concatenate(ys[:-1]), float(np.min(y)), float(np.max(y))), labels)


def drawn(values, low: float, high: float) -> np.ndarray:
    """float32 coordinates on an axis from *low* to *high*, their mantissa cut to what a drawing needs.

    The low mantissa bits are zeroed so that at most 2^-12 of the axis range (a quarter of a pixel on a
    1000-pixel axis) is lost; the zero bytes cost almost nothing once the websocket deflates the message.
    """
    values = np.asarray(values, dtype=np.float32)
    span = high - low
    if not (np.isfinite(span) and span > 0):
        return values
    top = max(abs(low), abs(high))
    bits = int(np.clip(12 + np.ceil(np.log2(top / span)) + 1, 10, 23))  # + 1: the rounding of the cut
    mask = np.uint32((0xFFFFFFFF << (23 - bits)) & 0xFFFFFFFF)
    return (values.view(np.uint32) & mask).view(np.float32)


class SurfaceSlice(View):
    """A two-factor slice of the displayed response's fitted surface.

    Parameters
    ----------
    shared : SharedModel
    x, y : str, optional
        The axis factors (default: the first two factors).
    shape : (int, int), default (100, 100)
        Grid points along x and y.
    contours : int, default 8
        Number of contour levels.

    Attributes
    ----------
    x_factor, y_factor : ipywidgets.Dropdown
        Axis factors (``lw-slice-x``, ``lw-slice-y``); a display choice, allowed read-only.
    quantity : ipywidgets.ToggleButtons
        ``mean``, ``ci_half``, ``pi_half`` or ``desirability`` (``lw-slice-quantity``); the overall
        desirability uses the shared model's ``goals`` (levelwise ``Goal`` and ``overall_desirability``).
    figure : bqplot.Figure
        ``lw-slice``: ``heatmap`` (HeatMap), ``contour_lines`` (Lines), ``contour_labels`` (Label),
        ``points`` (design points, Scatter), ``marker`` (current setting), ``clicks`` (the click catcher: an
        empty Scatter in bqplot's "add" mode; a click on the plot area adds one point there, and the kernel
        moves the two axis factors to the nearest of ``CLICK_GRID`` x ``CLICK_GRID`` grid points and clears it).
    widget : ipywidgets.VBox
        The whole view (``lw-surface-slice``).
    """

    def __init__(self, shared: SharedModel, *, x=None, y=None, shape=(100, 100), contours=8):
        super().__init__(shared)
        self.shape = tuple(int(v) for v in shape)
        self.n_contours = int(contours)
        if getattr(shared, "is_mixture", False):  # a blend is drawn by the ternary slice: say so, draw nothing
            self.caption = ipw.HTML(MIXTURE_NOTE).add_class("lw-slice-caption")
            self.widget = ipw.VBox([self.caption, self.status]).add_class("lw-surface-slice")
            return
        names = [f.name for f in shared.continuous_factors()]
        if len(names) < 2:
            raise LevelwiseError(f"A surface slice needs at least two continuous factors. Got {names}.")
        x = names[0] if x is None else x
        y = next(n for n in names if n != x) if y is None else y
        self.x_factor = ipw.Dropdown(options=names, value=x, description="Across").add_class("lw-slice-x")
        self.y_factor = ipw.Dropdown(options=names, value=y, description="Up").add_class("lw-slice-y")
        self.quantity = ipw.ToggleButtons(
            options=[
                ("Expected mean", "mean"),
                ("CI half-width", "ci_half"),
                ("PI half-width", "pi_half"),
                ("Overall desirability", "desirability"),
            ],
            value="mean",
        ).add_class("lw-slice-quantity")
        self.caption = ipw.HTML().add_class("lw-slice-caption")

        self.sx, self.sy = bq.LinearScale(), bq.LinearScale()
        # The heat map's colours are sent as uint8 codes 0..254 (one byte a cell: 10,000 bytes for 100 x 100);
        # ``sc`` maps the codes onto the colour map, and the colour axis reads ``label_scale``, the same colour
        # map over the quantity's own range, so the colours and the axis's numbers agree.
        self.sc = bq.ColorScale(colors=CIVIDIS, min=0.0, max=float(CODES))
        self.label_scale = bq.ColorScale(colors=CIVIDIS)
        self.heatmap = bq.HeatMap(
            x=f32([0, 1]), y=f32([0, 1]), color=np.zeros((2, 2), np.uint8),
            scales={"x": self.sx, "y": self.sy, "color": self.sc},
        )
        self.contour_lines = bq.Lines(
            scales={"x": self.sx, "y": self.sy}, colors=[CONTOUR_COLOR], stroke_width=1, opacities=[0.85]
        )
        self.contour_labels = bq.Label(
            scales={"x": self.sx, "y": self.sy}, colors=[CONTOUR_COLOR], default_size=11, align="middle"
        )
        self.points = bq.Scatter(
            scales={"x": self.sx, "y": self.sy}, colors=[DESIGN_POINT_COLOR], stroke="white",
            default_size=40, marker="circle",
        )
        self.excluded_points = bq.Scatter(
            scales={"x": self.sx, "y": self.sy}, colors=[EXCLUDED_COLOR], fill=False, default_size=50,
            marker="square",
        )
        # One invisible point at most, where the viewer clicked (not a grid of invisible click targets: 41 x 41
        # of them were three quarters of the page's elements, and the browser re-layered them on every frame).
        self.clicks = click_catcher({"x": self.sx, "y": self.sy})
        self.clicks.observe(self.safely(self._on_click), names=["x", "y"])
        self.marker = bq.Scatter(scales={"x": self.sx, "y": self.sy}, **CURRENT_MARKER)
        self.color_axis = bq.ColorAxis(scale=self.label_scale, side="right", label="")
        self.x_axis = bq.Axis(scale=self.sx, label="", num_ticks=5)
        self.y_axis = bq.Axis(scale=self.sy, side="left", label="", num_ticks=5)
        self.figure = bq.Figure(
            marks=[self.heatmap, self.contour_lines, self.contour_labels, self.points, self.excluded_points,
                   self.clicks, self.marker],
            axes=[self.x_axis, self.y_axis, self.color_axis],
            layout=ipw.Layout(width="520px", height="440px"),
            fig_margin={"top": 20, "bottom": 50, "left": 60, "right": 90},
            animation_duration=0,
        ).add_class("lw-slice")
        self.widget = ipw.VBox(
            [ipw.HBox([self.x_factor, self.y_factor]), self.quantity, self.figure, self.caption, self.status,
             click_through("lw-slice")]
        ).add_class("lw-surface-slice")

        self._key = None
        self.redraws = 0  # how many slices were computed (coalescing is visible here)
        self._range = (0.0, 1.0)  # the finite range of the quantity drawn (what the uint8 codes span)
        self._coalescer = Coalescer(self.safely(self._redraw))
        for control in (self.x_factor, self.y_factor, self.quantity):
            control.observe(self.safely(self._on_choice), names="value")
        self.watch(self._on_factors, names=["factors"])
        self.watch(self._on_shared, names=["fits", "fit", "settings", "response", "exclusions", "error", "goals"])
        self._redraw()

    # ----- events -------------------------------------------------------------------------------
    def _on_choice(self, change):
        if getattr(self, "_building", False):
            return
        if self.x_factor.value == self.y_factor.value:
            other = next(f.name for f in self.shared.continuous_factors() if f.name != self.x_factor.value)
            owner = change["owner"]
            (self.y_factor if owner is self.x_factor else self.x_factor).value = other
            return
        self._coalescer.request()

    def _on_factors(self, change=None):
        names = [f.name for f in self.shared.continuous_factors()]
        if len(names) < 2:
            raise LevelwiseError(f"A surface slice needs at least two continuous factors. Got {names}.")
        self._building = True
        try:
            self.x_factor.options, self.y_factor.options = names, names
            self.x_factor.value, self.y_factor.value = names[0], names[1]
        finally:
            self._building = False
        self._key = None
        self._coalescer.request()

    def _on_shared(self, change=None):
        """The error line now; the marker and the slice coalesced (a burst of slider events moves the marker
        once, in the same moment as the other views' marks, and redraws the slice only when it changed)."""
        self.show_shared_error()
        self._coalescer.request()

    def _on_click(self, change):
        """A point added by a click (bqplot's "add" mode): move the axis factors to the nearest grid point."""
        point = take_click(self.clicks, "the slice")
        if point is None:
            return
        px, py = point
        xs, ys = self._target_axes()
        j, i = int(np.argmin(np.abs(xs - px))), int(np.argmin(np.abs(ys - py)))
        try:
            self.shared.set_settings(**{self.x_factor.value: float(xs[j]), self.y_factor.value: float(ys[i])})
        except LevelwiseError as exc:
            self.shared.error = str(exc)

    def flush(self) -> None:
        """Draw now whatever refresh is pending (inside a running event loop the slice is drawn
        shortly after the last change; code that reads the slice's arrays at once calls this first)."""
        self._coalescer.flush()

    def _target_axes(self):
        fx, fy = self.shared.factor(self.x_factor.value), self.shared.factor(self.y_factor.value)
        return np.linspace(fx.low, fx.high, CLICK_GRID), np.linspace(fy.low, fy.high, CLICK_GRID)

    # ----- drawing ------------------------------------------------------------------------------
    def _kernel_slice(self, current, x, y) -> dict:
        """The slice grids from one kernel call (Fit.refresh, the interactive path)."""
        return current.refresh(self.shared.settings, points=None, slice_axes=(x, y), shape=self.shape,
                               point=False)["slice"]

    def _quantity_grid(self, current, x, y):
        grid = self._kernel_slice(current, x, y)
        if self.quantity.value != "desirability":
            return grid, counts.slice_quantity(current, grid, self.quantity.value)  # a probability in %
        goals = {r: g for r, g in self.shared.goals.items() if r in self.shared.fits}
        if not goals:
            raise LevelwiseError("The overall desirability needs goals: set them in the optimiser view first.")
        d, weights = [], []
        for response, spec in goals.items():
            goal = as_goal(spec, response)
            mean = self._kernel_slice(self.shared.fits[response], x, y)["mean"]
            d.append(goal(mean))
            weights.append(goal.weight)
        return grid, overall_desirability(np.stack(d, axis=-1), weights)

    def _redraw(self):
        shared, current = self.shared, self.shared.fit
        x, y = self.x_factor.value, self.y_factor.value
        self.show_shared_error()
        fx, fy = shared.factor(x), shared.factor(y)
        with self.marker.hold_sync():
            set_if_changed(self.marker, x=f32([shared.settings[x]]), y=f32([shared.settings[y]]))
        if current is None:
            self.caption.value = "No fit to draw yet: record some responses first."
            return
        others = tuple((n, v) for n, v in sorted(shared.settings.items(), key=lambda kv: kv[0]) if n not in (x, y))
        key = (id(current), self.quantity.value, x, y, others, id(shared.exclusions), id(shared.goals))
        if key == self._key:
            return
        self.redraws += 1
        grid, z = self._quantity_grid(current, x, y)
        z = np.asarray(z, dtype=float)
        finite = z[np.isfinite(z)]
        levels = []
        if finite.size and np.ptp(finite) > 0:
            levels = list(np.linspace(finite.min(), finite.max(), self.n_contours + 2)[1:-1])
        cx, cy, labels = contour_paths(grid["x"], grid["y"], z, levels)
        run_x, run_y, used = self._design_points(x, y)
        codes, low, high = quantise(z)
        with self.heatmap.hold_sync():
            set_if_changed(self.heatmap, x=f32(grid["x"]), y=f32(grid["y"]), color=codes)
        if (self.label_scale.min, self.label_scale.max) != (low, high):
            with self.label_scale.hold_sync():
                self.label_scale.min, self.label_scale.max = low, high
        self._range = (low, high)
        with self.contour_lines.hold_sync():
            set_if_changed(self.contour_lines, x=cx, y=cy)
        shown = [(pos, lev) for pos, lev in zip(labels, levels) if pos is not None]
        with self.contour_labels.hold_sync():
            set_if_changed(
                self.contour_labels,
                x=f32([p[0] for p, _ in shown]), y=f32([p[1] for p, _ in shown]),
            )
            self.contour_labels.text = [f"{lev:.3g}" for _, lev in shown]
        with self.points.hold_sync(), self.excluded_points.hold_sync():
            set_if_changed(self.points, x=f32(run_x[used]), y=f32(run_y[used]))
            set_if_changed(self.excluded_points, x=f32(run_x[~used]), y=f32(run_y[~used]))
        with self.sx.hold_sync(), self.sy.hold_sync():
            self.sx.min, self.sx.max = fx.low, fx.high
            self.sy.min, self.sy.max = fy.low, fy.high
        self.x_axis.label, self.y_axis.label = fx.label, fy.label
        units = counts.units(current, shared.response_units) if self.quantity.value != "desirability" else ""
        self.color_axis.label = f"{shared.response} ({units})" if units else shared.response
        held = ", ".join(
            f"{html.escape(n)} = {v:.4g}" if isinstance(v, float) else f"{html.escape(n)} = {html.escape(str(v))}"
            for n, v in others
        ) or "no other factors"
        self.caption.value = (
            f"<b>{html.escape(shared.response)}</b>: {SURFACE_QUANTITIES[self.quantity.value]}; "
            f"other factors held at {held}. Dots: runs of the design (hollow grey squares: excluded). "
            "Click the slice to move the two axis factors there."
            + (f" {counts.no_interval_html(current)}" if counts.family(current) and self.quantity.value == "pi_half"
               else "")
        )
        self._key = key

    def shown_values(self) -> np.ndarray:
        """The quantity the heat map shows, decoded from its uint8 codes (NaN where the quantity is not finite);
        within half a code step, (high - low) / 508, of the computed grid."""
        return decode(np.asarray(self.heatmap.color), *self._range)

    def _design_points(self, x, y):
        data = self.shared.data
        run_x = data[x].to_numpy(dtype=float) if x in data else np.array([])
        run_y = data[y].to_numpy(dtype=float) if y in data else np.array([])
        return run_x, run_y, ~self.shared.excluded_mask()
