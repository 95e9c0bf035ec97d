"""The predictions view: candidate settings with their predicted mean, CI, PI and extrapolation flag.

The candidate rows belong to this view (an exploration: allowed on a read-only
dashboard; nothing in the study changes). Every number comes from ``Fit.predict``
for each response; the table refreshes whenever a fit changes.
"""

from __future__ import annotations

import base64
import html

import ipywidgets as ipw
import numpy as np
import pandas as pd

from levelwise import LevelwiseError
from levelwise._cells import guarded_frame
from levelwise._errors import describe

from . import _count_display as counts
from ._base import View
from ._number import NumberField
from .shared_model import SharedModel, is_categorical
from .style import fmt, inert_html


class PredictionsView(View):
    """A table of candidate settings and their predictions for every response.

    Parameters
    ----------
    shared : SharedModel

    Attributes
    ----------
    rows : list of dict
        The candidate settings (factor name -> natural value), in table order.
    table : ipywidgets.HTML
        The table (``lw-predictions-table``); extrapolated rows carry ``lw-extrapolated``.
    add_button : ipywidgets.Button
        "Add current settings" (``lw-add-prediction``).
    row_choice : ipywidgets.Dropdown
        The row being edited (``lw-prediction-row``).
    editors : dict of str -> NumberField (or Dropdown for a categorical factor)
        One per factor (``lw-prediction-edit``); ``save_button`` (``lw-save-prediction``) writes them
        to the chosen row, ``remove_button`` (``lw-remove-prediction``) drops it.
    download : ipywidgets.HTML
        A link to the table as CSV (``lw-predictions-csv``).
    widget : ipywidgets.VBox
        The whole view (``lw-predictions-view``).
    """

    def __init__(self, shared: SharedModel):
        super().__init__(shared)
        self.rows = []
        self.table = ipw.HTML().add_class("lw-predictions-table")
        self.add_button = ipw.Button(
            description="Add current settings", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-add-prediction")
        self.row_choice = ipw.Dropdown(description="Row", options=[]).add_class("lw-prediction-row")
        self.editors = {}
        self.editor_box = ipw.HBox(layout=ipw.Layout(flex_flow="row wrap"))
        self.save_button = ipw.Button(description="Save row").add_class("lw-save-prediction")
        self.remove_button = ipw.Button(description="Remove row").add_class("lw-remove-prediction")
        self.download = ipw.HTML().add_class("lw-predictions-csv")
        self.add_button.on_click(self.safely(lambda _: self.add_current()))
        self.save_button.on_click(self.safely(lambda _: self._save_edit()))
        self.remove_button.on_click(self.safely(lambda _: self.remove_row(self.row_choice.value)))
        self.row_choice.observe(self.safely(self._load_edit), names="value")
        self.widget = ipw.VBox(
            [
                self.add_button,
                self.table,
                ipw.HBox([self.row_choice, self.editor_box]),
                ipw.HBox([self.save_button, self.remove_button, self.download]),
                self.status,
            ]
        ).add_class("lw-predictions-view")
        self.watch(self._on_factors, names=["factors"])
        self.watch(self._render, names=["fits", "error", "units"])
        self._on_factors()

    def _on_factors(self, change=None):
        """One editor per factor; a new set of factors starts an empty table."""
        for box in self.editors.values():
            box.close()
        self.editors = {}
        for f in self.shared.factors:
            if is_categorical(f):
                box = ipw.Dropdown(options=list(f.levels), description=inert_html(f.label),
                                   description_allow_html=True, style={"description_width": "initial"})
            else:
                box = NumberField(0.0, description=inert_html(f.label), description_allow_html=True,
                                  style={"description_width": "initial"}, layout=ipw.Layout(width="200px"))
            self.editors[f.name] = box.add_class("lw-prediction-edit")
        self.editor_box.children = list(self.editors.values())
        if change is not None:
            self.rows = []
        self._render()

    # ----- methods with a code equivalent -------------------------------------------------------
    def add_current(self) -> None:
        """Append the current factor settings as a candidate row."""
        self.rows = [*self.rows, dict(self.shared.settings)]
        self._render()
        self.row_choice.value = len(self.rows) - 1

    def add_row(self, **settings) -> None:
        """Append a candidate row; unnamed factors take the current settings."""
        self.rows = [*self.rows, self._checked({**self.shared.settings, **settings})]
        self._render()

    def edit_row(self, index: int, **settings) -> None:
        """Change some settings of row *index*."""
        index = self._index(index)
        rows = list(self.rows)
        rows[index] = self._checked({**rows[index], **settings})
        self.rows = rows
        self._render()

    def remove_row(self, index: int) -> None:
        """Drop row *index*."""
        index = self._index(index)
        self.rows = [row for i, row in enumerate(self.rows) if i != index]
        self._render()

    def to_frame(self) -> pd.DataFrame:
        """The table: settings, then per response mean, CI, PI and the extrapolation flag."""
        names = [f.name for f in self.shared.factors]
        frame = pd.DataFrame(self.rows, columns=names)
        out = frame.copy()
        for response in self.shared.responses:
            current = self.shared.fits.get(response)
            if current is None or frame.empty:
                continue
            pred = current.predict(frame)
            k = counts.scale(current)  # a probability in % (the table and its CSV alike)
            for column in ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "extrapolated"):
                out[f"{response} {column}"] = pred[column].to_numpy() * (k if column != "extrapolated" else 1)
        return out

    def to_csv(self) -> str:
        """The table as CSV text (text that a spreadsheet would read as a formula gets a quote prefix)."""
        return guarded_frame(self.to_frame()).to_csv(index_label="row")

    # ----- helpers ------------------------------------------------------------------------------
    def _index(self, index) -> int:
        if isinstance(index, bool) or not isinstance(index, (int, np.integer)) or not 0 <= index < len(self.rows):
            raise LevelwiseError(
                f"The row must be an integer from 0 to {len(self.rows) - 1}. Got {describe(index)} instead."
            )
        return int(index)

    def _checked(self, settings: dict) -> dict:
        known = {f.name: f for f in self.shared.factors}
        unknown = sorted(set(settings) - set(known))
        if unknown:
            raise LevelwiseError(f"A candidate row names unknown factor(s) {unknown}; known: {sorted(known)}.")
        clean = {}
        for name, value in settings.items():
            if is_categorical(known[name]):
                matches = [lv for lv in known[name].levels if lv == value or str(lv) == str(value)]
                if not matches:
                    raise LevelwiseError(
                        f"The setting of {name!r} must be one of its levels {list(known[name].levels)}. "
                        f"Got {describe(value)} instead."
                    )
                clean[name] = matches[0]
                continue
            try:
                number = float(value)
            except (TypeError, ValueError):
                raise LevelwiseError(f"The setting of {name!r} must be a number. Got {describe(value)}.") from None
            if not np.isfinite(number):
                raise LevelwiseError(f"The setting of {name!r} must be finite. Got {value!r} instead.")
            clean[name] = number
        return clean

    def _save_edit(self):
        index = self.row_choice.value
        if index is None:
            raise LevelwiseError("Choose a row to edit first (or add the current settings).")
        self.edit_row(index, **{name: box.value for name, box in self.editors.items()})

    def _load_edit(self, change=None):
        index = self.row_choice.value
        if index is None or not 0 <= index < len(self.rows):
            return
        for name, box in self.editors.items():
            box.value = self.rows[index][name]

    def _render(self, change=None):
        self.show_shared_error()
        options = [(f"Row {i + 1}", i) for i in range(len(self.rows))]
        if list(self.row_choice.options) != options:
            keep = self.row_choice.value
            self.row_choice.options = options
            self.row_choice.value = keep if keep is not None and keep < len(options) else (
                options[-1][1] if options else None
            )
        if not self.rows:
            self.table.value = "No candidate settings yet: move the sliders, then “Add current settings”."
            self.download.value = ""
            return
        frame = self.to_frame()
        factors = self.shared.factors
        head = "".join(f"<th>{html.escape(f.label)}</th>" for f in factors)
        for response in self.shared.responses:
            fitted = self.shared.fits.get(response)
            units = counts.units(fitted, self.shared.units.get(response, ""))
            unit = f" ({html.escape(units)})" if units else ""
            head += (f"<th>{html.escape(response)}: {counts.quantity(fitted)}{unit}</th>"
                     f"<th>95% confidence interval for the mean</th><th>95% prediction interval for one run</th>")
        head += "<th>Inside the tested region?</th>"
        body = []
        for i, row in frame.iterrows():
            cells = "".join(
                f"<td>{html.escape(str(row[f.name])) if is_categorical(f) else fmt(row[f.name])}</td>"
                for f in factors
            )
            outside = False
            for response in self.shared.responses:
                if f"{response} mean" not in frame:
                    cells += "<td>no fit</td><td></td><td></td>"
                    continue
                cells += (
                    f"<td>{fmt(row[f'{response} mean'])}</td>"
                    f"<td>{fmt(row[f'{response} ci_low'])} to {fmt(row[f'{response} ci_high'])}</td>"
                    + (f"<td>{counts.no_interval_html(self.shared.fits[response])}</td>"
                       if counts.family(self.shared.fits.get(response)) else
                       f"<td>{fmt(row[f'{response} pi_low'])} to {fmt(row[f'{response} pi_high'])}</td>")
                )
                outside = outside or bool(row[f"{response} extrapolated"])
            flag = "no: extrapolation" if outside else "yes"
            css = ' class="lw-extrapolated"' if outside else ""
            body.append(f"<tr{css}><th>{i + 1}</th>{cells}<td>{flag}</td></tr>")
        self.table.value = (
            f'<table class="lw-table"><thead><tr><th>Row</th>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>"
        )
        payload = base64.b64encode(self.to_csv().encode("utf-8")).decode("ascii")
        self.download.value = (
            f'<a download="levelwise-predictions.csv" href="data:text/csv;base64,{payload}">'
            "Download the table (CSV)</a>"
        )

    def export_tables(self) -> dict:
        """The table for "Export table (CSV, XLSX)": the candidate settings and their predictions."""
        names = {f.name: f.units for f in self.shared.factors if getattr(f, "units", "")}
        return {"predictions": (self.to_frame(), names)} if self.rows else {}
