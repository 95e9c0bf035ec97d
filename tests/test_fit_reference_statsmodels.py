"""levelwise.fit diagnostics, ANOVA, lack of fit and exclusions against statsmodels (a reference library).

Every expected value comes from statsmodels 0.15 (OLS, OLSInfluence, anova_lm, get_prediction), except the
lack-of-fit F, which is computed here by hand from the replicate groups (textbook formula, common practice):
SS_pe = sum over groups of sum (y - group mean)^2 with n - g df; SS_lof = SSE - SS_pe with g - p df.
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor

from levelwise import Factor, LevelwiseError, fit, full_factorial

FACTORS = [Factor("A", 10, 30, "°C"), Factor("B", 0.5, 2.5, "bar"), Factor("C", 100, 300, "rpm")]
TERMS = ["A", "B", "C", "A:B", "A:C", "B:C"]
TOL = dict(rel=1e-9, abs=1e-9)


def make_data(seed: int, replicates: int, jitter: bool) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    data = full_factorial(FACTORS, center_points=3, replicates=replicates, seed=seed).table.copy()
    if jitter:  # non-orthogonal settings, so no check leans on balance
        for f in FACTORS:
            data[f.name] += rng.normal(0, 0.05 * f.half_range, len(data))
    data["y"] = rng.normal(size=len(data)) + 0.1 * data["A"] - data["B"] * data["C"] / 100
    return data


def coded_frame(data):
    return pd.DataFrame({f.name.lower(): (data[f.name] - f.center) / f.half_range for f in FACTORS} | {"y": data["y"]})


def reference(data):
    """statsmodels OLS on the coded model matrix, in our term order."""
    frame = coded_frame(data)
    columns = [np.ones(len(data))] + [np.prod([frame[n.lower()] for n in t.split(":")], axis=0) for t in TERMS]
    return sm.OLS(frame["y"].to_numpy(), np.column_stack(columns)).fit()


@pytest.fixture(scope="module", params=[(11, 1, True), (12, 2, True), (13, 2, False), (14, 3, False)])
def case(request):
    data = make_data(*request.param)
    return data, fit(data, "y", "(A+B+C)**2", factors=FACTORS), reference(data)


def test_influence_statistics(case):
    _, ours, ref = case
    infl = OLSInfluence(ref)  # statsmodels reference (it refits n times for the external ones)
    d = ours.diagnostics
    assert d["fitted"].to_numpy() == pytest.approx(ref.fittedvalues, **TOL)  # statsmodels fittedvalues
    assert d["residual"].to_numpy() == pytest.approx(ref.resid, **TOL)  # statsmodels resid
    assert d["leverage"].to_numpy() == pytest.approx(infl.hat_matrix_diag, **TOL)  # statsmodels hat_matrix_diag
    assert d["studentized"].to_numpy() == pytest.approx(infl.resid_studentized_internal, **TOL)  # statsmodels
    assert d["studentized_external"].to_numpy() == pytest.approx(infl.resid_studentized_external, **TOL)  # statsmodels
    assert d["cooks_distance"].to_numpy() == pytest.approx(infl.cooks_distance[0], **TOL)  # statsmodels
    assert d["dffits"].to_numpy() == pytest.approx(infl.dffits[0], **TOL)  # statsmodels dffits
    dfbetas = d[[f"dfbetas[{t}]" for t in ours.terms]].to_numpy()
    assert dfbetas == pytest.approx(infl.dfbetas, **TOL)  # statsmodels dfbetas


def test_bonferroni_outlier_test(case):
    _, ours, ref = case
    table = np.asarray(ref.outlier_test(method="bonferroni"))  # statsmodels outlier_test: t, p, bonf(p)
    assert ours.diagnostics["studentized_external"].to_numpy() == pytest.approx(table[:, 0], **TOL)
    assert ours.diagnostics["outlier_p"].to_numpy() == pytest.approx(table[:, 2], **TOL)
    assert (ours.diagnostics["outlier"].to_numpy() == (table[:, 2] < 0.05)).all()


def test_normal_plot_coordinates_are_blom_positions(case):
    _, ours, _ = case
    d = ours.diagnostics.sort_values("studentized")
    n = len(d)
    # Blom (1958) plotting positions (i - 3/8) / (n + 1/4), from memory; quantiles from scipy.stats.norm
    expected = stats.norm.ppf((np.arange(1, n + 1) - 0.375) / (n + 0.25))
    assert d["normal_quantile"].to_numpy() == pytest.approx(expected, rel=1e-12)


def test_press_vif_and_model_f(case):
    _, ours, ref = case
    infl = OLSInfluence(ref)
    assert ours.press == pytest.approx(infl.ess_press, **TOL)  # statsmodels ess_press
    sst = np.sum((ref.model.endog - ref.model.endog.mean()) ** 2)
    assert ours.r_squared_pred == pytest.approx(1 - infl.ess_press / sst, **TOL)  # PRESS formula on statsmodels
    exog = ref.model.exog
    vifs = [variance_inflation_factor(exog, j) for j in range(1, exog.shape[1])]  # statsmodels VIF
    assert ours.coefficients["vif"].to_numpy()[1:] == pytest.approx(vifs, **TOL)
    assert ours.anova.loc["Model", "F"] == pytest.approx(ref.fvalue, **TOL)  # statsmodels fvalue
    assert ours.anova.loc["Model", "p_value"] == pytest.approx(ref.f_pvalue, rel=1e-9, abs=1e-15)  # statsmodels


def test_term_anova_matches_type_ii(case):
    data, ours, _ = case
    model = smf.ols("y ~ (a + b + c)**2", data=coded_frame(data)).fit()
    table = anova_lm(model, typ=2)  # statsmodels anova_lm type II (hierarchical partial SS)
    for term in TERMS:
        ref_row = table.loc[term.lower()]
        row = ours.anova.loc[term]
        assert row["sum_sq"] == pytest.approx(ref_row["sum_sq"], **TOL), term
        assert row["F"] == pytest.approx(ref_row["F"], **TOL), term
        assert row["p_value"] == pytest.approx(ref_row["PR(>F)"], rel=1e-9, abs=1e-15), term
    assert ours.anova.loc["Residual", "sum_sq"] == pytest.approx(table.loc["Residual", "sum_sq"], **TOL)


def test_lack_of_fit_by_hand():
    data = make_data(21, 2, jitter=False)
    ours = fit(data, "y", "A + B + C", factors=FACTORS)
    # By hand (common practice): replicate groups are identical settings.
    groups = data.groupby(["A", "B", "C"])["y"]
    ss_pe = float(((data["y"] - groups.transform("mean")) ** 2).sum())
    df_pe = len(data) - groups.ngroups
    sse = float(np.sum(ours.residuals**2))
    df_lof_total = groups.ngroups - 4
    # Centre points exist in a two-level design, so 1 df of the lack of fit is the curvature test.
    n_c = int((data["role"] == "centre").sum())
    y_c = data.loc[data["role"] == "centre", "y"].mean()
    y_f = data.loc[data["role"] != "centre", "y"].mean()
    n_f = len(data) - n_c
    ss_curv = n_f * n_c * (y_f - y_c) ** 2 / (n_f + n_c)  # curvature SS for a 2-level design with centre points
    ss_lof = sse - ss_pe - ss_curv
    f_lof = (ss_lof / (df_lof_total - 1)) / (ss_pe / df_pe)
    assert ours.anova.loc["Pure error", "df"] == df_pe
    assert ours.anova.loc["Pure error", "sum_sq"] == pytest.approx(ss_pe, rel=1e-10)
    assert ours.anova.loc["Lack of fit", "df"] == df_lof_total - 1
    assert ours.anova.loc["Lack of fit", "F"] == pytest.approx(f_lof, rel=1e-9)
    p_lof = stats.f.sf(f_lof, df_lof_total - 1, df_pe)  # scipy.stats F distribution
    assert ours.anova.loc["Lack of fit", "p_value"] == pytest.approx(p_lof, rel=1e-9)
    assert ours.anova.loc["Curvature", "sum_sq"] == pytest.approx(ss_curv, rel=1e-9)
    f_curv = ss_curv / (ss_pe / df_pe)
    assert ours.anova.loc["Curvature", "F"] == pytest.approx(f_curv, rel=1e-9)


def test_no_curvature_row_for_jittered_settings():
    data = make_data(22, 1, jitter=True)
    ours = fit(data, "y", "A + B + C", factors=FACTORS)
    # Jittered settings are neither corners nor centres, and no two runs share settings (common practice).
    assert "Curvature" not in ours.anova.index
    assert "Pure error" not in ours.anova.index


def test_exclusion_equals_refit_without_the_run(case):
    data, ours, _ = case
    run = ours.runs[3]  # the run id of the fourth row
    reduced = ours.exclude(run, "operator noted a blocked nozzle")
    ref = reference(data.drop(index=data.index[3]))  # statsmodels refit without the run
    assert reduced.beta == pytest.approx(ref.params, **TOL)
    assert reduced.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, **TOL)
    assert reduced.s == pytest.approx(np.sqrt(ref.scale), **TOL)
    infl = OLSInfluence(ref)
    assert reduced.diagnostics["leverage"].to_numpy() == pytest.approx(infl.hat_matrix_diag, **TOL)
    assert reduced.exclusions == ((run, "operator noted a blocked nozzle"),)
    assert run not in reduced.runs and ours.n == reduced.n + 1
    again = reduced.exclude(ours.runs[0], "second check").include(run).include(ours.runs[0])
    assert again.beta == pytest.approx(ours.beta, **TOL)  # back to the original fit
    assert list(again.runs) == list(ours.runs)
    points = pd.DataFrame({"A": [12.0, 25.0], "B": [1.0, 2.0], "C": [150.0, 280.0]})
    assert again.predict(points)["pi_high"].to_numpy() == pytest.approx(ours.predict(points)["pi_high"], **TOL)


def test_exclusion_of_a_leverage_one_run_is_refused():
    # One run alone at A = 30 in this data: its leverage under A + B is 1 (common practice: it alone fixes A's slope).
    data = pd.DataFrame({"A": [10.0, 10, 20, 20, 30], "B": [0.0, 1, 0, 1, 0.5], "y": [1.0, 2, 3, 4.2, 6]})
    ours = fit(data, "y", "A + B + I(A**2)")
    assert ours.leverage[4] == pytest.approx(1.0, abs=1e-12)  # h = 1 for the lone run (common practice)
    with pytest.raises(LevelwiseError, match="Run 5 cannot be excluded: its leverage is 1"):
        ours.exclude(5, "suspect")  # run id 5: the fifth row (the data has no run column)
    with pytest.raises(LevelwiseError, match="'reason' parameter of exclude must be a non-empty text"):
        ours.exclude(1, "  ")
    with pytest.raises(LevelwiseError, match="'run' parameter of exclude must be a run id of this fit"):
        ours.exclude(99, "no such run")


def test_prediction_intervals_and_extrapolation(case):
    data, ours, ref = case
    rng = np.random.default_rng(5)
    points = pd.DataFrame({f.name: rng.uniform(f.low, f.high, 10) for f in FACTORS})
    frame = coded_frame(points.assign(y=0.0))
    exog = np.column_stack([np.ones(10)] + [np.prod([frame[n.lower()] for n in t.split(":")], axis=0) for t in TERMS])
    pred = ref.get_prediction(exog).summary_frame(alpha=0.10)  # statsmodels get_prediction, 90%
    got = ours.predict(points, level=0.90)
    for mine, theirs in [("mean", "mean"), ("ci_low", "mean_ci_lower"), ("ci_high", "mean_ci_upper"),
                         ("pi_low", "obs_ci_lower"), ("pi_high", "obs_ci_upper")]:
        assert got[mine].to_numpy() == pytest.approx(pred[theirs].to_numpy(), **TOL), mine
    outside = ours.predict({"A": 40.0, "B": 1.0, "C": 200.0})
    assert bool(outside["extrapolated"].iloc[0])  # A = 40 is beyond the high setting 30
    centre = ours.predict({"A": 20.0, "B": 1.5, "C": 200.0})
    assert not bool(centre["extrapolated"].iloc[0])  # the centre point of the design


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), drops=st.lists(st.integers(0, 19), min_size=1, max_size=4, unique=True))
def test_exclusions_equal_a_fresh_fit_property(seed, drops):
    rng = np.random.default_rng(seed)
    data = pd.DataFrame(rng.uniform(-1, 1, (20, 3)), columns=["A", "B", "C"])
    data["y"] = rng.normal(size=20)
    current = fit(data, "y", "(A+B+C)**2")
    for row in drops:
        current = current.exclude(row + 1, "property check")  # run ids are 1..n (no run column)
    ref = sm.OLS(data["y"].drop(index=drops).to_numpy(), current.X).fit()  # statsmodels refit on the kept runs
    fresh = fit(data.drop(index=drops), "y", "(A+B+C)**2", factors=[
        Factor(n, data[n].min(), data[n].max()) for n in "ABC"])  # same coding as the first fit
    assert current.beta == pytest.approx(ref.params, rel=1e-8, abs=1e-10)
    assert current.beta == pytest.approx(fresh.beta, rel=1e-8, abs=1e-10)
    assert current.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, rel=1e-8)
    assert list(current.runs) == [r + 1 for r in range(20) if r not in drops]
