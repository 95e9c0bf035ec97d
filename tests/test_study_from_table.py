"""Study.from_table and `levelwise import`: a finished table becomes a study through the one validator.

The tables are invented (a 2^4 with centre points made by lw.full_factorial); the checks are about
bookkeeping (which run got which value, which row/column a problem names), so no published value applies.
"""

import json

import numpy as np
import pytest

import levelwise as lw
from levelwise import ImportDataError, LevelwiseWarning, Study


def plant_table(seed=3):
    factors = [lw.Factor("Temp", 150, 190, "°C"), lw.Factor("Time", 10, 30, "min"),
               lw.Factor("Load", 1, 3, "kg"), lw.Factor("Speed", 200, 400, "rpm")]
    design = lw.full_factorial(factors, center_points=3, randomize=False)
    table = design.table[["run", "Temp", "Time", "Load", "Speed"]].copy()
    rng = np.random.default_rng(seed)
    # An invented response: 50 + 4*Temp_coded - 2*Time_coded + noise.
    coded_t = (table["Temp"] - 170) / 20
    coded_m = (table["Time"] - 20) / 10
    table["Strength [MPa]"] = 50 + 4 * coded_t - 2 * coded_m + rng.normal(0, 0.5, len(table))
    table.columns = ["run", "Temp [°C]", "Time [min]", "Load [kg]", "Speed [rpm]", "Strength [MPa]"]
    return design, table


def test_from_table_one_call_keeps_every_value_by_run_id():
    design, table = plant_table()
    table["Operator"] = "Ann"
    with pytest.warns(LevelwiseWarning, match="Operator"):
        study = Study.from_table(table, factors=["Temp", "Time", "Load", "Speed"], responses=["Strength"])
    assert study.factor_names == ["Temp", "Time", "Load", "Speed"]
    assert [f.units for f in study.factors] == ["°C", "min", "kg", "rpm"]
    assert (study.factors[0].low, study.factors[0].high) == (150, 190)  # the observed range
    assert study.responses["Strength"].units == "MPa"
    data = study.data()
    for _, row in table.iterrows():
        assert data.at[int(row["run"]), "Strength"] == row["Strength [MPa]"]
        assert data.at[int(row["run"]), "Temp"] == row["Temp [°C]"]
    # The column not used is listed, never dropped silently.
    assert any(w.column == "Operator" for w in study.import_report.warnings)
    assert len(study.run_ids) == 19


def test_every_problem_named_by_spreadsheet_row_and_column_and_no_study():
    _, table = plant_table()
    table = table.astype(object)
    table.loc[2, "Temp [°C]"] = "hot"           # spreadsheet row 4 (header is row 1)
    table.loc[5, "Strength [MPa]"] = "n/a"      # row 7
    table.loc[7, "run"] = 3                     # row 9: run 3 again
    with pytest.raises(ImportDataError) as info:
        Study.from_table(table, factors=["Temp", "Time", "Load", "Speed"], responses=["Strength"])
    where = {(p.row, p.column) for p in info.value.problems}
    assert {(4, "Temp [°C]"), (7, "Strength [MPa]"), (9, "run")} <= where


def test_plant_order_differing_from_the_plan_is_matched_by_settings():
    design, table = plant_table()
    shuffled = table.drop(columns="run").sample(frac=1.0, random_state=7).reset_index(drop=True)
    # The plant reached 151 instead of 150 on its first row: matched, and kept as the achieved setting.
    first_temp = shuffled.loc[0, "Temp [°C]"]
    shuffled.loc[0, "Temp [°C]"] = first_temp + 1.0
    study = Study.from_table(shuffled, factors=list(design.factors), responses=["Strength"], plan=design)
    planned = study.planned()
    data = study.data()
    for i, row in shuffled.iterrows():
        settings = row[["Temp [°C]", "Time [min]", "Load [kg]", "Speed [rpm]"]].to_numpy(float)
        hits = [r for r in study.run_ids if data.at[r, "Strength"] == row["Strength [MPa]"]]
        assert len(hits) == 1
        got = planned.loc[hits[0], ["Temp", "Time", "Load", "Speed"]].to_numpy(float)
        if i == 0:
            assert got[0] == first_temp and study.achieved().at[hits[0], "Temp"] == first_temp + 1.0
        else:
            assert np.array_equal(got, settings)
    assert sorted(study.run_ids) == sorted(design.table["run"])


def test_plan_matched_by_run_id_and_an_unknown_run_refused():
    design, table = plant_table()
    table = table.iloc[::-1].reset_index(drop=True)
    study = Study.from_table(table, factors=list(design.factors), responses=["Strength"], plan=design, run="run")
    assert study.data().at[5, "Strength"] == table.set_index("run").at[5, "Strength [MPa]"]
    table.loc[0, "run"] = 99
    with pytest.raises(ImportDataError, match="run 99 is not in the planned design") as info:
        Study.from_table(table, factors=list(design.factors), responses=["Strength"], plan=design, run="run")
    assert info.value.problems[0].row == 2


def test_cli_import_writes_a_study_file(tmp_path, capsys):
    from levelwise.dashboards.cli import main

    _, table = plant_table()
    table["Note"] = ""
    table.loc[0, "Note"] = "first"
    csv = tmp_path / "plant.csv"
    table.to_csv(csv, index=False)
    out = tmp_path / "plant.json"
    code = main(["import", str(csv), "-o", str(out), "--factor", "Temp", "--factor", "Time", "--factor", "Load",
                 "--factor", "Speed", "--response", "Strength", "--title", "Plant"])
    assert code == 0
    said = capsys.readouterr()
    assert "Note" in said.out  # the unused column is listed
    study = Study.load(out)
    assert study.title == "Plant" and len(study.run_ids) == 19
    assert study.data().at[1, "Strength"] == pytest.approx(table.at[0, "Strength [MPa]"])
    assert json.loads(out.read_text())["format_version"] >= 2


def test_cli_import_reports_problems_and_writes_nothing(tmp_path, capsys):
    from levelwise.dashboards.cli import main

    _, table = plant_table()
    table = table.astype(object)
    table.loc[3, "Time [min]"] = "x"
    csv = tmp_path / "plant.csv"
    table.to_csv(csv, index=False)
    out = tmp_path / "plant.json"
    code = main(["import", str(csv), "-o", str(out), "--factor", "Temp", "--factor", "Time", "--factor", "Load",
                 "--factor", "Speed", "--response", "Strength"])
    assert code == 1 and not out.exists()
    assert "row 5" in capsys.readouterr().err
