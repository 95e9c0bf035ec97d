"""Figures rendered on the server as PNG or SVG, from the same arrays the views draw.

The per-factor traces come from :meth:`Fit.trace` (the mean with the confidence band for the
mean, dark and solid, and the prediction band for one new run, light and dashed), the residual
plot from ``Fit.fitted`` and ``Fit.residuals``. Browser-side saving of bqplot figures is
unreliable, so exports are drawn here with matplotlib's Agg renderer. matplotlib is imported
inside the functions: importing ``levelwise`` stays lean.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from ._errors import LevelwiseError, describe

#: Okabe-Ito blue and vermilion (colour-blind safe), the palette the views use.
_BLUE, _VERMILION, _GREY = "#0072B2", "#D55E00", "#999999"
FORMATS = ("png", "svg")


def _new_figure(width: float, height: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)  # no pyplot and no global state: safe in a served kernel
    return fig


def trace_arrays(fit, settings, factors=None, points: int = 50, level: float | None = None) -> dict:
    """The arrays a trace figure draws: ``{factor: fit.trace(factor, settings, ...)}``."""
    names = list(fit.factor_names) if factors is None else list(factors)
    if isinstance(points, bool) or not isinstance(points, (int, np.integer)) or not 2 <= points <= 10_000:
        raise LevelwiseError(f"The 'points' parameter must be an integer from 2 to 10000. Got {describe(points)}.")
    return {name: fit.trace(name, settings, points=int(points), level=level) for name in names}


def trace_figure(fit, settings, factors=None, points: int = 50, level: float | None = None):
    """One panel per factor: predicted mean along the factor's range, the other factors held at
    *settings*, with the confidence band (solid) and the prediction band (dashed).

    Returns a :class:`matplotlib.figure.Figure` (write it with :func:`save_figure` or
    :func:`figure_bytes`).
    """
    arrays = trace_arrays(fit, settings, factors, points, level)
    level = fit.level if level is None else level
    base = fit.engine.table(settings)[0]
    fig = _new_figure(3.0 * len(arrays) + 0.5, 3.2)
    axes = fig.subplots(1, len(arrays), sharey=True, squeeze=False)[0]
    for ax, (name, tr) in zip(axes, arrays.items()):
        x, mean = tr["x"], tr["mean"]
        ax.fill_between(x, mean - tr["ci_half"], mean + tr["ci_half"], color=_BLUE, alpha=0.3, linewidth=0,
                        label=f"{level:.0%} confidence interval (mean)")
        ax.plot(x, mean - tr["pi_half"], color=_BLUE, linestyle="--", linewidth=1,
                label=f"{level:.0%} prediction interval (one new run)")
        ax.plot(x, mean + tr["pi_half"], color=_BLUE, linestyle="--", linewidth=1)
        ax.plot(x, mean, color=_BLUE, linewidth=2, label="predicted mean")
        ax.axvline(base[list(fit.factor_names).index(name)], color=_VERMILION, linewidth=1)
        ax.set_xlabel(name)
    axes[0].set_ylabel(fit.response)
    axes[0].legend(fontsize="x-small", loc="best")
    return fig


def residual_figure(fit):
    """Residuals against fitted values, with a zero line."""
    fig = _new_figure(4.5, 3.5)
    ax = fig.subplots()
    ax.axhline(0.0, color=_GREY, linewidth=1)
    ax.scatter(fit.fitted, fit.residuals, color=_BLUE, s=18)
    ax.set_xlabel(f"fitted {fit.response}")
    ax.set_ylabel("residual")
    return fig


def add_caption(fig, caption: str):
    """Write *caption* under the figure (kept inside it by the constrained layout); returns the figure."""
    if caption:
        fig.supxlabel(caption, fontsize="small", wrap=True)
    return fig


def design_figure(design, caption: str | None = None):
    """The runs of a design in natural units, one panel per pair of factors (up to the first four
    factors), corner, centre, axial and other runs told apart by marker; a caption says what it shows."""
    import itertools

    factors = list(design.factors)[:4]
    pairs = list(itertools.combinations(range(len(factors)), 2)) or [(0, 0)]
    table = design.table
    fig = _new_figure(3.0 * min(len(pairs), 3) + 0.4, 3.0 * ((len(pairs) + 2) // 3) + 0.6)
    axes = fig.subplots((len(pairs) + 2) // 3, min(len(pairs), 3), squeeze=False).ravel()
    markers = {"corner": ("o", _BLUE), "centre": ("s", _VERMILION), "axial": ("^", "#009E73")}

    def label(f):
        return f"{f.name} [{f.units}]" if f.units else f.name

    for ax, (i, j) in zip(axes, pairs):
        fx, fy = factors[i], factors[j]
        for role in sorted(set(table["role"])):
            rows = table[table["role"] == role]
            marker, colour = markers.get(role, ("D", _GREY))
            ax.scatter(rows[fx.name].astype(str) if fx.is_categorical else rows[fx.name],
                       rows[fy.name].astype(str) if fy.is_categorical else rows[fy.name],
                       marker=marker, color=colour, s=28, label=role.replace("_", " "))
        ax.set_xlabel(label(fx))
        ax.set_ylabel(label(fy))
    for ax in axes[len(pairs):]:
        ax.set_visible(False)
    axes[0].legend(fontsize="x-small", loc="best")
    if caption is None:
        caption = f"{str(design.kind).capitalize()}: {len(design)} runs"
        if design.resolution:
            caption += f", resolution {design.resolution}"
        caption += " (each run once per panel; repeated runs overlap)."
    return add_caption(fig, caption)


def figure_bytes(fig, fmt: str = "png") -> bytes:
    """The figure as PNG or SVG bytes (no date in the metadata, so output is reproducible)."""
    if fmt not in FORMATS:
        raise LevelwiseError(f"The figure 'fmt' must be one of {list(FORMATS)}. Got {describe(fmt)} instead.")
    buffer = io.BytesIO()
    metadata = {"Date": None} if fmt == "svg" else {}
    fig.savefig(buffer, format=fmt, metadata=metadata)
    return buffer.getvalue()


def save_figure(fig, path) -> Path:
    """Write the figure to a ``.png`` or ``.svg`` file, chosen by the suffix."""
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in FORMATS:
        raise LevelwiseError(f"The figure 'path' must end in .png or .svg. Got {str(path)!r} instead.")
    data = figure_bytes(fig, fmt)
    try:
        path.write_bytes(data)
    except OSError as exc:
        raise LevelwiseError(f"The figure could not be written to '{path}': {exc.strerror or exc}.") from exc
    return path


__all__ = ["add_caption", "design_figure", "figure_bytes", "residual_figure", "save_figure", "trace_arrays",
           "trace_figure"]
