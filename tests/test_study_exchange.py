"""CSV / XLSX imports with row-and-column problems, merge rules, table exports and figures."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import openpyxl
import pandas as pd
import pytest

from levelwise import Factor, ImportDataError, LevelwiseWarning, Study, full_factorial
from levelwise.study import (
    anova_table,
    coefficient_table,
    export_anova,
    export_coefficients,
    export_predictions,
    export_run_sheet,
    guess_mapping,
    import_table,
    prediction_table,
    read_table,
    split_header,
)
from levelwise.study import (
    study_run_sheet as run_sheet,
)

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min")]


def planned_study() -> Study:
    study = Study(FACTORS, title="exchange (invented)")
    study.add_stage("screen", full_factorial(FACTORS, center_points=2, randomize=False))
    study.add_response("Impact", units="J")
    return study


def csv_bytes(text: str) -> bytes:
    return text.strip().replace("\n    ", "\n").encode("utf-8") + b"\n"


def problems_of(excinfo) -> list[tuple]:
    return [(p.row, p.column) for p in excinfo.value.problems]


def test_run_sheet_round_trip_csv_and_xlsx(tmp_path):
    for suffix in (".csv", ".xlsx"):
        study = planned_study()
        path = export_run_sheet(study, tmp_path / f"sheet{suffix}")
        sheet = read_table(path)
        assert list(sheet.columns) == ["run", "stage", "block", "role", "Oven [°C]", "Dwell [min]",
                                       "Impact [J]"]
        # The plant fills in the response column and sends the sheet back.
        filled = run_sheet(study)
        filled["Impact [J]"] = [7.0, 9.5, 8.25, 10.0, 9.0, 9.1]  # invented
        if suffix == ".csv":
            filled.to_csv(path, index=False)
        else:
            filled.to_excel(path, index=False)
        report = import_table(study, path)
        assert report.values_recorded == 6 and report.warnings == ()
        assert list(study.data()["Impact"]) == [7.0, 9.5, 8.25, 10.0, 9.0, 9.1]
        assert study.audit[-1].reason == f"imported from {path}"


def test_every_problem_is_named_by_row_and_column():
    study = planned_study()
    study.record(1, "Impact", 7.0)
    before = study.to_dict(), len(study.audit)
    data = csv_bytes("""
    Run,Oven [°F],Dwell [min],Impact [J]
    1,170,8,7.5
    2,210,eight,9.0
    2,170,16,8.0
    4,210,16,abc
    9,190,12,9.0
    """)
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, data)
    found = problems_of(excinfo)
    messages = [str(p) for p in excinfo.value.problems]
    assert (1, "Oven [°F]") in found  # unit mismatch declared in the header
    assert any("declares units '°F' but factor 'Oven' is in '°C'" in m for m in messages)
    assert (3, "Dwell [min]") in found  # non-numeric setting
    assert (4, "Run") in found and any("duplicate run: run 2 is also in row 3" in m for m in messages)
    assert (5, "Impact [J]") in found and any("'abc' is not a number" in m for m in messages)
    assert (6, "Run") in found and any("run 9 is not in the study" in m for m in messages)
    assert (2, "Impact [J]") in found  # would overwrite a recorded value
    assert any("already has 'Impact' = 7.0; the file says 7.5 (pass overwrite=True" in m for m in messages)
    assert "row 5, column 'Impact [J]'" in str(excinfo.value)
    assert (study.to_dict(), len(study.audit)) == before  # all or nothing: nothing changed


def test_planned_setting_that_differs_is_a_problem_unless_mapped_as_achieved():
    study = planned_study()
    data = csv_bytes("""
    run,Oven,Dwell,Impact
    2,172.5,8,9.0
    """)
    with pytest.raises(ImportDataError, match=r"row 2, column 'Oven': run 2 was planned at 210.0 but the file "
                                              r"says 172.5; map the column under 'achieved'"):
        import_table(study, data)
    mapping = {"run": "run", "achieved": {"Oven": "Oven"}, "responses": {"Impact": "Impact"}}
    with pytest.warns(LevelwiseWarning, match=r"did not use the column\(s\) \['Dwell'\]"):
        report = import_table(study, data, mapping)
    assert [(w.row, w.column) for w in report.warnings] == [(1, "Dwell")]  # listed, never dropped silently
    assert study.achieved().loc[2, "Oven"] == 172.5
    assert study.data().loc[2, "Oven"] == 172.5 and study.planned().loc[2, "Oven"] == 210.0


def test_outside_design_range_is_a_warning_and_kept():
    study = planned_study()
    data = csv_bytes("""
    run,Oven (achieved) [°C],Impact
    3,215,8.0
    """)
    report = import_table(study, data)
    assert [(w.row, w.column, w.severity) for w in report.warnings] == [(2, "Oven (achieved) [°C]", "warning")]
    assert "215.0 is outside the design range 170.0 to 210.0 of 'Oven' (kept)" in str(report.warnings[0])
    assert study.achieved().loc[3, "Oven"] == 215.0


def test_overwrite_needs_the_flag():
    study = planned_study()
    study.record(1, "Impact", 7.0)
    data = csv_bytes("run,Impact\n1,7.5")
    with pytest.raises(ImportDataError, match="pass overwrite=True"):
        import_table(study, data)
    report = import_table(study, data, overwrite=True, reason="re-measured")
    assert report.values_recorded == 1 and study.data().loc[1, "Impact"] == 7.5
    assert study.audit[-2].reason == "re-measured" and "Impact = 7.5 (was 7.0)" in study.audit[-2].what
    assert study.audit[-1].action == "import" and "1 replaced a recorded value" in study.audit[-1].what
    # The same value again is not a conflict and changes nothing.
    assert import_table(study, data).values_recorded == 0


def test_new_runs_need_every_factor_and_a_new_stage():
    study = planned_study()
    data = csv_bytes("""
    run,Oven,Impact
    7,190,9.2
    """)
    with pytest.raises(ImportDataError, match=r"factors missing: new runs need a column for every factor; "
                                              r"\['Dwell'\] have none"):
        import_table(study, data, stage="confirm")
    data = csv_bytes("""
    run,Oven,Dwell,Impact
    7,190,,9.2
    8,190,12,9.4
    """)
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, data, stage="confirm")
    assert problems_of(excinfo) == [(2, "Dwell")]
    assert "factor missing: new run 7 has no setting for 'Dwell'" in str(excinfo.value)
    data = csv_bytes("""
    run,Oven,Dwell,Impact,Gloss [GU]
    7,190,12,9.2,84
    8,190,12,9.4,85
    """)
    mapping = guess_mapping(["run", "Oven", "Dwell", "Impact", "Gloss [GU]"], study)
    assert "Gloss" not in mapping["responses"]  # an unknown header is never guessed to be a response
    mapping["responses"]["Gloss"] = "Gloss [GU]"
    report = import_table(study, data, mapping, stage="confirm")
    assert report.runs_added == (7, 8)
    assert study.responses["Gloss"].units == "GU"  # a new response, units from its header
    table = study.data()
    assert list(table.loc[[7, 8], "stage"]) == ["confirm", "confirm"]
    assert list(table.loc[[7, 8], "Impact"]) == [9.2, 9.4]


def test_xlsx_import_with_explicit_mapping(tmp_path):
    study = planned_study()
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "results"
    sheet.append(["Lauf", "Temperatur", "Schlag"])
    sheet.append([1, 170, 6.75])
    sheet.append([2, 210, "n/a"])
    path = tmp_path / "results.xlsx"
    book.save(path)
    mapping = {"run": "Lauf", "factors": {"Oven": "Temperatur"}, "responses": {"Impact": "Schlag"}}
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, path, mapping, sheet="results")
    assert problems_of(excinfo) == [(3, "Schlag")]
    sheet["C3"] = 9.5
    book.save(path)
    assert import_table(study, path, mapping).values_recorded == 2
    assert study.data().loc[[1, 2], "Impact"].tolist() == [6.75, 9.5]
    with pytest.raises(ImportDataError, match=r"'sheet' must be one of \['results'\]"):
        import_table(study, path, mapping, sheet="other")


def test_xlsx_with_a_title_above_the_header_and_blank_rows(tmp_path):
    study = planned_study()
    book = openpyxl.Workbook()
    sheet = book.active
    sheet["B1"] = "Cure trial results (invented)"
    sheet["B3"], sheet["C3"], sheet["D3"] = "run", "Oven [K]", "Impact"
    sheet["B4"], sheet["C4"], sheet["D4"] = 1, 443.15, 7.0
    sheet["B6"], sheet["C6"], sheet["D6"] = 2, 483.15, "x"
    path = tmp_path / "titled.xlsx"
    book.save(path)
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, path)
    # The first non-blank row is the header: B1 holds a title only, so its row is taken as the header here
    # and the real header row has more cells than it.
    assert excinfo.value.problems[0].row == 3
    # Told where the header is, the title is ignored and rows keep their sheet numbers.
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, path, header_row=3)
    assert problems_of(excinfo) == [(3, "Oven [K]"), (4, "Oven [K]"), (6, "Oven [K]"), (6, "Impact")]
    sheet.delete_rows(1, 2)  # without the title the header is row 1; rows keep their sheet numbers
    book.save(path)
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, path)
    # Header units (row 1), Kelvin values that differ from the planned °C settings (rows 2 and 4), text (row 4).
    assert problems_of(excinfo) == [(1, "Oven [K]"), (2, "Oven [K]"), (4, "Oven [K]"), (4, "Impact")]


def test_mapping_problems_are_named():
    study = planned_study()
    with pytest.raises(ImportDataError, match="column 'Temp': mapped to factors 'Oven' but not in the file"):
        import_table(study, b"run,Impact\n1,2\n", {"run": "run", "factors": {"Oven": "Temp"}})
    with pytest.raises(ImportDataError, match="not a study factor"):
        import_table(study, b"run,x\n1,2\n", {"run": "run", "factors": {"Speed": "x"}})
    with pytest.raises(ImportDataError, match="no run-id column"):
        import_table(study, b"Oven,Impact\n170,2\n")


def test_header_units_and_guessed_mapping():
    assert split_header("Oven [°C]") == ("Oven", "°C")
    assert split_header("Film (µm)") == ("Film (µm)", None)  # one convention: units in [...] only
    assert split_header("Dwell") == ("Dwell", None)
    study = planned_study()
    mapping = guess_mapping(["Run", "Oven [°C]", "Dwell (achieved)", "Impact [J]", "comment"], study)
    assert mapping == {"run": "Run", "factors": {"Oven": "Oven [°C]"}, "achieved": {"Dwell": "Dwell (achieved)"},
                       "responses": {"Impact": "Impact [J]"}}


def test_a_column_the_study_does_not_know_is_listed_not_dropped():
    # A response column imported before add_response: it is reported (a warning naming the column), not lost.
    study = planned_study()
    with pytest.warns(LevelwiseWarning, match=r"did not use the column\(s\) \['Gloss \[GU\]', 'comment'\]"):
        report = import_table(study, b"run,Impact,Gloss [GU],comment\n1,7.0,84,ok\n")
    assert [(w.row, w.column) for w in report.warnings] == [(1, "Gloss [GU]"), (1, "comment")]
    assert "Gloss" not in study.responses and study.data().loc[1, "Impact"] == 7.0
    study.add_response("Gloss", units="GU")
    report = import_table(study, b"run,Impact,Gloss [GU]\n1,7.0,84\n")  # now it is used, nothing unused
    assert report.warnings == () and study.data().loc[1, "Gloss"] == 84.0


def demo_fit():
    from levelwise import demo

    study = Study(list(demo.FACTORS))
    study.add_stage("screen", demo.demo_design())
    study.add_response("Impact", "J")
    for run, value in zip(study.run_ids, demo.demo_data()["Impact"]):
        study.record(run, "Impact", float(value))
    study.set_model("Impact", demo.MODEL)
    return study, study.fit("Impact")


def test_anova_table_matches_statsmodels():
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    study, fit = demo_fit()
    table = anova_table(fit).set_index("source")
    pd.testing.assert_frame_equal(table, pd.DataFrame(fit.anova))  # the exported table is the one the views show
    coded = pd.DataFrame({f.name: f.to_coded(study.data()[f.name]) for f in study.factors})
    coded["Impact"] = study.data()["Impact"].to_numpy()
    reference = smf.ols("Impact ~ Oven + Dwell + Film + Catalyst + Oven:Dwell + Oven:Catalyst", coded).fit()
    type3 = anova_lm(reference, typ=3)  # statsmodels: partial sums of squares, one per term
    for term in ["Oven", "Dwell", "Film", "Catalyst", "Oven:Dwell", "Oven:Catalyst"]:
        assert table.loc[term, "sum_sq"] == pytest.approx(type3.loc[term, "sum_sq"], rel=1e-9)
        assert table.loc[term, "p_value"] == pytest.approx(type3.loc[term, "PR(>F)"], rel=1e-7)
    assert table.loc["Residual", "sum_sq"] == pytest.approx(reference.ssr, rel=1e-10)  # statsmodels
    assert table.loc["Model", "sum_sq"] == pytest.approx(reference.ess, rel=1e-10)  # statsmodels
    assert table.loc["Model", "F"] == pytest.approx(reference.fvalue, rel=1e-9)  # statsmodels
    assert table.loc["Residual", "df"] == reference.df_resid == 12


def test_table_exports_read_back(tmp_path):
    _, fit = demo_fit()
    settings = {"Oven": [175.0, 205.0], "Dwell": 12.0, "Film": 70.0, "Catalyst": 1.0}
    for suffix in (".csv", ".xlsx"):
        coefficients = pd.read_csv(export_coefficients(fit, tmp_path / f"c{suffix}")) if suffix == ".csv" \
            else pd.read_excel(export_coefficients(fit, tmp_path / f"c{suffix}"))
        np.testing.assert_allclose(coefficients["estimate"], coefficient_table(fit)["estimate"], rtol=1e-12)
        assert list(coefficients["term"]) == list(fit.terms)
        anova = read_table(export_anova(fit, tmp_path / f"a{suffix}"))
        assert list(anova["source"]) == list(fit.anova.index)
        np.testing.assert_allclose(anova["sum_sq"].astype(float), fit.anova["sum_sq"], rtol=1e-12)
        predictions = read_table(export_predictions(fit, settings, tmp_path / f"p{suffix}"))
        expected = fit.predict(pd.DataFrame({"Oven": [175.0, 205.0], "Dwell": 12.0, "Film": 70.0,
                                             "Catalyst": 1.0}))
        np.testing.assert_allclose(predictions["pi_high"].astype(float), expected["pi_high"], rtol=1e-12)
        np.testing.assert_allclose(predictions["Oven"].astype(float), [175.0, 205.0])
    assert list(prediction_table(fit, settings).columns[:4]) == ["Oven", "Dwell", "Film", "Catalyst"]


def test_figures_draw_the_arrays_the_views_use(tmp_path):
    from levelwise.figures import figure_bytes, residual_figure, save_figure, trace_figure

    _, fit = demo_fit()
    settings = {"Oven": 190.0, "Dwell": 12.0, "Film": 70.0, "Catalyst": 1.0}
    fig = trace_figure(fit, settings, points=40)
    assert len(fig.axes) == 4
    for ax, name in zip(fig.axes, fit.factor_names):
        expected = fit.trace(name, settings, points=40)
        lines = {line.get_label(): line for line in ax.get_lines()}
        mean = [ln for ln in ax.get_lines() if ln.get_linewidth() == 2][0]
        np.testing.assert_array_equal(mean.get_xdata(), expected["x"])
        np.testing.assert_array_equal(mean.get_ydata(), expected["mean"])
        dashed = sorted((ln for ln in ax.get_lines() if ln.get_linestyle() == "--"), key=lambda ln: ln.get_ydata()[0])
        np.testing.assert_allclose(dashed[0].get_ydata(), expected["mean"] - expected["pi_half"])
        np.testing.assert_allclose(dashed[1].get_ydata(), expected["mean"] + expected["pi_half"])
        assert lines  # the panel has drawn lines
    png = figure_bytes(fig, "png")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    svg = save_figure(fig, tmp_path / "trace.svg").read_bytes()
    root = ET.fromstring(svg)
    assert root.tag.endswith("svg") and svg.count(b"<path") > 20
    res = residual_figure(fit)
    offsets = res.axes[0].collections[0].get_offsets()
    np.testing.assert_allclose(offsets[:, 0], fit.fitted)
    np.testing.assert_allclose(offsets[:, 1], fit.residuals)
    assert save_figure(res, tmp_path / "res.png").read_bytes()[:4] == b"\x89PNG"


def test_matplotlib_and_jsonschema_are_imported_only_when_used():
    import subprocess
    import sys

    code = ("import sys, levelwise, levelwise.study, levelwise.figures\n"
            "print(sorted(m for m in ('matplotlib', 'jsonschema', 'openpyxl') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_a_filled_design_run_sheet_imports_into_the_study(tmp_path):
    from levelwise.design import run_sheet as design_run_sheet

    design = full_factorial(FACTORS, center_points=2, randomize=False)
    study = Study(FACTORS)
    study.add_stage("screen", design)
    study.add_response("Impact", units="J")
    sheet = design_run_sheet(design, responses=["Impact"])
    assert "Oven (achieved)" in sheet.columns  # the run-sheet convention of levelwise.design.run_sheet
    sheet.loc[1, "Oven (achieved)"] = 212.5  # invented
    sheet["Impact"] = [7.0, 9.5, 8.25, 10.0, 9.0, 9.1]  # invented
    path = tmp_path / "filled.csv"
    sheet.to_csv(path, index=False)
    report = import_table(study, path)
    assert report.values_recorded == 7
    assert study.achieved().loc[2, "Oven"] == 212.5
    assert [str(w) for w in report.warnings] == [
        "warning: row 3, column 'Oven (achieved)': 212.5 is outside the design range 170.0 to 210.0 of 'Oven' (kept)"
    ]


def test_parse_header_forms():
    from levelwise.study import parse_header

    assert parse_header("Oven (achieved) [°C]") == ("Oven", "°C", True)
    assert parse_header("Oven (Achieved)") == ("Oven", None, True)
    assert parse_header("achieved Oven [°C]") == ("achieved Oven", "°C", False)  # not the convention
    assert parse_header("Oven [°C]") == ("Oven", "°C", False)
    assert "Oven (achieved) [°C]" in run_sheet(planned_study(), achieved=True).columns


def test_import_with_a_categorical_factor():
    factors = [Factor("Oven", 170, 210, "°C"), Factor("Metal", levels=["steel", "brass"])]
    study = Study(factors)
    study.add_stage("screen", pd.DataFrame({"Oven": [170.0, 210.0], "Metal": ["steel", "brass"]}))
    study.add_response("Impact")
    data = csv_bytes("""
    run,Oven,Metal,Metal (achieved),Impact
    1,170,steel,copper,7.0
    2,210,steel,,8.0
    """)
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, data)
    assert problems_of(excinfo) == [(2, "Metal (achieved)"), (3, "Metal")]
    assert "'copper' is not one of the levels ['steel', 'brass'] of 'Metal'" in str(excinfo.value)
    assert "run 2 was planned at 'brass' but the file says 'steel'" in str(excinfo.value)
    report = import_table(study, csv_bytes("""
    run,Oven,Metal,Metal (achieved),Impact
    1,170, steel ,brass,7.0
    2,210,brass,,8.0
    """))
    assert report.values_recorded == 3
    assert study.achieved().loc[1, "Metal"] == "brass" and list(study.data()["Metal"]) == ["brass", "brass"]
