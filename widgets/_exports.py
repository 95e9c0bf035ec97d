""""Save figure" and table export for every view (``lw-view-exports``), attached when a view is made.

Every :class:`~levelwise.widgets._base.View` gets, under its content, a "Save figure (PNG, SVG)" button when
it shows a bqplot figure, and an "Export table (CSV, XLSX)" button when it shows a table (its
``export_tables()`` is not empty). Both work on demand (nothing is drawn or written while the view updates):

* the figure is drawn on the server by matplotlib from the marks the view holds (:mod:`._figure_render`), with
  the view's axis labels (units added where the view says, ``figure_relabel``) and a caption
  (``figure_caption``: the response and its units, the model, the runs and the settings held);
* each table is written as CSV (UTF-8) and XLSX, units in the headers as ``name [units]``, text that a
  spreadsheet would read as a formula written as text (``levelwise._cells``, as every levelwise export).

The files are offered as download links (``lw-export-links``); :meth:`ViewExports.figure_files` and
:meth:`ViewExports.table_files` give the bytes in Python, :meth:`ViewExports.save` writes them to a folder.
"""

from __future__ import annotations

import html
import io
import re
from pathlib import Path

import ipywidgets as ipw

from levelwise import LevelwiseError
from levelwise._cells import guarded_frame, text_cells_as_strings

XLSX_MIME = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


def safe_table_bytes(frame, kind: str, units: dict | None = None) -> bytes:
    """*frame* as CSV or XLSX bytes: units in the headers, formula-looking text kept as text."""
    out = frame.rename(columns={c: f"{c} [{u}]" for c, u in (units or {}).items() if u and c in frame.columns})
    index = out.index.name is not None
    if kind == "csv":
        return guarded_frame(out.reset_index() if index else out).to_csv(index=False, lineterminator="\r\n").encode(
            "utf-8")
    if kind == "xlsx":
        buffer = io.BytesIO()
        with __import__("pandas").ExcelWriter(buffer, engine="openpyxl") as writer:
            (out.reset_index() if index else out).to_excel(writer, index=False, sheet_name="table")
            text_cells_as_strings(writer.book)
        return buffer.getvalue()
    raise LevelwiseError(f"The table export kind must be 'csv' or 'xlsx'. Got {kind!r} instead.")


def default_caption(view) -> str:
    """The displayed response with units, its model and runs, and the settings the other factors are held at."""
    shared = view.shared
    try:
        response, units = shared.response, shared.units.get(shared.response, "")
        fit = shared.fit
        parts = [f"{response}" + (f" [{units}]" if units else "")]
        plot = getattr(view, "plot", None)  # a view that draws one of several plots says which
        if getattr(plot, "label", None):
            parts[0] = f"{plot.label} of {parts[0]}"
        model = shared.models.get(response, "")
        if model:
            parts.append(f"model {model}")
        if fit is not None:
            parts.append(f"{len(fit.runs)} runs fitted")
        held = []
        for factor in shared.factors:
            value = shared.settings.get(factor.name)
            if value is None:
                continue
            text = value if isinstance(value, str) else f"{float(value):.4g}"
            held.append(f"{factor.name} = {text}" + (f" {factor.units}" if factor.units else ""))
        if held:
            parts.append("settings " + ", ".join(held))
        title = getattr(shared.study, "title", "") or ""
        text = (f"{title}: " if title else "") + "; ".join(parts) + "."
        note = getattr(getattr(view, "caption", None), "value", "")  # a view's own caption under its figure
        if isinstance(note, str) and note:
            text += " " + html.unescape(re.sub(r"<[^>]+>", " ", note)).strip()
        return re.sub(r"\s+", " ", text)
    except Exception:  # noqa: BLE001 - a caption never stops a figure
        return type(view).__name__


def default_relabel(view):
    """Axis labels with the response's units added where a label is in them (effects, residuals, fitted)."""
    units = view.shared.units.get(view.shared.response, "") if hasattr(view.shared, "units") else ""

    def relabel(text: str) -> str:
        lower = text.lower()
        if units and text and "[" not in text and "(" not in text and "studentized" not in lower and any(
                word in lower for word in ("effect", "residual", "fitted", "predicted")):
            return f"{text} [{units}]"
        return text

    return relabel


class ViewExports:
    """The export buttons of one view and the links they make."""

    def __init__(self, view, name: str):
        self.view, self.name = view, name
        self.figure_button = ipw.Button(description="Save figure (PNG, SVG)", layout=ipw.Layout(width="auto")
                                        ).add_class("lw-save-figure")
        self.table_button = ipw.Button(description="Export table (CSV, XLSX)", layout=ipw.Layout(width="auto")
                                       ).add_class("lw-export-table")
        self.links = ipw.HTML().add_class("lw-export-links")
        self.figure_button.on_click(view.safely(lambda _: self.show_figure_links()))
        self.table_button.on_click(view.safely(lambda _: self.show_table_links()))
        self.widget = ipw.HBox([self.figure_button, self.table_button, self.links],
                               layout=ipw.Layout(flex_flow="row wrap")).add_class("lw-view-exports")
        self.update_buttons()

    def update_buttons(self) -> None:
        from ._figure_render import visible_figures

        has_figure = bool(visible_figures(self.view.widget)) if hasattr(self.view, "widget") else False
        self.figure_button.layout.display = "" if has_figure else "none"
        self.table_button.layout.display = "" if callable(getattr(self.view, "export_tables", None)) else "none"

    # ----- figures --------------------------------------------------------------------------------
    def figure(self):
        """The matplotlib figure of what the view shows now."""
        from ._figure_render import render, visible_figures

        flush = getattr(self.view, "flush", None)
        if callable(flush):  # marks drawn a moment after a change (coalesced) are drawn now
            flush()
        figures = visible_figures(self.view.widget)
        if not figures:
            raise LevelwiseError(f"The {type(self.view).__name__} shows no figure to save.")
        caption = getattr(self.view, "figure_caption", None)
        caption = caption() if callable(caption) else default_caption(self.view)
        relabel = getattr(self.view, "figure_relabel", None)
        relabel = relabel() if callable(relabel) else default_relabel(self.view)
        return render(figures, caption, relabel, self._decode)

    def _decode(self, mark):
        """The values of a heat map the view sends as codes (its ``shown_values()``), else None."""
        if getattr(self.view, "heatmap", None) is mark and callable(getattr(self.view, "shown_values", None)):
            return self.view.shown_values()
        return None

    def figure_files(self) -> dict:
        """``{"<name>.png": bytes, "<name>.svg": bytes}``."""
        from levelwise.figures import figure_bytes

        fig = self.figure()
        return {f"{self.name}.png": figure_bytes(fig, "png"), f"{self.name}.svg": figure_bytes(fig, "svg")}

    def show_figure_links(self) -> dict:
        files = self.figure_files()
        self.links.value = "Download: " + " · ".join(_link(data, name) for name, data in files.items())
        return files

    # ----- tables ---------------------------------------------------------------------------------
    def table_files(self) -> dict:
        """``{"<table>.csv": bytes, "<table>.xlsx": bytes}`` for every table the view shows."""
        tables = _tables(self.view)
        if not tables:
            raise LevelwiseError(f"The {type(self.view).__name__} shows no table to export yet.")
        out = {}
        for name, (frame, units) in tables.items():
            out[f"{name}.csv"] = safe_table_bytes(frame, "csv", units)
            out[f"{name}.xlsx"] = safe_table_bytes(frame, "xlsx", units)
        return out

    def show_table_links(self) -> dict:
        files = self.table_files()
        self.links.value = "Download: " + " · ".join(_link(data, name) for name, data in files.items())
        return files

    def save(self, folder) -> list[Path]:
        """Write the figure (if any) and the tables (if any) into *folder*; returns the paths written."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        files = {}
        if self.figure_button.layout.display != "none":
            files.update(self.figure_files())
        if _has_tables(self.view):
            files.update(self.table_files())
        if not files:
            raise LevelwiseError(f"The {type(self.view).__name__} shows no figure or table to save yet.")
        written = []
        for name, data in files.items():
            (folder / name).write_bytes(data)
            written.append(folder / name)
        return written


def _tables(view) -> dict:
    """``{name: (frame, units)}`` from the view's ``export_tables()`` (frames alone get no units)."""
    method = getattr(view, "export_tables", None)
    if not callable(method):
        return {}
    out = {}
    for name, value in (method() or {}).items():
        frame, units = value if isinstance(value, tuple) else (value, None)
        if frame is not None and len(frame.columns):
            out[name] = (frame, units)
    return out


def _has_tables(view) -> bool:
    try:
        return bool(_tables(view))
    except Exception:  # noqa: BLE001 - no fit yet, for instance: no table
        return False


def _link(data: bytes, name: str) -> str:
    from ._base import download_link

    mime = {"png": "image/png", "svg": "image/svg+xml", "csv": "text/csv", "xlsx": XLSX_MIME}[name.rsplit(".", 1)[1]]
    return download_link(data, name, mime, name)


def attach_exports(view) -> None:
    """Give *view* its export bar (once), under its content; views with their own exports keep theirs."""
    if getattr(view, "exports", None) is not None or getattr(view, "figure_export", None) is not None:
        return
    widget = getattr(view, "widget", None)
    if widget is None or not hasattr(widget, "children"):
        return
    from ._figure_render import visible_figures

    if not visible_figures(widget) and not callable(getattr(view, "export_tables", None)):
        return  # nothing to save in this view (an upload form, for instance)
    name = getattr(view, "export_name", None) or type(view).__name__.lower()
    exports = ViewExports(view, name)
    view.exports = exports
    widget.children = (*widget.children, exports.widget)


__all__ = ["ViewExports", "attach_exports", "default_caption", "safe_table_bytes"]
