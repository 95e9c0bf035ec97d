"""Reading a CSV or XLSX table, and the one error model of every import.

Every cell is read as it is; rows are numbered as a spreadsheet shows them (the header row is
row 1 when it is the first row); every problem and warning is collected as a :class:`Problem`
naming its row and column, and the problems are raised together in one :class:`ImportDataError`.

One header convention: ``Name [units]`` (units optional) and ``"<factor> (achieved)"`` (optionally
followed by ``[units]``) for the setting actually reached.
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .._errors import ImportDataError, describe

_HEADER = re.compile(r"^\s*(?P<name>.*?)\s*(?:\[(?P<units>[^\]]*)\])?\s*$", re.DOTALL)
_MARK = re.compile(r"\s*\(achieved\)\s*", re.IGNORECASE)

@dataclass(frozen=True)
class Problem:
    """One problem found in an imported table. ``row`` counts the header as row 1 (None: whole file)."""

    row: int | None
    column: str | None
    message: str
    severity: str = "error"

    def __str__(self) -> str:
        where = []
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column {self.column!r}")
        prefix = ", ".join(where)
        return f"{self.severity}: {prefix + ': ' if prefix else ''}{self.message}"


@dataclass(frozen=True)
class ImportReport:
    """What an import did: runs added, values recorded, and the warnings (values kept)."""

    source: str
    runs_added: tuple = ()
    values_recorded: int = 0
    warnings: tuple = field(default_factory=tuple)


def parse_header(header: str) -> tuple[str, str | None, bool]:
    """Name, units and whether the column holds achieved settings (the ``"<factor> (achieved)"`` convention).

    >>> parse_header("Oven (achieved) [°C]")
    ('Oven', '°C', True)
    >>> parse_header("Impact [J]")
    ('Impact', 'J', False)
    """
    mark = _MARK.search(header)
    if mark:
        name, units = split_header((header[: mark.start()] + " " + header[mark.end():]).strip())
        return name, units, True
    name, units = split_header(header)
    return name, units, False


def split_header(header: str) -> tuple[str, str | None]:
    """Split ``"Oven [°C]"`` into ``("Oven", "°C")``; no units gives ``None``.

    >>> split_header("Oven [°C]")
    ('Oven', '°C')
    >>> split_header("Dwell")
    ('Dwell', None)
    """
    match = _HEADER.match(header)
    if not match:  # pragma: no cover - the pattern matches every string
        return header.strip(), None
    units = match.group("units")
    return match.group("name"), (units.strip() if units is not None else None)


# ----- reading ---------------------------------------------------------------------------------
def read_table(source, *, sheet: str | None = None, delimiter: str = ",", header_row: int | None = None
               ) -> pd.DataFrame:
    """Read a CSV or XLSX file into a DataFrame of raw cell values (object dtype, header from row 1).

    Parameters
    ----------
    source : str, Path, bytes or file-like
        A ``.csv`` / ``.xlsx`` path, or the bytes of a CSV (UTF-8) or XLSX file.
    sheet : str, optional
        Worksheet of an XLSX file (default: the first).
    delimiter : str
        CSV field separator.
    header_row : int, optional
        The row (1 = first) holding the column names; default the first non-blank row. Rows
        above it (a title, notes) are ignored.

    Raises
    ------
    ImportDataError
        The file cannot be read, is empty, has a blank or repeated header, or a row with
        more cells than the header.
    """
    name, raw = _source_bytes(source)
    if raw[:4] == b"PK\x03\x04" or name.lower().endswith((".xlsx", ".xlsm")):
        rows = _xlsx_rows(raw, name, sheet)
    else:
        rows = _csv_rows(raw, name, delimiter)
    if header_row is not None:
        if isinstance(header_row, bool) or not isinstance(header_row, int) or not 1 <= header_row <= len(rows):
            raise ImportDataError(
                f"The 'header_row' must be a row number from 1 to {len(rows)}. Got {describe(header_row)} instead."
            )
        rows = [[None]] * (header_row - 1) + rows[header_row - 1:]
        if all(_blank(cell) for cell in rows[header_row - 1]):
            raise ImportDataError(f"The 'header_row' {header_row} of '{name}' is blank.")
    return _to_frame(rows, name)


def _source_bytes(source) -> tuple[str, bytes]:
    if isinstance(source, (bytes, bytearray)):
        return "<bytes>", bytes(source)
    if isinstance(source, (str, Path)):
        path = Path(source)
        try:
            return str(path), path.read_bytes()
        except OSError as exc:
            raise ImportDataError(f"The file '{path}' could not be read: {exc.strerror or exc}.") from None
    if hasattr(source, "read"):
        data = source.read()
        if isinstance(data, str):
            data = data.encode("utf-8")
        return getattr(source, "name", "<stream>"), data
    raise ImportDataError(f"The 'source' must be a path, bytes or a file object. Got {describe(source)} instead.")


def _csv_rows(raw: bytes, name: str, delimiter: str) -> list[list]:
    if not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in "\r\n\"":
        raise ImportDataError(f"The 'delimiter' must be one character. Got {describe(delimiter)} instead.")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ImportDataError(
            f"The file '{name}' is not UTF-8 text (bad byte at offset {exc.start}); save the CSV as UTF-8."
        ) from None
    if "\x00" in text:
        raise ImportDataError(f"The file '{name}' holds NUL bytes: it is not a CSV text file.")
    try:
        return [row for row in csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=True)]
    except csv.Error as exc:
        raise ImportDataError(f"The file '{name}' is not valid CSV: {exc}.") from None


def _xlsx_rows(raw: bytes, name: str, sheet: str | None) -> list[list]:
    import openpyxl

    try:
        book = openpyxl.load_workbook(io.BytesIO(raw), read_only=True, data_only=True)
    except Exception as exc:  # openpyxl/zipfile raise many types for a damaged file
        raise ImportDataError(f"The file '{name}' is not a readable XLSX workbook: {type(exc).__name__}.") from None
    try:
        if sheet is None:
            ws = book.worksheets[0] if book.worksheets else None
            if ws is None:
                raise ImportDataError(f"The workbook '{name}' has no worksheet.")
        elif sheet in book.sheetnames:
            ws = book[sheet]
        else:
            raise ImportDataError(f"The 'sheet' must be one of {book.sheetnames}. Got {describe(sheet)} instead.")
        try:
            return [list(row) for row in ws.iter_rows(values_only=True)]
        except ImportDataError:
            raise
        except Exception as exc:  # a damaged sheet part
            raise ImportDataError(f"The worksheet of '{name}' could not be read: {type(exc).__name__}.") from None
    finally:
        book.close()


def _to_frame(rows: list[list], name: str) -> pd.DataFrame:
    """Header = the first non-blank row; blank rows are skipped and blank columns dropped.

    The index of the result is the spreadsheet row number of each record (the first row is 1).
    """
    filled = [i for i, row in enumerate(rows) if not all(_blank(cell) for cell in row)]
    if not filled:
        raise ImportDataError(f"The file '{name}' is empty: it needs a header row.")
    top = filled[0]
    header_row = top + 1
    header = list(rows[top])
    while header and _blank(header[-1]):
        header.pop()
    problems = []
    names = []
    for j, cell in enumerate(header):
        text = "" if cell is None else str(cell).strip()
        if text and text in names:
            problems.append(Problem(header_row, text, f"the header {text!r} appears twice (columns "
                                                      f"{names.index(text) + 1} and {j + 1})"))
        names.append(text)
    body, numbers = [], []
    for i in filled[1:]:
        cells = list(rows[i])
        while len(cells) > len(names) and _blank(cells[-1]):
            cells.pop()
        if len(cells) > len(names):
            problems.append(Problem(i + 1, _letter(len(names)), f"the row has {len(cells)} cells but the header "
                                                                f"(row {header_row}) has {len(names)}"))
            continue
        body.append(cells + [None] * (len(names) - len(cells)))
        numbers.append(i + 1)
    for j, text in enumerate(names):
        if not text:
            used = [numbers[k] for k, row in enumerate(body) if not _blank(row[j])]
            if used:
                problems.append(Problem(header_row, _letter(j), f"the header cell is blank but the column has "
                                                                f"values (first in row {used[0]}); name it"))
    if problems:
        raise _error(name, problems)
    keep = [j for j, text in enumerate(names) if text]
    frame = pd.DataFrame([[row[j] for j in keep] for row in body], columns=[names[j] for j in keep], dtype=object)
    frame.index = pd.Index(numbers, dtype="int64")  # the spreadsheet row of each record
    frame.attrs["header_row"] = header_row
    return frame


def _blank(cell) -> bool:
    """An empty cell: None, blank text, or the NaN / NA that a DataFrame holds for one."""
    if cell is None or cell is pd.NA or cell is pd.NaT:
        return True
    if isinstance(cell, (float, np.floating)):
        return bool(np.isnan(cell))
    return isinstance(cell, str) and not cell.strip()


def _letter(j: int) -> str:
    letters = ""
    j += 1
    while j:
        j, rem = divmod(j - 1, 26)
        letters = chr(65 + rem) + letters
    return f"column {letters}"


def _error(name: str, problems) -> ImportDataError:
    shown = "\n".join(f"  - {p}" for p in problems[:20])
    more = f"\n  ... and {len(problems) - 20} more" if len(problems) > 20 else ""
    return ImportDataError(f"The file '{name}' has {len(problems)} problem(s):\n{shown}{more}", problems)


def _number(cell, decimal: str = "."):
    """(value, problem text): value None for a blank cell."""
    if _blank(cell):
        return None, None
    if isinstance(cell, bool):
        return None, f"{cell!r} is not a number"
    if isinstance(cell, (int, float, np.integer, np.floating)):
        try:
            value = float(cell)
        except OverflowError:
            return None, "the number is too large"
    elif isinstance(cell, str):
        text = cell.strip()
        if decimal != ".":
            text = text.replace(decimal, ".")
        if not re.fullmatch(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?", text):
            return None, f"{describe(cell)} is not a number"
        value = float(text)
    else:
        return None, f"{describe(cell)} is not a number"
    if not math.isfinite(value):
        return None, f"{describe(cell)} is not a finite number"
    return value, None



__all__ = ["ImportReport", "Problem", "parse_header", "read_table", "split_header"]
