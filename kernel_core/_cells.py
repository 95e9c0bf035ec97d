"""Spreadsheet cells that stay data: text that a spreadsheet would read as a formula is written as text.

A text cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return can be taken as a formula
by a spreadsheet program (CSV injection). Every export of levelwise therefore writes such text

* in CSV with a single-quote prefix (the usual guidance, OWASP "CSV Injection"), and
* in XLSX as a cell of string type, never a formula cell.

Numbers stay numbers (a negative number is a number, not text). :func:`unguard_text` undoes the CSV prefix,
so that reading our own exports back restores the original text.
"""

from __future__ import annotations

import pandas as pd

#: The first characters that make a spreadsheet read a text cell as a formula.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _needs_quote(text: str) -> bool:
    # Text that already starts with quotes before a formula character gets one more, so the round trip is exact.
    return text.lstrip("'")[:1] in FORMULA_START and text[:1] in (*FORMULA_START, "'")


def guard_text(value):
    """*value* with a single-quote prefix if it is text a spreadsheet would read as a formula; else unchanged."""
    if isinstance(value, str) and value and _needs_quote(value):
        return "'" + value
    return value


def unguard_text(value):
    """Undo :func:`guard_text` (text only; anything else is returned unchanged)."""
    if isinstance(value, str) and value.startswith("'") and _needs_quote(value[1:]):
        return value[1:]
    return value


def guarded_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of *frame* with every text cell and column name passed through :func:`guard_text`."""
    out = frame.copy()
    for column in out.columns:
        if out[column].dtype == object or pd.api.types.is_string_dtype(out[column].dtype):
            out[column] = out[column].map(guard_text)
        elif isinstance(out[column].dtype, pd.CategoricalDtype):
            out[column] = out[column].astype(object).map(guard_text)
    out.columns = [guard_text(c) for c in out.columns]
    return out


def write_csv(frame: pd.DataFrame, path, **kwargs) -> None:
    """``frame.to_csv`` with text that could be a formula written as text (see the module).

    Lines end in CRLF (RFC 4180), so that a field holding a carriage return is quoted and reads back whole.
    """
    kwargs.setdefault("lineterminator", "\r\n")
    guarded_frame(frame).to_csv(path, **kwargs)


def text_cells_as_strings(book) -> None:
    """Make every formula-looking text cell of an openpyxl workbook a cell of string type (never ``f``).

    openpyxl turns any text starting with ``=`` into a formula cell; our exports hold no formulas, so every
    such cell was text and is written back as text.
    """
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                if cell.data_type == "f" or (isinstance(cell.value, str) and cell.value[:1] in FORMULA_START):
                    cell.data_type = "s"


def write_xlsx(sheets, path) -> None:
    """Write ``{sheet name: frame}`` to an XLSX file whose text cells are all of string type."""
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        for name, frame in sheets.items():
            frame.to_excel(writer, sheet_name=name[:31], index=False)
        text_cells_as_strings(writer.book)
