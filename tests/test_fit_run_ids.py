"""Runs are named by run id in a Fit; term names stay as written; the old preset names are refused.

References: statsmodels OLS refits (a reference library) on the rows the run ids name.
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from levelwise import Factor, LevelwiseError, fit, full_factorial, parse_model


@pytest.fixture
def shuffled():
    """Invented, seeded data whose run column is not the row order (as after randomisation)."""
    rng = np.random.default_rng(11)
    data = pd.DataFrame({"A": np.tile([-1.0, 1.0], 6), "B": np.repeat([-1.0, 0.0, 1.0], 4)})
    data["y"] = 3 + 2 * data.A - data.B + rng.normal(0, 0.2, 12)
    data.insert(0, "run", rng.permutation(np.arange(101, 113)))
    data.index = [f"row{i}" for i in range(12)]  # labels that are neither positions nor run ids
    return data


def test_runs_fitted_residuals_and_diagnostics_are_indexed_by_run_id(shuffled):
    result = fit(shuffled, "y", "A + B")
    assert list(result.runs) == shuffled["run"].tolist()
    assert list(result.fitted.index) == list(result.runs) and list(result.residuals.index) == list(result.runs)
    assert list(result.diagnostics.index) == list(result.runs)
    ref = sm.OLS(shuffled["y"].to_numpy(), sm.add_constant(shuffled[["A", "B"]].to_numpy())).fit()  # statsmodels
    run = int(shuffled["run"].iloc[4])
    assert result.residuals.loc[run] == pytest.approx(ref.resid[4], abs=1e-12)
    assert result.fitted.loc[run] == pytest.approx(ref.fittedvalues[4], abs=1e-12)


def test_exclude_and_include_take_run_ids(shuffled):
    result = fit(shuffled, "y", "A + B")
    run = int(shuffled["run"].iloc[7])
    reduced = result.exclude(run, "invented reason")
    kept = shuffled.drop(index=shuffled.index[7])
    ref = sm.OLS(kept["y"].to_numpy(), sm.add_constant(kept[["A", "B"]].to_numpy())).fit()  # statsmodels refit
    assert reduced.beta == pytest.approx(ref.params, rel=1e-10)
    assert run not in reduced.runs and reduced.exclusions == ((run, "invented reason"),)
    assert reduced.orthogonality["excluded_runs"] == (run,)
    with pytest.raises(LevelwiseError, match="run id of this fit"):
        result.exclude(7, "7 is a row position here, not a run id")
    back = reduced.include(run)
    assert back.beta == pytest.approx(result.beta, rel=1e-10)


def test_missing_runs_are_run_ids(shuffled):
    data = shuffled.copy()
    data.loc["row3", "y"] = np.nan
    result = fit(data, "y", "A + B")
    assert result.missing_runs == (int(data.loc["row3", "run"]),)


def test_without_a_run_column_run_ids_are_one_to_n():
    data = pd.DataFrame({"A": [-1.0, 1, -1, 1, 0], "y": [1.0, 2.9, 1.2, 3.1, 2.0]}, index=[10, 20, 30, 40, 50])
    result = fit(data, "y", "A")
    assert list(result.runs) == [1, 2, 3, 4, 5]
    assert result.exclude(5, "centre point").n == 4


def test_duplicate_run_ids_are_refused(shuffled):
    data = shuffled.copy()
    data.loc["row1", "run"] = data.loc["row0", "run"]
    with pytest.raises(LevelwiseError, match="run id .* more than once"):
        fit(data, "y", "A + B")


def test_readme_exclusion_works_on_a_seven_run_design():
    """The README's `result.exclude(7, ...)` names run 7 of the design it builds, whatever the row order."""
    design = full_factorial([Factor("A", 0, 1), Factor("B", 10, 20), Factor("C", 1, 2)], seed=3)
    data = design.table.iloc[:7].copy()
    data["y"] = np.arange(7.0) ** 1.3 + data["A"]
    result = fit(data, "y", "A + B + C")
    row = data.index[data["run"] == 7][0]
    reduced = result.exclude(7, "invented reason")
    kept = data.drop(index=row)
    X = sm.add_constant(kept[["A", "B", "C"]].to_numpy())
    ref = sm.OLS(kept["y"].to_numpy(), X).fit()  # statsmodels on the six other runs (natural units)
    assert reduced.predict({"A": 0.3, "B": 12.0, "C": 1.5})["mean"].iloc[0] == pytest.approx(
        ref.predict([[1.0, 0.3, 12.0, 1.5]])[0], rel=1e-10)


@pytest.mark.parametrize("written", ["X2:X1", "X1:X2", "I(X2*X1)"])
def test_term_names_stay_as_written(written):
    names = ("X1", "X2")
    spec = parse_model(f"X1 + X2 + {written}", names)
    expected = {"X2:X1": "X2:X1", "X1:X2": "X1:X2", "I(X2*X1)": "X1:X2"}[written]  # I(...) is one factor code
    assert spec.terms == ("Intercept", "X1", "X2", expected)
    data = pd.DataFrame({"X1": [-1.0, 1, -1, 1, 0], "X2": [-1.0, -1, 1, 1, 0], "y": [1.0, 2.0, 2.5, 4.9, 2.6]})
    assert list(fit(data, "y", f"X1 + X2 + {written}").coefficients.index)[-1] == expected


def test_old_preset_names_are_refused_naming_the_new_ones():
    for old, new in (("linear", "main_effects"), ("interactions", "two_factor_interactions"),
                     ("quadratic", "full_second_order")):
        with pytest.raises(LevelwiseError, match=f"'{old}' has a new name: use '{new}'"):
            parse_model(old, ["A", "B"])
    # common practice: main effects 1 + k, plus two-factor interactions k(k-1)/2, plus k pure quadratics
    assert len(parse_model("main_effects", "ABC").terms) == 4
    assert len(parse_model("two_factor_interactions", "ABC").terms) == 7
    assert len(parse_model("full_second_order", "ABC").terms) == 10
