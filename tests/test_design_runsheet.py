"""Run sheets: export to CSV/XLSX and validated read-back."""

import numpy as np
import openpyxl
import pandas as pd
import pytest

from levelwise import (
    Factor,
    ImportDataError,
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

    # One importer, one error model: rows as the spreadsheet shows them (header = row 1), every problem collected.
    bad = sheet.astype({"y": object, "A": object})
    bad.loc[1, "y"] = "high"
    bad.loc[3, "A"] = "hot"
    with pytest.raises(ImportDataError) as excinfo:
        read_run_sheet(bad, d)
    assert [(p.row, p.column) for p in excinfo.value.problems] == [(3, "y"), (5, "A")]
    assert "row 3, column 'y': 'high' is not a number" in str(excinfo.value)
    with pytest.warns(LevelwiseWarning, match=r"did not use the column\(s\) \['Operator'\]"):
        read_run_sheet(sheet.assign(Operator="kim"), d)  # listed, not dropped silently
    filled = read_run_sheet(sheet.drop(columns="B (achieved)"), d)  # achieved columns are optional
    assert filled.missing_responses == {"y": [3]}
    with pytest.raises(ImportDataError, match=r"column 'y': the response column is missing"):
        read_run_sheet(sheet.drop(columns="y"), d)
    dup = sheet.copy()
    dup.loc[4, "run"] = 1
    with pytest.raises(ImportDataError, match=r"row 6, column 'run': duplicate run: run 1 is also in row 2"):
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
    with pytest.raises(ImportDataError, match=r"row 2, column 'Metal \(achieved\)': 'copper' is not one of the "
                                              r"levels \['steel', 'brass'\]"):
        read_run_sheet(sheet, d)


def test_a_run_sheet_written_with_responses_reads_back_with_them(tmp_path):
    from levelwise import Study, export_run_sheet

    d = full_factorial([Factor("Oven", 160, 200, units="°C"), Factor("Dwell", 8, 16, units="min")], seed=4)
    study = Study(d.factors)
    study.add_stage("screen", d)
    study.add_response("Gloss", units="GU")
    values = {1: 81.5, 2: 84.0, 4: 86.5}  # invented; run 3 not measured yet
    for run, value in values.items():
        study.record(run, "Gloss", value)
    study.record_achieved(2, "Oven", 161.5)
    for suffix in (".csv", ".xlsx"):
        path = export_run_sheet(study, tmp_path / f"sheet{suffix}", achieved=True)
        filled = read_run_sheet(path, d, responses=["Gloss"])
        got = dict(zip(filled.data["run"], filled.data["Gloss"]))
        assert {run: got[run] for run in values} == values and np.isnan(got[3])
        assert filled.missing_responses == {"Gloss": [3]}
        assert filled.study.responses["Gloss"].units == "GU"  # from the header "Gloss [GU]"
        assert filled.study.achieved().loc[2, "Oven"] == 161.5
