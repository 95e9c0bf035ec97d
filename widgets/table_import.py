"""Bring your own table into the workbench: upload a CSV/XLSX, confirm the guessed columns, get a study.

The tool guesses which columns are factors, responses, the run id and achieved settings
(:func:`levelwise.study.guess_columns`); the user confirms them and sets each factor's low, high,
levels, units and whether it is hard to change (reset only between whole plots) in the same step.
The import goes through :meth:`levelwise.Study.from_table` (the one validator): every problem is
listed by spreadsheet row and column and nothing changes; every column not used is listed.
"""

from __future__ import annotations

import html
import warnings

import ipywidgets as ipw

from levelwise import Factor, LevelwiseError, read_table
from levelwise.study import guess_columns, split_header, study_from_table

from ._base import View

ROLES = [("factor", "factor"), ("response", "response"), ("run id", "run"), ("achieved setting", "achieved"),
         ("not used", "unused")]


def _numbers(cells):
    """The numbers of a column that is mostly numbers (its text cells are then problems of the import)."""
    out = []
    for cell in cells:
        try:
            out.append(float(cell))
        except (TypeError, ValueError):
            pass
    return out if out and len(out) * 2 > len(cells) else None


class TableImport(View):
    """Upload (``lw-upload``), the column mapping (``lw-mapping``), "Make the study" (``lw-import``).

    ``rows`` maps each column of the table to its editors: ``role`` (Dropdown), and for a factor
    ``low``, ``high`` (Text), ``levels`` (Text, comma-separated, for a factor set by name), ``units`` and
    ``hard`` (Checkbox ``lw-map-hard``: hard to change, reset only between whole plots; a ``whole_plot`` column
    of the table says which runs share a reset, else each run is its own whole plot).
    """

    def __init__(self, shared):
        super().__init__(shared)
        self.upload = ipw.FileUpload(accept=".csv,.xlsx", multiple=False, description="Upload a table (CSV or XLSX)",
                                    layout=ipw.Layout(width="auto"))
        self.upload.add_class("lw-upload")
        self.mapping = ipw.VBox().add_class("lw-mapping")
        self.import_button = ipw.Button(description="Make the study from this table", disabled=True,
                                        layout=ipw.Layout(width="auto")).add_class("lw-import")
        self.report = ipw.HTML().add_class("lw-import-report")
        self.rows, self.frame, self.name = {}, None, ""
        self.upload.observe(self.safely(self._on_upload), names="value")
        self.import_button.on_click(self.safely(lambda _: self.make_study()))
        self.widget = ipw.VBox([
            ipw.HTML("<p>One row per run, column names in the first row (<code>Name [units]</code>). "
                     "The columns are guessed below: check each one, then make the study.</p>"),
            self.upload, self.mapping, self.import_button, self.report, self.status,
        ]).add_class("lw-table-import")

    def _on_upload(self, change=None):
        files = self.upload.value
        if not files:
            return
        item = files[0]
        self.load(bytes(item["content"]), item["name"])

    def load(self, raw: bytes, name: str = "table.csv") -> dict:
        """Read the table and show the guessed mapping; returns the guess."""
        self.report.value = ""
        self.status.value = ""
        frame = read_table(raw)
        self.frame, self.name = frame, name
        guess = guess_columns(frame)
        rows, boxes = {}, []
        for column in frame.columns:
            role = ("run" if column == guess["run"] else "factor" if column in guess["factors"]
                    else "response" if column in guess["responses"]
                    else "achieved" if column in guess["achieved"].values() else "unused")
            label = ipw.HTML(f"<b>{html.escape(str(column))}</b>", layout=ipw.Layout(width="180px"))
            row = {"role": ipw.Dropdown(options=ROLES, value=role, layout=ipw.Layout(width="150px"))}
            cells = [c for c in frame[column] if c is not None and str(c).strip() != ""]
            numbers = _numbers(cells)
            _, units = split_header(str(column))
            row["low"] = ipw.Text(value=f"{min(numbers):g}" if numbers else "", description="low",
                                  layout=ipw.Layout(width="130px"), style={"description_width": "initial"})
            row["high"] = ipw.Text(value=f"{max(numbers):g}" if numbers else "", description="high",
                                   layout=ipw.Layout(width="130px"), style={"description_width": "initial"})
            levels = "" if numbers else ", ".join(dict.fromkeys(str(c).strip() for c in cells))
            row["levels"] = ipw.Text(value=levels, description="levels", layout=ipw.Layout(width="200px"),
                                     style={"description_width": "initial"})
            row["units"] = ipw.Text(value=units or "", description="units", layout=ipw.Layout(width="120px"),
                                    style={"description_width": "initial"})
            row["hard"] = ipw.Checkbox(value=False, description="hard to change", indent=False,
                                       layout=ipw.Layout(width="140px"))
            for key in ("role", "low", "high", "levels", "units", "hard"):
                row[key].add_class(f"lw-map-{key}")
            rows[column] = row
            boxes.append(ipw.HBox([label, *row.values()], layout=ipw.Layout(flex_flow="row wrap"))
                         .add_class("lw-map-row"))
        self.rows = rows
        self.mapping.children = boxes
        self.import_button.disabled = False
        return guess

    def _factor(self, column, row) -> Factor:
        name, _ = split_header(str(column))
        units, hard = row["units"].value.strip(), bool(row["hard"].value)
        if row["levels"].value.strip() and not (row["low"].value.strip() and row["high"].value.strip()):
            return Factor(name, units=units, levels=[t.strip() for t in row["levels"].value.split(",") if t.strip()],
                          hard_to_change=hard)
        try:
            low, high = float(row["low"].value), float(row["high"].value)
        except ValueError:
            raise LevelwiseError(f"Column {column!r}: low and high must be numbers; got "
                                 f"{row['low'].value!r} and {row['high'].value!r}.") from None
        return Factor(name, low, high, units=units, hard_to_change=hard)

    def make_study(self):
        """Build the study from the confirmed mapping and switch every view to it."""
        if self.frame is None:
            raise LevelwiseError("Choose a CSV or XLSX file first.")
        roles = {column: row["role"].value for column, row in self.rows.items()}
        factors = [self._factor(c, self.rows[c]) for c, r in roles.items() if r == "factor"]
        responses = [c for c, r in roles.items() if r == "response"]
        runs = [c for c, r in roles.items() if r == "run"]
        if len(runs) > 1:
            raise LevelwiseError(f"Only one column can be the run id; {runs} are.")
        achieved = {}
        for column, role in roles.items():
            if role == "achieved":
                name = split_header(str(column).replace("(achieved)", ""))[0].strip()
                achieved[name] = column
        if not factors or not responses:
            raise LevelwiseError("Mark at least one column as a factor and one as a response.")
        frame = self.frame.copy()
        frame.attrs.update(self.frame.attrs, source_name=self.name)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # the report below lists every warning
                study, report = study_from_table(frame, factors=factors, responses=responses,
                                                 run=runs[0] if runs else None, achieved=achieved,
                                                 title=self.name.rsplit(".", 1)[0])
        except LevelwiseError as exc:  # ImportDataError lists its problems; a split-plot refusal is one
            problems = getattr(exc, "problems", ()) or (str(exc),)
            self.report.value = ("<b>Nothing was imported. Problems:</b><ul class='lw-import-problems'>"
                                 + "".join(f"<li>{html.escape(str(p))}</li>" for p in problems) + "</ul>")
            return None
        self.shared.use_study(study)
        notes = "".join(f"<li>{html.escape(str(w))}</li>" for w in report.warnings)
        self.report.value = (f"<span class='lw-import-done'>Made a study of {len(study.run_ids)} runs from "
                             f"{html.escape(self.name)}: factors {html.escape(', '.join(study.factor_names))}; "
                             f"responses {html.escape(', '.join(study.response_names))}"
                             + (f"; hard to change: {html.escape(', '.join(study.hard_to_change))}"
                                if study.hard_to_change else "") + ".</span>"
                             + (f"<ul>{notes}</ul>" if notes else ""))
        return study
