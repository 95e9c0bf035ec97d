"""levelwise against the NIST/SEMATECH e-Handbook, section 5.6.1 (eddy-current probe 2^3 factorial).

Every expected value below is as published in the e-Handbook, section 5.6.1 "Eddy Current Probe
Sensitivity Case Study" (data file SPLETT3, vendored in tests/data with its source line).
"""

import pandas as pd
import pytest

from levelwise import Factor, fit

CODED = [Factor(name, -1, 1) for name in ("X1", "X2", "X3")]


@pytest.fixture(scope="module")
def eddy(data_dir):
    return pd.read_csv(data_dir / "SPLETT3.csv")


# e-Handbook 5.6.1, full-model coefficients (printed to 5 decimals)
FULL_COEFFICIENTS = {
    "Intercept": 2.65875, "X1": 1.55125, "X2": -0.43375, "X3": 0.10625,
    "X1:X2": 0.06375, "X1:X3": 0.12375, "X2:X3": 0.14875, "X1:X2:X3": 0.07125,
}
# e-Handbook 5.6.1, effects (= 2 x coefficient), printed to 4 decimals
EFFECTS = {
    "X1": 3.1025, "X2": -0.8675, "X2:X3": 0.2975, "X1:X3": 0.2475,
    "X3": 0.2125, "X1:X2:X3": 0.1425, "X1:X2": 0.1275,
}


def test_full_model_coefficients(eddy):
    result = fit(eddy, "Y", "X1*X2*X3", factors=CODED)
    estimates = result.coefficients["estimate"]
    for term, value in FULL_COEFFICIENTS.items():
        assert estimates[term] == pytest.approx(value, abs=5e-6), term  # e-Handbook 5.6.1


def test_all_seven_effects(eddy):
    result = fit(eddy, "Y", "X1*X2*X3", factors=CODED)
    for term, value in EFFECTS.items():
        assert 2 * result.coefficients.loc[term, "estimate"] == pytest.approx(value, abs=5e-5), term  # e-Handbook 5.6.1


def test_saturated_fit_reports_no_standard_errors(eddy):
    # 8 runs, 8 terms: no residual degrees of freedom (common practice: SE is not available).
    result = fit(eddy, "Y", "X1*X2*X3", factors=CODED)
    assert result.df_resid == 0
    assert result.coefficients["std_error"].isna().all()


def test_reduced_model_x1_x2(eddy):
    result = fit(eddy, "Y", "X1 + X2", factors=CODED)
    coef = result.coefficients
    # e-Handbook 5.6.1 reduced model: Y = 2.6587 + 1.5512 X1 - 0.4337 X2 (printed to 4 decimals)
    assert coef.loc["Intercept", "estimate"] == pytest.approx(2.6587, abs=1e-4)
    assert coef.loc["X1", "estimate"] == pytest.approx(1.5512, abs=1e-4)
    assert coef.loc["X2", "estimate"] == pytest.approx(-0.4337, abs=1e-4)
    # e-Handbook 5.6.1: coefficient SE 0.1076 for every term
    assert coef["std_error"].to_numpy() == pytest.approx([0.1076] * 3, abs=5e-5)
    # e-Handbook 5.6.1: t values 24.714, 14.419, -4.032
    assert coef["t"].to_numpy() == pytest.approx([24.714, 14.419, -4.032], abs=5e-3)
    assert result.s == pytest.approx(0.3043, abs=5e-5)  # e-Handbook 5.6.1 residual SD
    assert result.df_resid == 5  # e-Handbook 5.6.1 residual df
    assert result.r_squared == pytest.approx(0.9782, abs=5e-5)  # e-Handbook 5.6.1
    assert result.r_squared_adj == pytest.approx(0.9695, abs=5e-5)  # e-Handbook 5.6.1


def test_reduced_model_fitted_values_and_prediction(eddy):
    result = fit(eddy, "Y", "X1 + X2", factors=CODED)
    # e-Handbook 5.6.1 fitted values, printed to 5 decimals
    published = [1.54125, 4.64375, 0.67375, 3.77625, 1.54125, 4.64375, 0.67375, 3.77625]
    assert result.fitted.to_numpy() == pytest.approx(published, abs=5e-6)
    assert list(result.fitted.index) == list(range(1, 9))  # named by run id (the data has no run column)
    prediction = result.predict({"X1": -1, "X2": -1, "X3": 0})
    assert prediction["mean"].iloc[0] == pytest.approx(1.54125, abs=5e-6)  # e-Handbook 5.6.1


def test_natural_units_coding_gives_the_same_effects(eddy):
    # Re-express the coded factors in natural units; coded coefficients must not change (common practice).
    natural = eddy.assign(X1=eddy.X1 * 10 + 100, X2=eddy.X2 * 0.5 + 3)
    factors = [Factor("X1", 90, 110), Factor("X2", 2.5, 3.5), Factor("X3", -1, 1)]
    result = fit(natural, "Y", "X1 + X2", factors=factors)
    assert result.coefficients.loc["X1", "estimate"] == pytest.approx(1.55125, abs=1e-9)  # e-Handbook 5.6.1
