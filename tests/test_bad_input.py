"""Bad input gets a LevelwiseError whose message names the field, what is allowed and what arrived."""

import numpy as np
import pandas as pd
import pytest

from levelwise import Factor, LevelwiseError, fit, full_factorial, parse_model


def small_data():
    d = full_factorial([Factor("A", 0, 1), Factor("B", 0, 1)], center_points=1, randomize=False).table
    return d.assign(y=[1.0, 2.0, 3.0, 4.5, 2.6])


def test_low_not_below_high():
    with pytest.raises(LevelwiseError, match=r"Factor 'Oven': 'low' must be less than 'high'.*low=200.0, high=180.0"):
        Factor("Oven", 200, 180)
    with pytest.raises(LevelwiseError, match="'low' must be less than 'high'"):
        Factor("Oven", 5, 5)


def test_duplicate_factor_name():
    with pytest.raises(LevelwiseError, match="The name 'A' appears more than once"):
        full_factorial([Factor("A", 0, 1), Factor("A", 2, 3)])


def test_empty_name_and_non_numeric_limits():
    with pytest.raises(LevelwiseError, match="'name' of a Factor must be a non-empty string"):
        Factor("  ", 0, 1)
    with pytest.raises(LevelwiseError, match="'high' of factor 'A' must be a finite number"):
        Factor("A", 0, float("inf"))
    with pytest.raises(LevelwiseError, match="'low' of factor 'A' must be a finite number. Got 'x'"):
        Factor("A", "x", 1)


def test_unknown_factor_in_model():
    with pytest.raises(LevelwiseError, match="'Zeta' names an unknown factor. Known factors: 'A', 'B'"):
        fit(small_data(), "y", "A + Zeta", factors=[Factor("A", 0, 1), Factor("B", 0, 1)])


def test_text_in_response_column():
    data = small_data().astype({"y": object})
    data.loc[2, "y"] = "n/a"
    with pytest.raises(LevelwiseError, match=r"response column 'y' must hold numbers. Row 3 .* holds 'n/a'"):
        fit(data, "y", "A + B")


def test_fewer_runs_than_terms():
    data = small_data().iloc[:3]
    with pytest.raises(LevelwiseError, match="has 4 terms but only 3 usable runs"):
        fit(data, "y", "A*B", factors=[Factor("A", 0, 1), Factor("B", 0, 1)])


def test_aliased_terms_are_named():
    # A 2^(3-1) half fraction with C = AB: C and A:B are the same column (common practice).
    data = pd.DataFrame({"A": [-1, 1, -1, 1] * 2, "B": [-1, -1, 1, 1] * 2})
    data["C"] = data.A * data.B
    data["y"] = [1.0, 2.0, 3.5, 4.0, 1.1, 2.2, 3.3, 4.1]
    with pytest.raises(LevelwiseError, match=r"aliased.*'(C|A:B)' = \+1\*(A:B|C)"):
        fit(data, "y", "A + B + C + A:B")


def test_level_outside_unit_interval():
    allowed = r"'level' parameter must be a number in the open interval \(0, 1\). Got 1.5"
    with pytest.raises(LevelwiseError, match=allowed):
        fit(small_data(), "y", "A + B", level=1.5)


def test_non_finite_setting_at_prediction():
    result = fit(small_data(), "y", "A + B")
    with pytest.raises(LevelwiseError, match="setting for factor 'B' must be a finite number"):
        result.predict({"A": 0.5, "B": np.inf})
    with pytest.raises(LevelwiseError, match=r"missing factor\(s\) \['B'\]"):
        result.predict({"A": 0.5})


def test_int_beyond_the_float_range_is_refused_by_name():
    # Python ints have no upper bound: 10**400 cannot become a float (OverflowError). Every path that reads a
    # number refuses it as not finite, naming the factor, the row or the column, instead of raising OverflowError.
    result = fit(small_data(), "y", "A + B")
    huge = 10**400
    with pytest.raises(LevelwiseError, match="setting for factor 'A' must be a finite number"):
        result.predict({"A": huge, "B": 0.0})
    with pytest.raises(LevelwiseError, match="setting for factor 'A' must be a finite number"):
        result.refresh({"A": -huge, "B": 0.0})
    with pytest.raises(LevelwiseError, match="'A' must hold finite numbers. Row 1 holds inf"):
        result.predict({"A": [huge, 0.5], "B": [0.0, 0.0]})
    data = small_data().astype({"y": object})
    data.loc[2, "y"] = huge
    with pytest.raises(LevelwiseError, match="response column 'y' must hold finite numbers. Row 3 holds inf"):
        fit(data, "y", "A + B")


def test_non_finite_setting_in_a_table_names_the_row():
    # A table of exactly the fit's float factors is read without a copy; a bad cell must still be
    # refused by row and factor, and the caller's table must come back unchanged.
    result = fit(small_data(), "y", "A + B")
    table = pd.DataFrame({"A": [0.5, -0.5, 0.0], "B": [0.0, 0.25, np.nan]})
    with pytest.raises(LevelwiseError, match=r"setting for factor 'B' in row 3 must be a finite number. Got nan"):
        result.predict(table)
    table["B"] = [0.0, 0.25, 0.5]
    before = table.copy()
    result.predict(table)
    pd.testing.assert_frame_equal(table, before)


def test_factors_named_like_formula_helpers_work():
    # C, I and Q shadow helpers in common formula engines (stack notes); they must still fit.
    rng = np.random.default_rng(3)
    data = pd.DataFrame(rng.choice([-1.0, 1.0], size=(12, 3)), columns=["C", "I", "Q"])
    data["y"] = 1 + 2 * data.C - data.I + 0.5 * data.Q * data.C + rng.normal(0, 0.01, 12)
    factors = [Factor(n, -1, 1) for n in "CIQ"]
    result = fit(data, "y", "C + I + Q + C:Q", factors=factors)
    assert list(result.coefficients.index) == ["Intercept", "C", "I", "Q", "C:Q"]
    assert result.coefficients.loc["C", "estimate"] == pytest.approx(2, abs=0.05)  # the generating value above


def test_power_helper_and_unicode_names():
    spec = parse_model("`Öfen temp` + Dwell + I(`Öfen temp`**2) + I(Dwell*`Öfen temp`)", ["Öfen temp", "Dwell"])
    assert spec.terms == ("Intercept", "Öfen temp", "Dwell", "Öfen temp^2", "Öfen temp:Dwell")
    assert parse_model("A + B - 1", ["A", "B"]).terms == ("A", "B")
    assert parse_model("0 + A", ["A"]).terms == ("A",)
