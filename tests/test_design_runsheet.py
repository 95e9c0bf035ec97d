"""Run sheets: export to CSV/XLSX and validated read-back."""

import numpy as np
import openpyxl
import pandas as pd
import pytest

from levelwise import (
    Factor,
    LevelwiseError,
    LevelwiseWarning,
    central_composite,
    full_factorial,
    read_run_sheet,
    write_run_sheet,
)

FACTORS = [Factor("Oven", 160, 200, units="°C"), Factor("Metal", levels=["steel", "brass"])]


def test_sheet_columns_in_run_order():
    d = full_factorial(FACTORS, seed=2)
    sheet = d.to_run_sheet(responses=["Gloss", "Adhesion"])
    assert list(sheet.columns) == ["run", "standard_order", "block", "role", "Oven", "Metal",
                                   "Oven (achieved)", "Metal (achieved)", "Gloss", "Adhesion"]
    assert sheet.run.tolist() == [1, 2, 3, 4]
    pd.testing.assert_frame_equal(sheet[["Oven", "Metal"]], d.table[["Oven", "Metal"]])
    assert sheet.Gloss.isna().all()


def test_xlsx_round_trip_with_metadata(tmp_path):
    d = full_factorial(FACTORS, seed=2)
    path = write_run_sheet(d, tmp_path / "plan.xlsx", responses=["Gloss"])
    book = openpyxl.load_workbook(path)
    assert book.sheetnames == ["runs", "design"]
    fields = [row[0].value for row in book["design"].iter_rows(min_row=2)]
    assert "factor" in fields and "kind" in fields
    sheet = book["runs"]
    sheet["I2"] = 41.5  # Gloss of run 1
    sheet["G3"] = 181.0  # achieved oven setting of run 2
    book.save(path)
    filled = read_run_sheet(path)  # factors and response names come from the design sheet
    assert filled.responses == ("Gloss",)
    assert filled.table.loc[0, "Gloss"] == 41.5
    assert filled.data.loc[1, "Oven"] == 181.0  # achieved setting replaces the planned one
    assert filled.data.loc[0, "Oven"] == d.table.loc[0, "Oven"]
    assert filled.missing_responses == {"Gloss": [2, 3, 4]}


def test_csv_round_trip_and_errors(tmp_path):
    d = full_factorial(2, center_points=1, seed=1)
    path = tmp_path / "plan.csv"
    write_run_sheet(d, path)
    sheet = pd.read_csv(path)
    sheet["y"] = [1.0, 2.0, np.nan, 4.0, 5.0]
    sheet.to_csv(path, index=False)
    filled = read_run_sheet(path, d)
    assert filled.missing_responses == {"y": [3]}

    bad = sheet.astype({"y": object})
    bad.loc[1, "y"] = "high"
    with pytest.raises(LevelwiseError, match=r"Row 2 \(run 2\), column 'y' holds 'high'; a number is required"):
        read_run_sheet(bad, d)
    with pytest.raises(LevelwiseError, match=r"Unknown columns: \['Operator'\]"):
        read_run_sheet(sheet.assign(Operator="kim"), d)
    with pytest.raises(LevelwiseError, match=r"missing columns: \['B \(achieved\)'\]"):
        read_run_sheet(sheet.drop(columns="B (achieved)"), d)
    dup = sheet.copy()
    dup.loc[4, "run"] = 1
    with pytest.raises(LevelwiseError, match=r"run id 1 appears more than once \(rows \[1, 5\]\)"):
        read_run_sheet(dup, d)
    with pytest.raises(LevelwiseError, match="needs the 'design'"):
        read_run_sheet(path)


def test_achieved_outside_range_warns_and_keeps_value():
    d = central_composite([Factor("T", 100, 120), Factor("P", 1, 2)], seed=3)
    sheet = d.to_run_sheet()
    sheet.loc[0, "T (achieved)"] = 150.0
    with pytest.warns(LevelwiseWarning, match=r"Achieved settings of 'T' outside the planned range.*run\(s\) \[1\]"):
        filled = read_run_sheet(sheet, d)
    assert filled.data.loc[0, "T"] == 150.0
    # Axial runs beyond low/high are planned, so an achieved value near them is inside the planned range.
    axial_max = d.table["T"].max()
    sheet.loc[0, "T (achieved)"] = axial_max
    read_run_sheet(sheet, d)


def test_categorical_level_checked():
    d = full_factorial(FACTORS, seed=2)
    sheet = d.to_run_sheet()
    sheet.loc[0, "Metal (achieved)"] = "copper"
    with pytest.raises(LevelwiseError, match=r"Row 1 \(run 1\), column 'Metal \(achieved\)' holds 'copper'"):
        read_run_sheet(sheet, d)
