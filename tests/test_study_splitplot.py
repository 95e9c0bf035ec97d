"""A study with hard-to-change factors and whole plots: the file, the stages and the split-plot fit (issue 13).

The data are the INVENTED split-plot stage of the demo (``levelwise.demo.split_plot_data``). Reference values
come from statsmodels ``MixedLM`` (REML) fitted here on the same numbers, and the bookkeeping checks (which run
is in which whole plot) from the design table itself.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf

import levelwise as lw
from levelwise import LevelwiseError, LevelwiseWarning, Study, demo
from levelwise.model import MixedFit

MODEL = demo.SPLIT_PLOT_MODEL


def split_study() -> Study:
    return demo.split_plot_study()


def test_add_stage_keeps_each_runs_whole_plot_and_the_file_keeps_them(tmp_path):
    study = split_study()
    design = demo.split_plot_design()
    assert study.whole_plots().tolist() == design.table["whole_plot"].tolist()
    assert study.planned()["whole_plot"].tolist() == design.table["whole_plot"].tolist()
    assert study.data()["whole_plot"].tolist() == design.table["whole_plot"].tolist()
    assert study.hard_to_change == ["Oven"] and study.factors[0].hard_to_change
    assert "whole plots 1..8" in study.audit[2].what
    loaded = Study.load(study.save(tmp_path / "split.json"))
    assert loaded.to_dict() == study.to_dict()
    assert loaded.factors == study.factors  # hard_to_change survives the file
    document = json.loads((tmp_path / "split.json").read_text(encoding="utf-8"))
    assert document["format_version"] == 4
    assert document["data"]["factors"][0]["hard_to_change"] is True
    assert "hard_to_change" not in document["data"]["factors"][1]  # written only when true


def test_a_second_split_plot_stage_continues_the_whole_plot_numbers_and_a_plain_stage_has_none():
    study = split_study()
    again = lw.full_factorial(list(demo.SPLIT_PLOT_FACTORS), replicates=2, seed=5)  # whole plots 1..4
    ids = study.add_stage("again", again, renumber=True)
    plots = study.whole_plots()
    assert plots.loc[ids].tolist() == (again.table["whole_plot"] + 8).tolist()  # 9..12, after the first's 1..8
    assert "continued after the study's" in study.audit[-1].what
    plain = lw.full_factorial([lw.Factor(f.name, f.low, f.high, f.units) for f in demo.SPLIT_PLOT_FACTORS], seed=6)
    plain_ids = study.add_stage("plain", plain, renumber=True)
    assert plots.index.isin(plain_ids).sum() == 0 and study.whole_plots().loc[plain_ids].isna().all()
    table = study.fit_table("Impact")
    # A run reset on its own is its own whole plot in the table the fit sees.
    assert table.loc[plain_ids, "whole_plot"].tolist() == [f"run {run}" for run in plain_ids]
    assert table.loc[ids, "whole_plot"].tolist() == (again.table["whole_plot"] + 8).tolist()


def test_study_fit_is_the_split_plot_fit_and_agrees_with_statsmodels_mixedlm():
    study = split_study()
    fit = study.fit("Impact")
    assert isinstance(fit, MixedFit)
    table = demo.split_plot_data()
    direct = lw.fit(table, "Impact", MODEL, factors=list(demo.SPLIT_PLOT_FACTORS), whole_plot="whole_plot")
    np.testing.assert_allclose(fit.beta, direct.beta, rtol=1e-12)
    assert list(fit.runs) == table["run"].tolist()
    # Reference: statsmodels MixedLM (REML), random whole-plot intercept, on the coded settings.
    coded = pd.DataFrame({"a": (table["Oven"] - 190) / 20, "b": (table["Dwell"] - 12) / 4,
                          "c": (table["Film"] - 70) / 20, "y": table["Impact"], "wp": table["whole_plot"]})
    ref = smf.mixedlm("y ~ a + b + c + a:b", coded, groups=coded["wp"]).fit(reml=True)
    assert fit.variance_components["whole_plot"] == pytest.approx(float(ref.cov_re.iloc[0, 0]), rel=1e-4)
    assert fit.variance_components["residual"] == pytest.approx(float(ref.scale), rel=1e-4)
    for ours, theirs in {"Oven": "a", "Dwell": "b", "Film": "c", "Oven:Dwell": "a:b"}.items():
        assert fit.coefficients.loc[ours, "estimate"] == pytest.approx(ref.fe_params[theirs], rel=1e-4)
    # 8 whole plots, rank [1, Oven] = 2 -> 6 whole-plot df; 32 runs - 8 whole plots - 3 sub-plot columns = 21.
    assert fit.df_whole_plot == 6 and fit.df_residual == 21


def test_study_fit_without_whole_plots_warns_with_each_standard_error():
    study = split_study()
    mixed = study.fit("Impact")
    with pytest.warns(LevelwiseWarning, match="treats every run as independently reset") as record:
        ols = study.fit("Impact", whole_plot=None)
    assert type(ols).__name__ == "Fit"
    assert record[0].filename == __file__  # the warning points at the caller of Study.fit
    text = str(record[0].message)
    table = mixed.ignoring_whole_plots
    for term, row in table.iterrows():
        assert f"{term}: {row.se_split_plot:.4g} with whole plots vs {row.se_ignoring_whole_plots:.4g} without" in text
    # The hard-to-change factor's SE is understated when the whole plots are ignored; the easy factors' overstated.
    assert table.loc["Oven", "ratio"] < 1 < table.loc["Dwell", "ratio"]
    with pytest.raises(LevelwiseError, match="'whole_plot' parameter of Study.fit must be 'auto'"):
        study.fit("Impact", whole_plot="yes")


def test_too_few_whole_plots_fall_back_to_least_squares_with_the_reason():
    factors = list(demo.SPLIT_PLOT_FACTORS)
    with pytest.warns(LevelwiseWarning, match="only 2 whole plots"):
        design = lw.full_factorial(factors, seed=3)  # 2 whole plots: nothing left for the whole-plot stratum
    study = Study(factors)
    study.add_stage("one", design)
    study.add_response("y")
    for run in study.run_ids:
        study.record(run, "y", 10.0 + run % 3)  # invented numbers
    with pytest.warns(LevelwiseWarning, match="a split-plot fit could not be made .*whole-plot stratum"):
        fit = study.fit("y", "Oven + Dwell + Film")
    assert type(fit).__name__ == "Fit"


def test_exclusions_reach_the_split_plot_fit():
    study = split_study()
    study.exclude(5, "panel dropped (invented)")
    fit = study.fit("Impact")
    assert isinstance(fit, MixedFit) and 5 not in list(fit.runs) and len(fit.runs) == 31
    every = study.fit("Impact", apply_exclusions=False)
    assert len(every.runs) == 32
    again = every.exclude(5, "panel dropped (invented)")
    np.testing.assert_allclose(again.beta, fit.beta, rtol=1e-9)


def test_bad_whole_plots_are_refused_naming_the_row():
    study = split_study()
    table = demo.split_plot_design().table.copy()
    table["whole_plot"] = table["whole_plot"].astype(float)
    table.loc[3, "whole_plot"] = np.nan
    with pytest.raises(LevelwiseError, match="'whole_plot' of row 4 of the design must be a whole-plot number"):
        study.add_stage("bad", table, renumber=True)
    table = demo.split_plot_design().table.copy()
    table.loc[table["whole_plot"] == 2, "Oven"] = [170.0, 210.0, 170.0, 210.0]
    with pytest.raises(LevelwiseError, match="hard-to-change factor 'Oven' is planned at more than one setting in "
                                             "whole plot 2"):
        study.add_stage("bad", table, renumber=True)
    assert [s.name for s in study.stages] == ["oven held"]  # nothing was added


def test_import_of_a_table_with_whole_plots_adds_them(tmp_path):
    table = demo.split_plot_data()
    study = Study(list(demo.SPLIT_PLOT_FACTORS))
    study.add_response("Impact", units="J")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # whole_plot is bookkeeping, never "not used"
        lw.import_table(study, table, stage="imported")
    assert study.whole_plots().tolist() == table["whole_plot"].tolist()


def test_to_code_rebuilds_the_split_plot_fit(tmp_path):
    study = split_study()
    study.exclude(7, "panel dropped (invented)")
    path = study.save(tmp_path / "split.json")
    namespace: dict = {}
    exec(compile(study.to_code(path), "<to_code>", "exec"), namespace)  # noqa: S102 - the point of the test
    rebuilt = namespace["fits"]["Impact"]
    assert isinstance(rebuilt, MixedFit) and namespace["factors"][0].hard_to_change
    np.testing.assert_allclose(rebuilt.beta, study.fit("Impact").beta, rtol=1e-10)
    assert 7 not in list(rebuilt.runs)


def test_the_shipped_split_plot_demo_is_what_the_seeded_script_writes_and_is_labelled_invented():
    from pathlib import Path

    shipped = Path(__file__).resolve().parents[1] / "dashboards" / "data" / "demo_split_plot.json"
    assert shipped.read_text(encoding="utf-8") == split_study().to_json()
    study = Study.load(shipped)
    assert "invented" in study.title.lower() and "INVENTED data" in study.notes
    # 2 oven settings x 4 replicates = 8 whole plots of 4 runs, the oven constant in each (the stated design).
    table = study.data()
    assert table.groupby("whole_plot").size().tolist() == [4] * 8
    assert (table.groupby("whole_plot")["Oven"].nunique() == 1).all()
    # The REML fit recovers the stated invented truth within its own intervals (coded units).
    coefficients = study.fit("Impact").coefficients
    for term, value in demo.SPLIT_PLOT_TRUTH.items():
        assert coefficients.loc[term, "ci_low"] <= value <= coefficients.loc[term, "ci_high"], term


def test_the_study_run_sheet_and_study_from_table_keep_the_whole_plots(tmp_path):
    from levelwise.study import export_run_sheet, import_table, study_run_sheet

    study = split_study()
    sheet = study_run_sheet(study)
    assert list(sheet.columns[:5]) == ["run", "stage", "block", "whole_plot", "role"]
    path = export_run_sheet(study, tmp_path / "sheet.csv")
    copy = Study(list(demo.SPLIT_PLOT_FACTORS))
    copy.add_response("Impact", units="J")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        import_table(copy, path, stage="copy")
    assert copy.whole_plots().equals(study.whole_plots())
    table = demo.split_plot_data()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rebuilt = Study.from_table(table, factors=list(demo.SPLIT_PLOT_FACTORS), responses=["Impact"])
    assert rebuilt.whole_plots().tolist() == table["whole_plot"].tolist()
    assert isinstance(rebuilt.fit("Impact", MODEL), MixedFit)
    from levelwise.study._from_table import guess_columns

    assert "whole_plot" in guess_columns(table)["unused"]  # bookkeeping, never guessed as a factor or response


@pytest.mark.parametrize("position", [3, 520])  # the schema checks the first 500 runs, a fast check the rest
def test_a_bad_whole_plot_in_a_file_is_refused_naming_the_field(position):
    from levelwise import StudyFileError
    from levelwise.study import content_hash

    study = Study(list(demo.SPLIT_PLOT_FACTORS))
    study.add_stage("big", lw.full_factorial(list(demo.SPLIT_PLOT_FACTORS), replicates=70, seed=1))  # 560 runs
    document = json.loads(study.to_json())
    assert Study.from_document(json.loads(study.to_json())).whole_plots().nunique() == 140  # 2 x 70
    document["data"]["runs"][position]["whole_plot"] = "x"
    document["sha256"] = content_hash(document["data"], document["audit"])
    with pytest.raises(StudyFileError, match=rf"field 'data.runs\[{position}\].whole_plot': 'x' is not of type"):
        Study.from_document(document)
