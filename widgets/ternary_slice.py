"""The ternary slice: three chosen components vary over a triangle, the other components and process factors held.

The predicted mean (or the CI or PI half-width) is drawn as a heat map with the surface slice's colour map
(cividis) and colour codes, with contour lines from ``contourpy``; the grid is
:func:`levelwise.ternary_grid` (one engine call per redraw). Blends outside the triangle or the component bounds are
left blank. The runs are projected onto the triangle (their three amounts rescaled to sum to 1), the current blend
carries the marker of every view, and a click moves the blend there (the three components share what the held
ones leave of the total).
"""

from __future__ import annotations

import html

import bqplot as bq
import ipywidgets as ipw
import numpy as np

from levelwise import LevelwiseError
from levelwise.model import ternary_blend, ternary_grid, ternary_halfplanes, ternary_position

from ._base import Coalescer, View, click_catcher, click_through, f32, set_if_changed, take_click
from .shared_model import SharedModel
from .style import CIVIDIS, CONTOUR_COLOR, CURRENT_MARKER, DESIGN_POINT_COLOR, EXCLUDED_COLOR, SURFACE_QUANTITIES
from .surface_slice import CODES, contour_paths, quantise

SQRT3_2 = float(np.sqrt(3.0) / 2.0)
#: Points per side of the triangular lattice that a click on the slice snaps to (the nearest one inside the region).
CLICK_SIDE = 31
QUANTITIES = [("Expected mean", "mean"), ("CI half-width", "ci_half"), ("PI half-width", "pi_half")]


#: The drawing box (x from, x to, y from, y to): room around the triangle for the corner labels.
BOX = (-0.16, 1.16, -0.1, SQRT3_2 + 0.08)


def _clip(polygon, a, b, c):
    """The part of a convex *polygon* where a x + b y >= c (one Sutherland-Hodgman step)."""
    out = []
    for k, (x1, y1) in enumerate(polygon):
        x2, y2 = polygon[(k + 1) % len(polygon)]
        d1, d2 = a * x1 + b * y1 - c, a * x2 + b * y2 - c
        if d1 >= 0:
            out.append((x1, y1))
        if (d1 >= 0) != (d2 >= 0):
            w = d1 / (d1 - d2)
            out.append((x1 + w * (x2 - x1), y1 + w * (y2 - y1)))
    return out


def mask_polygons(halfplanes):
    """White polygons covering the drawing box outside the region (rows a x + b y <= c), padded to one length
    (bqplot draws one filled line per row)."""
    box = [(BOX[0], BOX[2]), (BOX[1], BOX[2]), (BOX[1], BOX[3]), (BOX[0], BOX[3])]
    polygons = [p for a, b, c in halfplanes if len(p := _clip(box, a, b, c)) >= 3]
    if not polygons:
        return f32([[0.0, 0.0]]), f32([[0.0, 0.0]])
    size = max(len(p) for p in polygons)
    padded = [p + [p[-1]] * (size - len(p)) for p in polygons]
    return f32([[x for x, _ in p] for p in padded]), f32([[y for _, y in p] for p in padded])


def _codes_with_blanks(z):
    """Colour codes as float32 (0..CODES over the finite range) with NaN where the slice is blank."""
    codes, low, high = quantise(z)
    out = codes.astype(np.float32)
    out[~np.isfinite(z)] = np.nan
    return out, low, high


class TernarySlice(View):
    """A ternary slice of the displayed response for three chosen components.

    Parameters
    ----------
    shared : SharedModel
    axes : three component names, optional (default: the first three)
    shape : (int, int), default (81, 71)
        Grid points across and up the triangle's bounding box.

    Attributes
    ----------
    choices : list of ipywidgets.Dropdown
        The three components at the corners (``lw-ternary-a``, ``lw-ternary-b``, ``lw-ternary-c``).
    quantity : ipywidgets.ToggleButtons
        ``mean``, ``ci_half`` or ``pi_half`` (``lw-slice-quantity``).
    figure : bqplot.Figure
        ``lw-ternary``: ``heatmap``, ``contour_lines``, ``outline``, ``corner_labels``, ``points``,
        ``excluded_points``, ``clicks`` (the click catcher: a click adds one point there, and the blend moves to
        the nearest point of a triangular lattice inside the region), ``marker`` (current blend).
    caption : ipywidgets.HTML
        ``lw-ternary-caption``.
    widget : ipywidgets.VBox
        The whole view (``lw-ternary-slice``).
    """

    def __init__(self, shared: SharedModel, *, axes=None, shape=(81, 71), contours=8):
        super().__init__(shared)
        self.shape = tuple(int(v) for v in shape)
        self.n_contours = int(contours)
        self.choices = [ipw.Dropdown(description=label).add_class(css)
                        for label, css in (("Left corner", "lw-ternary-a"), ("Right corner", "lw-ternary-b"),
                                           ("Top corner", "lw-ternary-c"))]
        self.quantity = ipw.ToggleButtons(options=QUANTITIES, value="mean").add_class("lw-slice-quantity")
        self.caption = ipw.HTML().add_class("lw-ternary-caption")
        self.sx = bq.LinearScale(min=BOX[0], max=BOX[1])
        self.sy = bq.LinearScale(min=BOX[2], max=BOX[3])
        scales = {"x": self.sx, "y": self.sy}
        self.sc = bq.ColorScale(colors=CIVIDIS, min=0.0, max=float(CODES))  # the surface slice's colour codes
        self.label_scale = bq.ColorScale(colors=CIVIDIS)
        self.heatmap = bq.HeatMap(x=f32([0, 1]), y=f32([0, 1]), color=np.zeros((2, 2), np.float32),
                                  scales={**scales, "color": self.sc}, null_color="#FFFFFF")
        self.contour_lines = bq.Lines(scales=scales, colors=[CONTOUR_COLOR], stroke_width=1, opacities=[0.85])
        # Blank outside the region: one white polygon per side of the region (the outside of its half-plane).
        self.mask = bq.Lines(x=f32([[0, 0]]), y=f32([[0, 0]]), scales=scales, fill="inside", colors=["white"],
                             fill_colors=["white"], fill_opacities=[1.0], stroke_width=0)
        self.outline = bq.Lines(x=f32([0, 1, 0.5, 0]), y=f32([0, 0, SQRT3_2, 0]), scales=scales,
                                colors=["#444444"], stroke_width=1.5)
        self.corner_labels = bq.Label(x=f32([0.0, 1.0, 0.5]), y=f32([-0.06, -0.06, SQRT3_2 + 0.03]), scales=scales,
                                      colors=["#222222"], default_size=13, align="middle", text=["", "", ""])
        self.points = bq.Scatter(scales=scales, colors=[DESIGN_POINT_COLOR], stroke="white", default_size=40)
        self.excluded_points = bq.Scatter(scales=scales, colors=[EXCLUDED_COLOR], fill=False, default_size=50,
                                          marker="square")
        self.clicks = click_catcher(scales)  # one invisible point at most, not a lattice of click targets
        self.clicks.observe(self.safely(self._on_click), names=["x", "y"])
        self._lattice = (np.array([]), np.array([]))
        self.marker = bq.Scatter(scales=scales, **CURRENT_MARKER)
        self.color_axis = bq.ColorAxis(scale=self.label_scale, side="right", label="")
        self.figure = bq.Figure(
            marks=[self.heatmap, self.mask, self.contour_lines, self.outline, self.corner_labels, self.points,
                   self.excluded_points, self.clicks, self.marker],
            axes=[self.color_axis], layout=ipw.Layout(width="560px", height="500px"),
            fig_margin={"top": 20, "bottom": 20, "left": 20, "right": 90}, animation_duration=0,
        ).add_class("lw-ternary")
        self.widget = ipw.VBox([ipw.HBox(self.choices), self.quantity, self.figure, self.caption, self.status,
                                click_through("lw-ternary")])
        self.widget.add_class("lw-ternary-slice")
        self._key, self._range, self.grid, self.redraws = None, (0.0, 1.0), None, 0
        self._coalescer = Coalescer(self.safely(self._redraw))
        self._build(axes)
        for control in [*self.choices, self.quantity]:
            control.observe(self.safely(self._on_choice), names="value")
        self.watch(lambda change=None: self._build(None), names=["study"])
        self.watch(self._on_shared, names=["fits", "fit", "settings", "response", "exclusions", "error"])

    # ----- choices ------------------------------------------------------------------------------
    def _build(self, axes):
        names = self.shared.component_names
        self._building = True
        try:
            for choice in self.choices:
                choice.options = names
            if len(names) >= 3:
                axes = list(axes) if axes is not None else names[:3]
                if len(axes) != 3 or len(set(axes)) != 3 or any(a not in names for a in axes):
                    raise LevelwiseError(f"The ternary slice's 'axes' must be three different components of {names}. "
                                         f"Got {axes!r}.")
                for choice, name in zip(self.choices, axes):
                    choice.value = name
        finally:
            self._building = False
        self._key = None
        self._redraw()

    @property
    def axes(self) -> tuple:
        return tuple(choice.value for choice in self.choices)

    def _on_choice(self, change):
        if getattr(self, "_building", False):
            return
        owner = change["owner"]
        if owner in self.choices and list(self.axes).count(change["new"]) > 1:
            other = next(c for c in self.choices if c is not owner and c.value == change["new"])
            self._building = True
            try:
                other.value = change["old"]  # the two corners swap
            finally:
                self._building = False
        self._coalescer.request()

    def _on_shared(self, change=None):
        self.show_shared_error()
        self._coalescer.request()

    def flush(self) -> None:
        """Draw now whatever redraw is pending."""
        self._coalescer.flush()

    def _on_click(self, change):
        """A point added by a click: move the blend to the nearest lattice point inside the region."""
        point = take_click(self.clicks, "the ternary slice")
        if point is None:
            return
        xs, ys = self._lattice
        if not len(xs):
            raise LevelwiseError("The ternary slice has no region to click yet (nothing is drawn).")
        k = int(np.argmin((xs - point[0]) ** 2 + (ys - point[1]) ** 2))
        self.click_at(float(xs[k]), float(ys[k]))

    def click_at(self, x: float, y: float) -> None:
        """Move the blend to the point (x, y) of the triangle, as a click there does."""
        try:
            blend = ternary_blend(self.shared.mixture, self.axes, self.shared.settings, x, y)
            self.shared.set_blend(**{name: blend[name] for name in self.shared.component_names})
        except LevelwiseError as exc:
            self.shared.error = f"The blend was not moved: {exc}"

    # ----- drawing ------------------------------------------------------------------------------
    def _redraw(self):
        shared, current = self.shared, self.shared.fit
        self.show_shared_error()
        if shared.mixture is None or len(shared.component_names) < 3:
            self.caption.value = ("<p>A ternary slice draws three mixture components; this study has "
                                  f"{len(shared.component_names)}. Use the other views of its factors.</p>")
            return
        if current is None:
            self.caption.value = "No fit to draw yet: record some responses first."
            return
        axes = self.axes
        key = (id(current), self.quantity.value, axes, tuple(sorted(shared.settings.items())), id(shared.exclusions))
        if key == self._key:
            return
        self.redraws += 1
        grid = self.grid = ternary_grid(current, axes, shared.settings, shape=self.shape)
        z = grid[self.quantity.value]
        codes, low, high = _codes_with_blanks(z)
        finite = z[np.isfinite(z)]
        levels = []
        if finite.size and np.ptp(finite) > 0:
            levels = list(np.linspace(finite.min(), finite.max(), self.n_contours + 2)[1:-1])
        cx, cy, _ = contour_paths(grid["x"], grid["y"], np.ma.masked_invalid(z), levels)
        with self.heatmap.hold_sync():
            set_if_changed(self.heatmap, x=f32(grid["x"]), y=f32(grid["y"]), color=codes)
        if (self.label_scale.min, self.label_scale.max) != (low, high):
            with self.label_scale.hold_sync():
                self.label_scale.min, self.label_scale.max = low, high
        self._range = (low, high)
        with self.contour_lines.hold_sync():
            set_if_changed(self.contour_lines, x=cx, y=cy)
        mx, my = mask_polygons(ternary_halfplanes(shared.mixture, axes, shared.settings))
        n_masks = len(mx)
        with self.mask.hold_sync():
            set_if_changed(self.mask, x=mx, y=my)
            if len(self.mask.fill_colors) != n_masks:
                self.mask.colors, self.mask.fill_colors = ["white"] * n_masks, ["white"] * n_masks
                self.mask.fill_opacities = [1.0] * n_masks
        self.corner_labels.text = [f"{name} {amount:.4g}" for name, amount in zip(axes, grid["corners"])]
        data = shared.data
        px, py = ternary_position(data[list(axes)].to_numpy(dtype=float), grid["lows"])
        used = ~shared.excluded_mask()
        with self.points.hold_sync(), self.excluded_points.hold_sync():
            set_if_changed(self.points, x=f32(px[used]), y=f32(py[used]))
            set_if_changed(self.excluded_points, x=f32(px[~used]), y=f32(py[~used]))
        self._lattice = self._targets(grid)
        with self.marker.hold_sync():
            set_if_changed(self.marker, x=f32([grid["reference"][0]]), y=f32([grid["reference"][1]]))
        units = shared.response_units
        self.color_axis.label = f"{shared.response} ({units})" if units else shared.response
        held = [n for n in shared.component_names if n not in axes] + [f.name for f in shared.factors]
        held_text = ", ".join(f"{html.escape(n)} = {shared.settings[n]:.4g}" for n in held) or "nothing else"
        self.caption.value = (
            f"<b>{html.escape(shared.response)}</b>: {SURFACE_QUANTITIES[self.quantity.value]}; "
            f"{', '.join(map(html.escape, axes))} share {grid['share']:.4g} of the blend (each corner: that "
            "component at the amount shown, the other two at their lower bounds); other components and "
            f"factors held at {held_text}. Blank: outside the component bounds. Dots: runs of the design, projected "
            "onto the triangle (hollow grey squares: excluded). Click the slice to move the blend there."
        )
        self._key = key

    def _targets(self, grid):
        """The points a click snaps to: a triangular lattice of points inside the region."""
        n = CLICK_SIDE - 1
        i, j = np.meshgrid(np.arange(n + 1), np.arange(n + 1))
        keep = (i + j) <= n
        b, c = i[keep] / n, j[keep] / n
        x, y = b + 0.5 * c, SQRT3_2 * c
        xi = np.clip(np.rint(x / grid["x"][-1] * (len(grid["x"]) - 1)).astype(int), 0, len(grid["x"]) - 1)
        yi = np.clip(np.rint(y / grid["y"][-1] * (len(grid["y"]) - 1)).astype(int), 0, len(grid["y"]) - 1)
        inside = grid["inside"][yi, xi]
        return x[inside], y[inside]

    def shown_values(self) -> np.ndarray:
        """The quantity the heat map shows, decoded from its colour codes (NaN where blank)."""
        codes = np.asarray(self.heatmap.color, dtype=float)
        low, high = self._range
        return low + codes / CODES * (high - low)
