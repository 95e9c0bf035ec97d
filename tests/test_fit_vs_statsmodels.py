"""levelwise fits against statsmodels OLS (a general-purpose reference library) on random designs."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from levelwise import Factor, fit, full_factorial


@pytest.fixture(scope="module", params=[0, 1, 2])
def case(request):
    rng = np.random.default_rng(1000 + request.param)
    factors = [Factor("A", 10, 30, "°C"), Factor("B", 0.5, 2.5, "bar"), Factor("C", 100, 300, "rpm")]
    design = full_factorial(factors, center_points=3, replicates=1 + request.param, seed=request.param)
    data = design.table.copy()
    # Jitter the settings so the design is not orthogonal: the check must not lean on balance.
    for f in factors:
        data[f.name] += rng.normal(0, 0.05 * f.half_range, len(data))
    data["y"] = rng.normal(size=len(data)) + 0.1 * data["A"] - data["B"] * data["C"] / 100
    return factors, data


def reference(factors, data, terms):
    coded = {f.name: (data[f.name] - f.center) / f.half_range for f in factors}
    columns = [np.ones(len(data))] + [np.prod([coded[n] for n in term.split(":")], axis=0) for term in terms]
    return sm.OLS(data["y"].to_numpy(), np.column_stack(columns)).fit()


def test_coefficients_and_standard_errors(case):
    factors, data = case
    ours = fit(data, "y", "(A+B+C)**2", factors=factors)
    ref = reference(factors, data, ["A", "B", "C", "A:B", "A:C", "B:C"])  # statsmodels OLS
    assert ours.coefficients["estimate"].to_numpy() == pytest.approx(ref.params, rel=1e-10, abs=1e-12)
    assert ours.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, rel=1e-10)
    assert ours.coefficients["p_value"].to_numpy() == pytest.approx(ref.pvalues, rel=1e-8, abs=1e-14)
    assert ours.s == pytest.approx(np.sqrt(ref.scale), rel=1e-10)
    assert ours.r_squared == pytest.approx(ref.rsquared, rel=1e-10)
    assert ours.r_squared_adj == pytest.approx(ref.rsquared_adj, rel=1e-10)
    assert ours.df_resid == ref.df_resid


def test_prediction_intervals_match_get_prediction(case):
    factors, data = case
    ours = fit(data, "y", "(A+B+C)**2", factors=factors)
    ref = reference(factors, data, ["A", "B", "C", "A:B", "A:C", "B:C"])  # statsmodels OLS
    rng = np.random.default_rng(7)
    points = pd.DataFrame({f.name: rng.uniform(f.low, f.high, 25) for f in factors})
    coded = {f.name: (points[f.name] - f.center) / f.half_range for f in factors}
    terms = ["A", "B", "C", "A:B", "A:C", "B:C"]
    exog = np.column_stack([np.ones(25)] + [np.prod([coded[n] for n in t.split(":")], axis=0) for t in terms])
    frame = ref.get_prediction(exog).summary_frame(alpha=0.05)  # statsmodels get_prediction
    got = ours.predict(points)
    for ours_col, ref_col in [("mean", "mean"), ("ci_low", "mean_ci_lower"), ("ci_high", "mean_ci_upper"),
                              ("pi_low", "obs_ci_lower"), ("pi_high", "obs_ci_upper")]:
        assert got[ours_col].to_numpy() == pytest.approx(frame[ref_col].to_numpy(), rel=1e-10, abs=1e-10)


def test_trace_matches_point_predictions(case):
    factors, data = case
    ours = fit(data, "y", "(A+B+C)**2", factors=factors)
    settings = {"A": 15.0, "B": 2.0, "C": 250.0}
    trace = ours.trace("B", settings, points=7)
    points = pd.DataFrame({"A": 15.0, "B": trace["x"], "C": 250.0})
    direct = ours.predict(points)
    assert trace["mean"] == pytest.approx(direct["mean"].to_numpy(), rel=1e-12)
    assert trace["pi_half"] == pytest.approx((direct["pi_high"] - direct["mean"]).to_numpy(), rel=1e-12)


@pytest.mark.parametrize("model", ["full_second_order", "A + B + C", "A:B + C"])
def test_many_row_predictions_match_get_prediction(case, model):
    """Tables larger than one block (the many-settings path) agree with statsmodels row by row."""
    factors, data = case
    if model == "full_second_order":
        data = data.copy()  # a full second-order model needs more than two levels: add axial-like runs
        rng = np.random.default_rng(3)
        extra = pd.DataFrame({f.name: rng.uniform(f.low, f.high, 12) for f in factors})
        extra["y"] = rng.normal(size=12)
        extra["run"] = data["run"].max() + 1 + np.arange(12)
        data = pd.concat([data, extra], ignore_index=True)
    ours = fit(data, "y", model, factors=factors)
    names = [f.name for f in factors]
    terms = {"full_second_order": names + ["A:B", "A:C", "B:C"] + [f"{n}:{n}" for n in names],
             "A + B + C": names, "A:B + C": ["A:B", "C"]}[model]
    ref = reference(factors, data, terms)  # statsmodels OLS on the same coded columns
    rng = np.random.default_rng(11)
    m = 17_000  # more than one block of rows, the last one shorter
    points = pd.DataFrame({f.name: rng.uniform(f.low - 0.2 * f.half_range, f.high, m) for f in factors})
    coded = {f.name: (points[f.name] - f.center) / f.half_range for f in factors}
    exog = np.column_stack([np.ones(m)] + [np.prod([coded[n] for n in t.split(":")], axis=0) for t in terms])
    frame = ref.get_prediction(exog).summary_frame(alpha=0.05)  # statsmodels get_prediction
    got = ours.predict(points)
    for ours_col, ref_col in [("mean", "mean"), ("ci_low", "mean_ci_lower"), ("ci_high", "mean_ci_upper"),
                              ("pi_low", "obs_ci_lower"), ("pi_high", "obs_ci_upper")]:
        assert got[ours_col].to_numpy() == pytest.approx(frame[ref_col].to_numpy(), rel=1e-10, abs=1e-10)
