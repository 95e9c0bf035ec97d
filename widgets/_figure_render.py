"""Draw what a view shows with matplotlib on the server: every bqplot figure of the view, as drawn.

Browser-side saving of bqplot figures is unreliable, so "Save figure" redraws the marks the view holds in the
kernel (their ``x``, ``y``, colours, line styles, labels) on matplotlib's Agg canvas
(``levelwise.figures``), one panel per visible bqplot figure, with the axis labels (units added where the view
gives them) and a caption under the figure. Nothing here reads the browser.
"""

from __future__ import annotations

import math

import numpy as np

_DASHES = {"dashed": "--", "dotted": ":", "dash_dotted": "-.", "solid": "-"}
_MARKERS = {"circle": "o", "square": "s", "triangle-up": "^", "triangle-down": "v", "diamond": "D", "cross": "P",
            "plus": "+", "arrow": ">", "rectangle": "s", "ellipse": "o", "crosshair": "+"}


def _array(value):
    if value is None:
        return None
    try:
        return np.asarray(value)
    except (TypeError, ValueError):
        return None


def _colour(colours, i, default="#0072B2"):
    try:
        colours = list(colours or [])
    except TypeError:
        return default
    if not colours:
        return default
    value = colours[i % len(colours)]
    return value if isinstance(value, str) and value else default


def visible_figures(widget) -> list:
    """The bqplot figures inside *widget* (depth first), skipping hidden ones."""
    import bqplot as bq

    out, stack = [], [widget]
    while stack:
        item = stack.pop(0)
        layout = getattr(item, "layout", None)
        if layout is not None and getattr(layout, "display", None) == "none":
            continue
        if isinstance(item, bq.Figure):
            out.append(item)
            continue
        stack[0:0] = list(getattr(item, "children", ()) or ())
    return out


def _positions(values, categories):
    """Numbers for x or y: numbers as they are, text by its position among *categories*."""
    arr = _array(values)
    if arr is None:
        return None
    if arr.dtype.kind in "biuf":
        return arr.astype(float)
    for value in arr.ravel():
        if str(value) not in categories:
            categories.append(str(value))
    return np.vectorize(lambda v: float(categories.index(str(v))), otypes=[float])(arr) if arr.size else arr


def _draw_lines(ax, mark, xcats, ycats):
    x, y = _positions(mark.x, xcats), _positions(mark.y, ycats)
    if x is None or y is None or not y.size:
        return
    ys = np.atleast_2d(y)
    xs = np.atleast_2d(x)
    style = _DASHES.get(getattr(mark, "line_style", "solid"), "-")
    width = float(getattr(mark, "stroke_width", 1.5) or 1.5)
    if getattr(mark, "fill", "none") == "between" and len(ys) == 2:
        xx = xs[0] if len(xs) == 1 else xs[0]
        opacity = float((list(getattr(mark, "fill_opacities", None) or []) or [0.3])[0])
        ax.fill_between(xx, ys[0], ys[1], color=_colour(list(mark.fill_colors or []) or mark.colors, 0), alpha=opacity,
                        linewidth=0)
    labels = _array(getattr(mark, "labels", None))
    labels = [] if labels is None else [str(v) for v in np.ravel(labels)]
    for i, row in enumerate(ys):
        xx = xs[i] if len(xs) == len(ys) else xs[0]
        if len(xx) != len(row):
            continue
        label = labels[i] if getattr(mark, "display_legend", False) and i < len(labels) else None
        ax.plot(xx, row, color=_colour(mark.colors, i), linestyle=style, linewidth=width, label=label)


def _draw_scatter(ax, mark, xcats, ycats):
    x, y = _positions(mark.x, xcats), _positions(mark.y, ycats)
    if x is None or y is None or not x.size or len(x) != len(y):
        return
    opacities = _array(getattr(mark, "opacities", None))
    opacities = [] if opacities is None else list(np.ravel(opacities))
    if opacities and max(float(o) for o in opacities) == 0.0:
        return  # invisible click targets
    colour = _colour(mark.colors, 0)
    marker = _MARKERS.get(getattr(mark, "marker", "circle"), "o")
    size = float(getattr(mark, "default_size", 64) or 64) / 2.0
    fill = bool(getattr(mark, "fill", True))
    ax.scatter(x, y, s=size, marker=marker, facecolors=colour if fill else "none", edgecolors=colour, zorder=3)
    names = _array(getattr(mark, "names", None))
    if names is not None and names.size == x.size and names.size and getattr(mark, "display_names", False):
        for xi, yi, name in zip(x, y, names):
            ax.annotate(str(name), (xi, yi), textcoords="offset points", xytext=(5, 3), fontsize="x-small")


def _draw_label(ax, mark, xcats, ycats):
    x, y = _positions(mark.x, xcats), _positions(mark.y, ycats)
    texts = _array(getattr(mark, "text", None))
    texts = [] if texts is None else list(np.ravel(texts))
    if x is None or y is None or not texts:
        return
    for xi, yi, text in zip(np.ravel(x), np.ravel(y), texts):
        ax.annotate(str(text), (xi, yi), textcoords="offset points", xytext=(5, 3), fontsize="x-small",
                    color=_colour(mark.colors, 0, "black"))


def _draw_bars(ax, mark, xcats, ycats):
    y = _array(mark.y)
    x = _array(mark.x)
    if x is None or y is None or not y.size:
        return
    names = [str(v) for v in x]
    for name in names:
        if name not in xcats:
            xcats.append(name)
    positions = [xcats.index(n) for n in names]
    ax.bar(positions, np.atleast_2d(y)[0], color=[_colour(mark.colors, i) for i in range(len(names))])


def _draw_heatmap(ax, mark, decode=None):
    x, y, colour = _array(mark.x), _array(mark.y), _array(mark.color)
    values = decode(mark) if decode is not None else None
    if values is not None:  # the values the colours stand for (views send compact codes)
        colour = _array(values)
    if x is None or y is None or colour is None or colour.ndim != 2 or not colour.size:
        return
    mesh = ax.pcolormesh(x, y, np.ma.masked_invalid(colour.astype(float)), shading="auto", cmap=heatmap_colormap(mark))
    return mesh


def heatmap_colormap(mark):
    """The matplotlib colour map of a heat map mark: its colour scale's colours (the slice views' cividis stops)
    spread evenly over the values, as bqplot spreads them."""
    from matplotlib.colors import LinearSegmentedColormap

    from .style import CIVIDIS

    scale = getattr(mark, "scales", {}).get("color")
    colours = list(getattr(scale, "colors", None) or CIVIDIS)
    return LinearSegmentedColormap.from_list("levelwise_slice", colours)


def draw_bqplot(fig_bq, ax, relabel=None, decode=None) -> None:
    """Draw one bqplot figure's marks and axis labels on matplotlib axes *ax*; *decode(mark)* gives the values
    a heat map's colour codes stand for (None: the colours are values)."""
    import bqplot as bq

    relabel = relabel or (lambda text: text)
    xcats, ycats = [], []
    mesh = None
    for mark in fig_bq.marks:
        if not getattr(mark, "visible", True):
            continue
        if isinstance(mark, bq.HeatMap):
            mesh = _draw_heatmap(ax, mark, decode) or mesh
        elif isinstance(mark, bq.Bars):
            _draw_bars(ax, mark, xcats, ycats)
        elif isinstance(mark, bq.Lines):
            _draw_lines(ax, mark, xcats, ycats)
        elif isinstance(mark, bq.Scatter):
            _draw_scatter(ax, mark, xcats, ycats)
        elif isinstance(mark, bq.Label):
            _draw_label(ax, mark, xcats, ycats)
    for axis in fig_bq.axes:
        if isinstance(axis, bq.ColorAxis):
            if mesh is not None and axis.label:
                ax.figure.colorbar(mesh, ax=ax, label=relabel(axis.label))
            continue
        label = relabel(axis.label or "")
        if getattr(axis, "side", None) in ("left", "right") or getattr(axis, "orientation", "") == "vertical":
            ax.set_ylabel(label, parse_math=False)
        else:
            ax.set_xlabel(label, parse_math=False)
    if xcats:
        ax.set_xticks(range(len(xcats)), xcats, rotation=35, ha="right", fontsize="small")
    if ycats:
        ax.set_yticks(range(len(ycats)), ycats, fontsize="small")
    if fig_bq.title:
        ax.set_title(fig_bq.title, fontsize="medium", loc="left")
    if any(line.get_label() and not line.get_label().startswith("_") for line in ax.get_lines()):
        ax.legend(fontsize="x-small", loc="best")


def render(figures, caption: str, relabel=None, decode=None):
    """A matplotlib figure with one panel per bqplot figure of *figures* and *caption* under it."""
    from levelwise.figures import _new_figure, add_caption

    count = max(len(figures), 1)
    columns = min(count, 3)
    rows = math.ceil(count / columns)
    fig = _new_figure(4.2 * columns + 0.4, 3.6 * rows + 0.8)
    axes = fig.subplots(rows, columns, squeeze=False).ravel()
    for ax, fig_bq in zip(axes, figures):
        draw_bqplot(fig_bq, ax, relabel, decode)
    for ax in axes[len(figures):]:
        ax.set_visible(False)
    return add_caption(fig, caption)


__all__ = ["draw_bqplot", "render", "visible_figures"]
