"""The workbench's upload-and-mapping step and the editable run sheet, headless.

The table is invented (a 2^4 with centre points from lw.full_factorial and a made-up response); the
checks are bookkeeping: which study the views hold, which run got which value, the audit entries,
the saved file.
"""

import io

import numpy as np
import pytest

import levelwise as lw
from levelwise import Study
from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import EffectsView, RunSheetEditor, SharedModel, TableImport


def csv_bytes(blank_run=None, bad=None):
    factors = [lw.Factor("Temp", 150, 190, "°C"), lw.Factor("Time", 10, 30, "min"),
               lw.Factor("Load", 1, 3, "kg"), lw.Factor("Speed", 200, 400, "rpm")]
    table = lw.full_factorial(factors, center_points=3, randomize=False).table
    out = table[["run", "Temp", "Time", "Load", "Speed"]].copy()
    out.columns = ["run", "Temp [°C]", "Time [min]", "Load [kg]", "Speed [rpm]"]
    # Invented response: 40 + 3*Temp_coded + noise.
    out["Yield [%]"] = (40 + 3 * (out["Temp [°C]"] - 170) / 20
                        + np.random.default_rng(1).normal(0, 0.3, len(out))).round(2)
    out["Operator"] = "Kim"
    out = out.astype(object)
    if blank_run is not None:
        out.loc[out["run"] == blank_run, "Yield [%]"] = ""
    if bad is not None:
        out.loc[bad[0], bad[1]] = bad[2]
    buffer = io.StringIO()
    out.to_csv(buffer, index=False)
    return buffer.getvalue().encode(), out


def test_upload_guesses_the_mapping_and_switches_every_view():
    shared = SharedModel.from_study(demo_study())
    effects = EffectsView(shared)
    view = TableImport(shared)
    raw, table = csv_bytes()
    guess = view.load(raw, "plant.csv")
    assert guess["run"] == "run"
    assert guess["factors"] == ["Temp [°C]", "Time [min]", "Load [kg]", "Speed [rpm]"]
    assert guess["responses"] == ["Yield [%]"]
    assert view.rows["Operator"]["role"].value == "unused"
    assert view.rows["Temp [°C]"]["low"].value == "150" and view.rows["Temp [°C]"]["units"].value == "°C"
    view.rows["Temp [°C]"]["low"].value = "140"  # the user widens the range in the same step
    study = view.make_study()
    assert shared.study is study and study.factors[0].low == 140
    assert shared.responses == ("Yield",) and shared.response == "Yield"
    assert "Operator" in view.report.value  # the unused column is listed
    assert shared.fit is not None and set(shared.fit.runs) == set(table["run"])
    assert effects.shared.fit.response == "Yield"


def test_upload_problems_listed_by_row_and_column_and_nothing_changes():
    study = demo_study()
    shared = SharedModel.from_study(study)
    view = TableImport(shared)
    raw, _ = csv_bytes(bad=(4, "Time [min]", "ten"))
    view.load(raw, "plant.csv")
    assert view.make_study() is None
    assert shared.study is study
    assert "row 6" in view.report.value and "Time [min]" in view.report.value


def test_run_sheet_edit_goes_through_the_study_and_save_clears_the_unsaved_state(tmp_path):
    raw, _ = csv_bytes(blank_run=5)
    study = _quiet_study(raw)
    shared = SharedModel.from_study(study)
    path = tmp_path / "plant.json"
    sheet = RunSheetEditor(shared)
    sheet.path.value = str(path)
    assert "Not saved" in sheet.state.value
    sheet.show_achieved.value = True
    assert 5 in shared.fit.missing_runs
    sheet.cells[(5, "Yield")].value = "41.5"
    assert study.data().at[5, "Yield"] == 41.5
    assert study.audit[-1].action == "record" and study.audit[-1].reason == "entered in the workbench"
    assert 5 not in shared.fit.missing_runs  # the views were refitted
    assert "Unsaved" in sheet.state.value
    sheet.cells[(5, "Temp (achieved)")].value = "151"
    assert study.achieved().at[5, "Temp"] == 151
    sheet.save()
    assert "Saved" in sheet.state.value and "Unsaved" not in sheet.state.value
    again = Study.load(path)
    assert again.data().at[5, "Yield"] == 41.5
    sheet.cells[(5, "Yield")].value = "oops"
    assert "not a number" in sheet.status.value or "enter a number" in sheet.status.value.lower()
    assert study.data().at[5, "Yield"] == 41.5 and sheet.cells[(5, "Yield")].value == "41.5"
    sheet.cells[(5, "Yield")].value = "41,75"  # a decimal comma
    assert study.data().at[5, "Yield"] == 41.75


def test_run_sheet_follows_a_new_study():
    shared = SharedModel.from_study(demo_study())
    sheet = RunSheetEditor(shared)
    sheet.show_achieved.value = True
    raw, _ = csv_bytes()
    shared.use_study(_quiet_study(raw))
    assert {c for _, c in sheet.cells} == {"Yield", "Temp (achieved)", "Time (achieved)", "Load (achieved)",
                                           "Speed (achieved)"}
    assert len({r for r, _ in sheet.cells}) == 19


def _quiet_study(raw):
    with pytest.warns(lw.LevelwiseWarning, match="Operator"):
        return Study.from_table(lw.read_table(raw), factors=["Temp", "Time", "Load", "Speed"], responses=["Yield"])


def test_a_read_only_model_refuses_run_sheet_edits_and_saves_and_the_study_is_unchanged(tmp_path):
    raw, _ = csv_bytes(blank_run=5)
    study = _quiet_study(raw)
    shared = SharedModel.from_study(study, read_only=True)
    sheet = RunSheetEditor(shared)
    entries = len(study.audit)
    sheet.cells[(5, "Yield")].value = "41.5"  # as a crafted browser message would set it
    assert "read-only" in sheet.status.value.lower()
    assert np.isnan(study.data().at[5, "Yield"]) and len(study.audit) == entries
    sheet.path.value = str(tmp_path / "x.json")
    with pytest.raises(lw.LevelwiseError, match="read-only"):
        sheet.save()
    assert not (tmp_path / "x.json").exists()
