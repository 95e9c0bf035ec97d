"""Moving a study in and out of spreadsheets: CSV / XLSX imports with validation, and table exports.

Imports read every cell as it is, validate the whole file and report *every* problem with its
row and column before anything changes: non-numeric values, duplicate run ids, factors
missing, values outside the design range (a warning; the value is kept), units in a header
(``"Oven [°C]"`` or ``"Oven (°C)"``) that differ from the study's, and values that would
overwrite a recorded one. Rows are numbered as a spreadsheet shows them: the header is row 1.

Exports write the run sheet and the coefficient, ANOVA and prediction tables as CSV or XLSX,
chosen by the file's suffix.
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

from ._errors import ImportDataError, LevelwiseError, describe

_HEADER = re.compile(r"^\s*(?P<name>.*?)\s*(?:\[(?P<b>[^\]]*)\]|\((?P<p>[^)]*)\))?\s*$", re.DOTALL)
_ACHIEVED = re.compile(r"^(?:(?P<a>.+?)\s+achieved|achieved\s+(?P<b>.+))$", re.IGNORECASE | re.DOTALL)


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


_MARK = re.compile(r"\s*\(achieved\)\s*", re.IGNORECASE)


def parse_header(header: str) -> tuple[str, str | None, bool]:
    """Name, units and whether the column holds achieved settings.

    ``"Oven (achieved) [°C]"``, ``"Oven (achieved)"`` (the run-sheet convention of
    :func:`levelwise.write_run_sheet`), ``"Oven achieved"`` and ``"achieved Oven"`` are achieved settings.

    >>> parse_header("Oven (achieved) [°C]")
    ('Oven', '°C', True)
    >>> parse_header("Impact (J)")
    ('Impact', 'J', False)
    """
    mark = _MARK.search(header)
    if mark:
        name, units = split_header((header[: mark.start()] + " " + header[mark.end():]).strip())
        return name, units, True
    name, units = split_header(header)
    words = _ACHIEVED.match(name)
    if words:
        return (words.group("a") or words.group("b")).strip(), units, True
    return name, units, False


def split_header(header: str) -> tuple[str, str | None]:
    """Split ``"Oven [°C]"`` or ``"Oven (°C)"`` into ``("Oven", "°C")``; no units gives ``None``.

    >>> split_header("Oven [°C]")
    ('Oven', '°C')
    >>> split_header("Dwell")
    ('Dwell', None)
    """
    match = _HEADER.match(header)
    if not match:  # pragma: no cover - the pattern matches every string
        return header.strip(), None
    units = match.group("b") if match.group("b") is not None else match.group("p")
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
    return cell is None or (isinstance(cell, str) and not cell.strip())


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


# ----- mapping ---------------------------------------------------------------------------------
def guess_mapping(columns, study) -> dict:
    """A column mapping guessed from header names (units in ``[...]`` or ``(...)`` are ignored).

    Returns a dict with ``"run"`` (a column or None), ``"factors"``, ``"achieved"`` and
    ``"responses"`` (each a dict of study name -> column). A header ``"Oven (achieved)"``,
    ``"Oven achieved"`` or ``"achieved Oven"`` maps to the achieved setting of ``Oven`` (see
    :func:`parse_header`); a header naming neither a factor nor a known response is left out.
    """
    mapping = {"run": None, "factors": {}, "achieved": {}, "responses": {}}
    factors = set(study.factor_names)
    responses = set(study.responses)
    for column in columns:
        base, _ = split_header(str(column))
        name, _, achieved = parse_header(str(column))
        if base.lower() == "run" and mapping["run"] is None:
            mapping["run"] = column
        elif achieved and name in factors and (_MARK.search(str(column)) or base not in factors | responses):
            # "(achieved)" always marks an achieved setting; "Oven achieved" only when no factor has that name.
            mapping["achieved"].setdefault(name, column)
        elif base in factors:
            mapping["factors"].setdefault(base, column)
        elif base in responses:
            mapping["responses"].setdefault(base, column)
    return mapping


def _check_mapping(mapping, columns, study, name) -> dict:
    if not isinstance(mapping, dict):
        raise ImportDataError(
            "The 'mapping' must be a dict with keys 'run', 'factors', 'achieved', 'responses'. "
            f"Got {describe(mapping)} instead."
        )
    unknown = set(mapping) - {"run", "factors", "achieved", "responses"}
    if unknown:
        raise ImportDataError(
            f"The 'mapping' has unknown key(s) {sorted(map(str, unknown))}; allowed: 'run', 'factors', 'achieved', "
            "'responses'."
        )
    clean = {"run": mapping.get("run"), "factors": {}, "achieved": {}, "responses": {}}
    problems = []
    if clean["run"] is not None and clean["run"] not in columns:
        problems.append(Problem(None, str(clean["run"]), "the 'run' column of the mapping is not in the file"))
    for role in ("factors", "achieved", "responses"):
        part = mapping.get(role) or {}
        if not isinstance(part, dict):
            raise ImportDataError(f"The 'mapping[{role!r}]' must be a dict of name -> column. Got {describe(part)}.")
        for key, column in part.items():
            if column not in columns:
                problems.append(Problem(None, str(column), f"mapped to {role} {key!r} but not in the file"))
                continue
            if role != "responses" and key not in study.factor_names:
                problems.append(Problem(None, str(column), f"mapped to {key!r}, which is not a study factor "
                                                           f"{study.factor_names}"))
                continue
            if role == "responses" and key in study.factor_names:
                problems.append(Problem(None, str(column), f"mapped to response {key!r}, which is a factor name"))
                continue
            clean[role][key] = column
    if problems:
        raise _error(name, problems)
    return clean


# ----- importing -------------------------------------------------------------------------------
def import_table(study, source, mapping=None, *, sheet: str | None = None, stage: str | None = None,
                 overwrite: bool = False, reason: str | None = None, delimiter: str = ",",
                 decimal: str = ".", header_row: int | None = None) -> ImportReport:
    """Merge a CSV or XLSX table into *study* by run id; all or nothing.

    Parameters
    ----------
    study : Study
    source : path, bytes or file-like
    mapping : dict, optional
        ``{"run": column, "factors": {factor: column}, "achieved": {factor: column},
        "responses": {response: column}}``; default :func:`guess_mapping`. A response not yet in
        the study is added, with the units declared in its header.
    stage : str, optional
        Rows whose run id is not in the study become new runs of this (new) stage, planned at
        their factor columns; they get the study's next run ids, in the file's run-id order
        (``ImportReport.runs_added``). Without it an unknown run id is a problem.
    overwrite : bool, default False
        Replace recorded values that differ from the file. Without it they are problems.
    reason : str, optional
        Written in the audit log with every change.
    sheet, delimiter, header_row
        As for :func:`read_table`; ``decimal`` is the decimal mark of numbers written as text.

    Returns
    -------
    ImportReport
        Including the warnings (values outside the design range, kept).

    Raises
    ------
    ImportDataError
        With ``problems``: every problem found, each naming its row and column. The study is
        unchanged.
    """
    from .study import Study

    if not isinstance(study, Study):
        raise LevelwiseError(f"The 'study' must be a Study. Got {describe(study)} instead.")
    if not isinstance(decimal, str) or len(decimal) != 1:
        raise ImportDataError(f"The 'decimal' must be one character. Got {describe(decimal)} instead.")
    name = _source_bytes(source)[0] if not isinstance(source, pd.DataFrame) else "<DataFrame>"
    if isinstance(source, pd.DataFrame):
        frame = source.astype(object)
        frame.columns = [str(c) for c in frame.columns]
        frame.index = pd.RangeIndex(2, 2 + len(frame))
    else:
        frame = read_table(source, sheet=sheet, delimiter=delimiter, header_row=header_row)
    columns = list(frame.columns)
    header_row = frame.attrs.get("header_row", 1)
    mapping = guess_mapping(columns, study) if mapping is None else _check_mapping(mapping, columns, study, name)
    problems: list[Problem] = []
    warnings: list[Problem] = []
    factors = {f.name: f for f in study.factors}
    responses = study.responses

    # Units declared in headers.
    new_units = {}
    for role, items in (("factors", mapping["factors"]), ("achieved", mapping["achieved"]),
                        ("responses", mapping["responses"])):
        for key, column in items.items():
            _, units = split_header(column) if role != "achieved" else parse_header(column)[:2]
            if role == "responses" and key not in responses:
                new_units[key] = units or ""
                continue
            expected = factors[key].units if role != "responses" else responses[key].units
            if units is not None and units != expected:
                problems.append(Problem(header_row, column, f"the header declares units {units!r} but "
                                                   f"{'factor' if role != 'responses' else 'response'} {key!r} "
                                                   f"is in {expected!r}"))
    if mapping["run"] is None:
        problems.append(Problem(None, None, "no run-id column: map one as 'run' (a header 'Run' is found "
                                            "automatically)"))
        raise _error(name, problems)
    run_col = mapping["run"]

    # Run ids.
    existing = set(study.run_ids)
    seen: dict[int, int] = {}
    row_ids: dict[int, int] = {}
    for row, cell in frame[run_col].items():
        value, bad = _number(cell, decimal)
        if bad or value is None or value < 1 or not float(value).is_integer():
            problems.append(Problem(row, run_col, f"the run id must be an integer >= 1; got {describe(cell)}"))
            continue
        run_id = int(value)
        if run_id in seen:
            problems.append(Problem(row, run_col, f"duplicate run: run {run_id} is also in row {seen[run_id]}"))
            continue
        seen[run_id] = row
        if run_id not in existing and stage is None:
            problems.append(Problem(row, run_col, f"run {run_id} is not in the study; pass stage=... to add new "
                                                  "runs"))
            continue
        row_ids[row] = run_id
    new_rows = [row for row, run_id in row_ids.items() if run_id not in existing]
    if new_rows:
        missing = [f for f in study.factor_names if f not in mapping["factors"]]
        if missing:
            problems.append(Problem(None, None, f"factors missing: new runs need a column for every factor; "
                                                f"{missing} have none"))
        if stage in {s.name for s in study.stages}:
            problems.append(Problem(None, None, f"the stage {stage!r} already exists; new runs need a new stage"))

    # Ranges: the factor's low..high widened to every planned setting (axial points are in range).
    planned = study.planned()
    continuous = [f for f in factors if not getattr(factors[f], "levels", ())]
    lo = {f: min(factors[f].low, planned[f].min()) if len(planned) else factors[f].low for f in continuous}
    hi = {f: max(factors[f].high, planned[f].max()) if len(planned) else factors[f].high for f in continuous}

    def setting(cell, factor):
        """(value, problem): a number, or one of a categorical factor's levels."""
        if factor in lo:
            return _number(cell, decimal)
        if _blank(cell):
            return None, None
        levels = factors[factor].levels
        candidates = [cell, str(cell).strip()]
        number, _ = _number(cell, decimal)
        if number is not None:
            candidates.append(number)
        for candidate in candidates:
            for level in levels:
                if type(level) is type(candidate) and level == candidate or (
                    not isinstance(level, str) and isinstance(candidate, float) and level == candidate
                ):
                    return level, None
        return None, f"{describe(cell)} is not one of the levels {list(levels)!r} of {factor!r}"

    def outside(value, factor) -> bool:
        return factor in lo and not lo[factor] <= value <= hi[factor]

    def same(a, b) -> bool:
        if isinstance(a, str) or isinstance(b, str):
            return a == b
        return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12)

    def missing(value) -> bool:
        return value is None or (isinstance(value, float) and np.isnan(value))

    current = study.data(apply_exclusions=False)
    achieved_now = study.achieved()
    changes = []  # (kind, run_id, key, value)
    new_runs = {}
    for row, run_id in row_ids.items():
        is_new = run_id not in existing
        settings = {}
        for factor, column in mapping["factors"].items():
            value, bad = setting(frame.at[row, column], factor)
            if bad:
                problems.append(Problem(row, column, bad))
                continue
            if value is None:
                if is_new:
                    problems.append(Problem(row, column, f"factor missing: new run {run_id} has no setting for "
                                                         f"{factor!r}"))
                continue
            if is_new:
                settings[factor] = value
            elif not same(value, planned.at[run_id, factor]):
                was = planned.at[run_id, factor]
                was = was if isinstance(was, str) else float(was)
                problems.append(Problem(row, column, f"run {run_id} was planned at {was!r} "
                                                     f"but the file says {value!r}; map the column under "
                                                     "'achieved' if it holds the settings actually run"))
                continue
            if outside(value, factor):
                warnings.append(Problem(row, column, f"{value!r} is outside the design range "
                                                     f"{float(lo[factor])!r} to {float(hi[factor])!r} of {factor!r} "
                                                     "(kept)", "warning"))
        if is_new:
            new_runs[run_id] = settings
        for kind, items in (("achieved", mapping["achieved"]), ("responses", mapping["responses"])):
            for key, column in items.items():
                cell = frame.at[row, column]
                value, bad = setting(cell, key) if kind == "achieved" else _number(cell, decimal)
                if bad:
                    problems.append(Problem(row, column, bad))
                    continue
                if value is None:
                    continue
                if kind == "achieved":
                    old = np.nan if is_new else achieved_now.at[run_id, key]
                    if outside(value, key):
                        warnings.append(Problem(row, column, f"{value!r} is outside the design range "
                                                             f"{float(lo[key])!r} to {float(hi[key])!r} of {key!r} "
                                                             "(kept)", "warning"))
                else:
                    old = np.nan if is_new or key not in current.columns else current.at[run_id, key]
                if not missing(old):
                    if old == value:
                        continue
                    if not overwrite:
                        old = old if isinstance(old, str) else float(old)
                        problems.append(Problem(row, column, f"run {run_id} already has {key!r} = {old!r}; the "
                                                             f"file says {value!r} (pass overwrite=True to "
                                                             "replace it)"))
                        continue
                changes.append((kind, run_id, key, value))
    if problems:
        raise _error(name, problems)

    # Apply: every check passed, so none of these calls can fail on the data.
    if reason is None:
        reason = f"imported from {name}"
    added = ()
    if new_runs:
        table = pd.DataFrame([{"run": run_id, **settings} for run_id, settings in sorted(new_runs.items())])
        added = tuple(study.add_stage(stage, table.drop(columns="run"), reason=reason))
        renumber = dict(zip(sorted(new_runs), added))
        changes = [(kind, renumber.get(run_id, run_id), key, value) for kind, run_id, key, value in changes]
    for key, units in new_units.items():
        study.add_response(key, units=units)
    if changes:
        study._record_many(changes, overwrite=overwrite, reason=reason, source=name)
    return ImportReport(source=name, runs_added=added, values_recorded=len(changes), warnings=tuple(warnings))


# ----- exporting -------------------------------------------------------------------------------
def _header(name: str, units: str) -> str:
    return f"{name} [{units}]" if units else name


def run_sheet(study, *, achieved: bool = False) -> pd.DataFrame:
    """The run sheet: run, stage, block, point type, planned settings and the responses (blank
    where not recorded), headers with units in ``[...]``; with *achieved*, one column per factor
    for the achieved settings. :func:`import_table` reads it back with the guessed mapping.
    """
    planned = study.planned()
    sheet = planned[["run", "stage", "block", "point_type"]].copy()
    for f in study.factors:
        sheet[_header(f.name, f.units)] = planned[f.name]
    if achieved:
        done = study.achieved()
        for f in study.factors:
            sheet[_header(f"{f.name} (achieved)", f.units)] = done[f.name]
    values = study.data(apply_exclusions=False)
    for name, response in study.responses.items():
        sheet[_header(name, response.units)] = values[name]
    return sheet.reset_index(drop=True)


def coefficient_table(fit) -> pd.DataFrame:
    """The coefficients of a fit (coded units) as a flat table with a ``term`` column."""
    return fit.coefficients.reset_index()


def anova_table(fit) -> pd.DataFrame:
    """The fit's analysis of variance (:attr:`Fit.anova`: model, terms, residual split into
    curvature, lack of fit and pure error where the runs allow) as a flat table with a ``source``
    column, the same numbers the views show."""
    return fit.anova.reset_index()


def prediction_table(fit, settings, level: float | None = None) -> pd.DataFrame:
    """Settings (natural units) beside the predicted mean, confidence and prediction intervals."""
    natural = fit.engine.table(settings)
    frame = pd.DataFrame(natural, columns=list(fit.factor_names))
    return pd.concat([frame, fit.predict(frame, level=level)], axis=1)


def export_table(frame: pd.DataFrame, path, *, sheet_name: str = "table") -> Path:
    """Write *frame* to a ``.csv`` (UTF-8) or ``.xlsx`` file, chosen by the suffix of *path*."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".xlsx"):
        raise LevelwiseError(f"The export 'path' must end in .csv or .xlsx. Got {str(path)!r} instead.")
    try:
        if suffix == ".csv":
            frame.to_csv(path, index=False, encoding="utf-8")
        else:
            frame.to_excel(path, index=False, sheet_name=sheet_name[:31], engine="openpyxl")
    except OSError as exc:
        raise LevelwiseError(f"The table could not be written to '{path}': {exc.strerror or exc}.") from exc
    return path


def export_run_sheet(study, path, *, achieved: bool = False) -> Path:
    """Write :func:`run_sheet` to CSV or XLSX."""
    return export_table(run_sheet(study, achieved=achieved), path, sheet_name="runs")


def export_coefficients(fit, path) -> Path:
    """Write :func:`coefficient_table` to CSV or XLSX."""
    return export_table(coefficient_table(fit), path, sheet_name="coefficients")


def export_anova(fit, path) -> Path:
    """Write :func:`anova_table` to CSV or XLSX."""
    return export_table(anova_table(fit), path, sheet_name="anova")


def export_predictions(fit, settings, path, level: float | None = None) -> Path:
    """Write :func:`prediction_table` to CSV or XLSX."""
    return export_table(prediction_table(fit, settings, level), path, sheet_name="predictions")


__all__ = [
    "ImportReport",
    "Problem",
    "anova_table",
    "coefficient_table",
    "export_anova",
    "export_coefficients",
    "export_predictions",
    "export_run_sheet",
    "export_table",
    "guess_mapping",
    "import_table",
    "prediction_table",
    "read_table",
    "parse_header",
    "run_sheet",
    "split_header",
]
