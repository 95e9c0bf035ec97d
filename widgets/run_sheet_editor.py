"""The editable run sheet: enter and correct responses and achieved settings run by run, then save.

Every change goes through the :class:`levelwise.Study` (``record`` / ``record_achieved``, each with its
audit entry) and refits the views once. Save writes the study file atomically (``Study.save``); the
sheet says whether there are unsaved changes.
"""

from __future__ import annotations

import html
from pathlib import Path

import ipywidgets as ipw

from levelwise import LevelwiseError

from ._base import View
from ._number import parse_number
from .style import fmt

REASON = "entered in the workbench"

#: The folder of the study files shipped with levelwise (the invented demos): Save never writes there. Found
#: beside this package (``levelwise/widgets`` -> ``levelwise/dashboards/data``, also in the source tree)
#: without importing the dashboards (imports point one way).
SHIPPED_DATA = Path(__file__).resolve().parent.parent / "dashboards" / "data"


def _is_shipped(path: Path) -> bool:
    try:
        return path.expanduser().resolve().is_relative_to(SHIPPED_DATA)
    except (OSError, RuntimeError):
        return False


def _text_of(value) -> str:
    if value is None:
        return ""
    try:
        if value != value:  # NaN
            return ""
    except TypeError:
        pass
    return value if isinstance(value, str) else fmt(value)


class RunSheetEditor(View):
    """Responses and achieved settings per run, editable; Save and the unsaved-changes state.

    Attributes
    ----------
    cells : dict
        ``{(run id, column): ipywidgets.Text}``; columns are response names and ``"<factor> (achieved)"``.
    path : ipywidgets.Text
        Where Save writes (``lw-save-path``). Empty until the user gives a path when the study came from the
        shipped demo: Save then asks for one, and never writes into the shipped data folder.
    save_button : ipywidgets.Button
        ``lw-save``.
    state : ipywidgets.HTML
        ``lw-save-state``: "Unsaved changes" or "Saved".
    """

    def __init__(self, shared, *, path=None):
        super().__init__(shared)
        self.cells = {}
        self.grid = ipw.GridBox().add_class("lw-run-sheet-grid")
        if path is not None and _is_shipped(Path(path)):
            path = None  # the shipped demo is never the place to save: ask for a path
        self.path = ipw.Text(value=str(path or ""), description="Save to", placeholder="folder/study.json",
                             layout=ipw.Layout(width="460px")).add_class("lw-save-path")
        self.save_button = ipw.Button(
            description="Save the study", icon="", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-save")
        self.state = ipw.HTML().add_class("lw-save-state")
        self.show_achieved = ipw.Checkbox(value=False, description="Also show the achieved settings",
                                          indent=False, layout=ipw.Layout(width="auto")).add_class("lw-show-achieved")
        self.show_achieved.observe(self.safely(lambda _: self._build()), names="value")
        self.save_button.on_click(self.safely(lambda _: self.save()))
        self._saved_revision = shared.study.revision if path else None
        self._edited = False
        self.widget = ipw.VBox([
            ipw.HTML("<p>Type a value and press Enter or leave the cell; a blank cell clears the value.</p>"),
            self.show_achieved,
            ipw.Box([self.grid], layout=ipw.Layout(overflow="auto", max_height="480px", max_width="100%")),
            ipw.HBox([self.path, self.save_button, self.state], layout=ipw.Layout(flex_flow="row wrap")),
            self.status,
        ]).add_class("lw-run-sheet-editor")
        self._build()
        self.watch(self._build, names=["study"])
        self.watch(self._refresh, names=["revision"])

    @property
    def columns(self) -> list[str]:
        study = self.shared.study
        achieved = [f"{f.name} (achieved)" for f in study.factors] if self.show_achieved.value else []
        return list(study.response_names) + achieved

    def _build(self, change=None):
        study = self.shared.study
        if change is not None and getattr(change, "name", None) == "study":
            self._saved_revision, self._edited = None, True  # another study: not saved anywhere yet
        planned = study.planned()
        factors = study.factor_names
        head = ["run", *factors, *self.columns]
        children = [ipw.HTML(f"<b>{html.escape(h)}</b>") for h in head]
        self.cells = {}
        for run in study.run_ids:
            children.append(ipw.HTML(f"<b>{run}</b>"))
            children += [ipw.HTML(html.escape(_text_of(planned.at[run, f]))) for f in factors]
            for column in self.columns:
                cell = ipw.Text(continuous_update=False, layout=ipw.Layout(width="90px")).add_class("lw-cell")
                cell.add_class(f"lw-cell-{run}-{self.columns.index(column)}")
                cell.observe(self.safely(lambda change, r=run, c=column: self._edit(r, c, change["new"])),
                             names="value")
                self.cells[(run, column)] = cell
                children.append(cell)
        self.grid.layout = ipw.Layout(grid_template_columns=f"repeat({len(head)}, max-content)", grid_gap="2px 8px")
        self.grid.children = children
        self._refresh()

    def _refresh(self, change=None):
        study = self.shared.study
        data = study.data(apply_exclusions=False)
        achieved = study.achieved()
        self._quiet = True
        try:
            for (run, column), cell in self.cells.items():
                if column.endswith(" (achieved)"):
                    value = achieved.at[run, column[: -len(" (achieved)")]]
                else:
                    value = data.at[run, column] if column in data else None
                cell.value = _text_of(value)
        finally:
            self._quiet = False
        if self._saved_revision is None and not self._edited:
            self.state.value = ('<span class="lw-not-saved">Not saved to a file yet'
                                + ("" if self.path.value.strip() else ": type a path in 'Save to'") + "</span>")
        elif self._saved_revision != study.revision:
            self.state.value = '<span class="lw-unsaved">Unsaved changes</span>'
        else:
            self.state.value = f'<span class="lw-saved">Saved to {html.escape(self.path.value)}</span>'

    def _edit(self, run, column, text):
        if getattr(self, "_quiet", False):
            return
        self.shared._check_writable("entering results")  # before the study changes, not after
        study = self.shared.study
        text = text.strip()
        value = None
        if text:
            try:
                value = parse_number(text, field=f"Run {run}, {column}")  # a decimal comma is read as one
            except LevelwiseError as exc:
                self._refresh()
                raise LevelwiseError(f"{exc} The value was not changed.") from None
        try:
            if column.endswith(" (achieved)"):
                study.record_achieved(run, column[: -len(" (achieved)")], value, overwrite=True, reason=REASON)
            else:  # a count is checked here: whole, not negative, passes within the trials (named by run)
                study.record(run, column, value, overwrite=True, reason=REASON)
        except LevelwiseError as exc:
            self._refresh()  # the cell shows the study's value again
            raise LevelwiseError(f"{exc} The value was not changed.") from None
        self.status.value = ""
        self._edited = True
        self.shared.refresh()

    def save(self) -> Path:
        """Write the study atomically to the path in the 'Save to' field."""
        self.shared._check_writable("saving the study")
        text = self.path.value.strip()
        if not text:
            self.path.add_class("lw-needs-path")
            raise LevelwiseError("Type where to save the study ('Save to', a .json file) first.")
        path = Path(text).expanduser()
        if _is_shipped(path):
            self.path.add_class("lw-needs-path")
            raise LevelwiseError(f"The study files shipped with levelwise ({SHIPPED_DATA}) are never overwritten: "
                                 f"type another path in 'Save to' (a .json file of your own). Got {text!r}.")
        self.path.remove_class("lw-needs-path")
        self.shared.study.save(path)
        self._saved_revision = self.shared.study.revision
        self._refresh()
        return path

    def export_tables(self) -> dict:
        """The tables for "Export table (CSV, XLSX)": the study's runs."""
        from ._view_tables import run_sheet_tables

        return run_sheet_tables(self)
