"""Exports stay data: text that a spreadsheet would read as a formula is written as text (issue 17, item 1).

Guidance followed: OWASP "CSV Injection" (cells starting with ``=``, ``+``, ``-``, ``@``, tab, carriage return
get a single-quote prefix in CSV); in XLSX such text is a cell of string type, never a formula cell.
"""

from __future__ import annotations

import csv
import io
import re
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from levelwise import (
    Factor,
    Study,
    full_factorial,
    import_table,
    read_run_sheet,
    read_table,
    study_run_sheet,
    write_run_sheet,
)
from levelwise.study import export_anova, export_coefficients, export_predictions, export_run_sheet

PAYLOADS = ['=HYPERLINK("http://x","y")', "=1+1", "@SUM(A1)", "+1", "-1+2"]


def hostile_study() -> Study:
    """Factors, a response, a stage and a reason named by the payloads; the data are invented."""
    factors = [Factor(PAYLOADS[0], 10, 20, "=2+2"), Factor(PAYLOADS[1], -5, 5, "g"), Factor(PAYLOADS[2], 0, 1)]
    study = Study(factors, title="=cmd|' /C calc'!A0")
    design = full_factorial(factors, center_points=2, randomize=False)
    study.add_stage(PAYLOADS[3], design)
    study.add_response(PAYLOADS[4], units="@u")
    rng = np.random.default_rng(7)
    for run in study.run_ids:
        study.record(run, PAYLOADS[4], float(rng.normal(-3.0, 1.0)))  # invented; negative numbers on purpose
    study.exclude(study.run_ids[0], reason="-a reason that starts with a minus")
    return study


def xlsx_cells(path):
    """Every cell of every sheet: (sheet, coordinate, value, data type as openpyxl writes it)."""
    book = openpyxl.load_workbook(path)
    return [(ws.title, c.coordinate, c.value, c.data_type) for ws in book.worksheets for row in ws.iter_rows()
            for c in row if c.value is not None]


def no_formula_in_xml(path):
    """The raw sheet XML: no <f> (formula) element anywhere."""
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/"):
                assert not re.search(rb"<(\w+:)?f[ >]", z.read(name)), name


def check_xlsx(path, expected_texts):
    no_formula_in_xml(path)
    cells = xlsx_cells(path)
    values = {value for _, _, value, _ in cells}
    for text in expected_texts:
        assert any(isinstance(v, str) and text in v for v in values), text
    for sheet, coord, value, kind in cells:
        if isinstance(value, str) and value[:1] in "=+-@":
            assert kind == "s", (sheet, coord, value, kind)
    # numbers stay numbers: negative values are numeric cells
    assert any(kind == "n" and isinstance(v, (int, float)) and v < 0 for _, _, v, kind in cells)


def csv_cells(path):
    return list(csv.reader(io.StringIO(path.read_bytes().decode("utf-8"), newline="")))


def check_csv(path, expected_texts):
    rows = csv_cells(path)
    flat = [cell for row in rows for cell in row]
    for cell in flat:
        # no cell a spreadsheet would read as a formula, except a plain number
        if cell[:1] in ("=", "+", "-", "@", "\t", "\r"):
            float(cell)  # raises for text: it must have been quoted
    for text in expected_texts:
        assert any(cell.startswith("'") and text in cell for cell in flat), text
    assert any(cell.startswith("-") and float(cell) < 0 for cell in flat)  # a negative number is a number


def test_study_run_sheet_csv_quotes_formula_text_and_reads_back(tmp_path):
    study = hostile_study()
    path = export_run_sheet(study, tmp_path / "runs.csv")
    check_csv(path, PAYLOADS)
    header = csv_cells(path)[0]
    assert "'" + PAYLOADS[0] + " [=2+2]" in header
    assert "'+1" in [row[1] for row in csv_cells(path)[1:]]  # the stage column
    round_trip(study, path)


def round_trip(study, path):
    """Our own export read back gives the original text and numbers, and imports into a fresh study."""
    expected = study_run_sheet(study)
    table = read_table(path)
    assert list(table.columns) == list(expected.columns)
    for column in expected.columns:
        for got, want in zip(table[column], expected[column]):
            if isinstance(want, str):
                assert got == want
            elif want is None or (isinstance(want, float) and np.isnan(want)):
                assert got is None or got == ""
            else:
                assert float(got) == pytest.approx(float(want), rel=1e-12)
    fresh = Study(study.factors, title="fresh")
    fresh.add_response(PAYLOADS[4], units="@u")
    report = import_table(fresh, path, stage="imported")
    assert len(report.runs_added) == len(study)
    np.testing.assert_allclose(fresh.data(apply_exclusions=False)[PAYLOADS[4]],
                               study.data(apply_exclusions=False)[PAYLOADS[4]])


def test_study_run_sheet_xlsx_has_string_cells_only(tmp_path):
    study = hostile_study()
    path = export_run_sheet(study, tmp_path / "runs.xlsx")
    check_xlsx(path, PAYLOADS)
    header = [c.value for c in openpyxl.load_workbook(path).worksheets[0][1]]
    assert PAYLOADS[0] + " [=2+2]" in header and f"{PAYLOADS[4]} [@u]" in header
    round_trip(study, path)


@pytest.mark.parametrize("suffix", ["csv", "xlsx"])
def test_design_run_sheet_round_trip(tmp_path, suffix):
    factors = [Factor(PAYLOADS[0], 10, 20), Factor("-x", -1, 1), Factor("@at", 0, 2, "+u")]
    design = full_factorial(factors, randomize=False)
    path = Path(write_run_sheet(design, tmp_path / f"design.{suffix}", responses=[PAYLOADS[1], "@resp"]))
    if suffix == "csv":
        check_csv_header = csv_cells(path)[0]
        assert "'" + PAYLOADS[0] in check_csv_header and "'" + PAYLOADS[1] in check_csv_header
        assert "'@resp" in check_csv_header and "'-x" in check_csv_header
        # tab and carriage return at the start get the prefix too (the reader strips such blanks from headers)
        other = Path(write_run_sheet(design, tmp_path / "tab.csv", responses=["\tTabbed", "\rReturn"]))
        assert {"'\tTabbed", "'\rReturn"} <= set(csv_cells(other)[0])
    else:
        no_formula_in_xml(path)
        for _, _, value, kind in xlsx_cells(path):
            if isinstance(value, str) and value[:1] in "=+-@":
                assert kind == "s", value
    sheet = read_run_sheet(path, design=design, responses=[PAYLOADS[1], "@resp"])
    assert [f.name for f in sheet.factors] == [PAYLOADS[0], "-x", "@at"]
    assert [f.units for f in sheet.factors] == ["", "", "+u"]
    assert PAYLOADS[1] in sheet.data.columns and "@resp" in sheet.data.columns


def fitted(study):
    return study.fit(PAYLOADS[4], "main_effects")


@pytest.mark.parametrize("suffix", ["csv", "xlsx"])
def test_coefficient_anova_and_prediction_tables(tmp_path, suffix):
    study = hostile_study()
    fit = fitted(study)
    paths = [
        export_coefficients(fit, tmp_path / f"coef.{suffix}"),
        export_anova(fit, tmp_path / f"anova.{suffix}"),
        export_predictions(fit, {PAYLOADS[0]: 15, PAYLOADS[1]: -2, PAYLOADS[2]: 0.5}, tmp_path / f"pred.{suffix}"),
    ]
    for path in paths:
        if suffix == "csv":
            text = path.read_text(encoding="utf-8")
            for row in csv_cells(path):
                for cell in row:
                    if cell and cell[0] in "=+-@\t\r":
                        float(cell)
            assert "'=" in text or "'@" in text  # the term or factor names that start with = or @
        else:
            no_formula_in_xml(path)
            for _, _, value, kind in xlsx_cells(path):
                if isinstance(value, str) and value[:1] in "=+-@":
                    assert kind == "s", (path.name, value)
    if suffix == "xlsx":
        header = [c.value for c in openpyxl.load_workbook(paths[2]).worksheets[0][1]]
        assert header[:3] == PAYLOADS[:3]
        value = openpyxl.load_workbook(paths[2]).worksheets[0]["B2"]
        assert value.value == -2 and value.data_type == "n"  # a negative number is a number


def test_guard_round_trip_is_exact():
    from levelwise._cells import guard_text, unguard_text

    texts = [*PAYLOADS, "\tx", "\rx", "'=x", "''=x", "'abc", "abc", "", "=", "'", "-"]
    for text in texts:
        assert unguard_text(guard_text(text)) == text
    assert guard_text("=1+1") == "'=1+1" and guard_text("abc") == "abc" and guard_text(-1.5) == -1.5
    assert guard_text("'abc") == "'abc"  # quote not before a formula character: left alone


def test_predictions_view_csv_is_quoted():
    import pandas as pd

    from levelwise._cells import guarded_frame

    frame = pd.DataFrame({PAYLOADS[1]: [-1.0, 2.0], "label": ["@x", "y"]})
    text = guarded_frame(frame).to_csv(index=False)
    assert text.splitlines() == ["'=1+1,label", "-1.0,'@x", "2.0,y"]
