"""Split-plot analysis by REML (issue 13): Yates' oats, statsmodels MixedLM / GLS as references, REML = ANOVA."""

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats

import levelwise as lw
from levelwise import LevelwiseError

DATA = Path(__file__).parent / "data" / "splitplot"


@pytest.fixture(scope="module")
def oats():
    d = pd.read_csv(DATA / "oats.csv")
    d["plot"] = d["block"] + ":" + d["variety"]
    d["nitrogen"] = d["nitrogen"].astype(str)
    return d


@pytest.fixture(scope="module")
def oats_fixed_blocks(oats):
    return lw.fit(oats, "yield", "block + variety*nitrogen", whole_plot="plot")


# -- Yates' oats (tests/data/splitplot/README.md: Venables & Ripley, MASS 4th ed.; Pinheiro & Bates) -------------
def test_oats_strata_degrees_of_freedom(oats_fixed_blocks):
    f = oats_fixed_blocks
    assert f.df_whole_plot == 10  # whole-plot residual on 10 df (Venables & Ripley, from memory via README)
    assert f.df_residual == 45  # sub-plot residual on 45 df (same source)
    assert "between-within" in f.denominator_rule


def test_oats_variety_and_nitrogen_f(oats_fixed_blocks):
    a = oats_fixed_blocks.anova
    assert a.loc["variety", "F"] == pytest.approx(1.485, abs=5e-4)  # F(2, 10) = 1.485 (Venables & Ripley)
    assert (a.loc["variety", "df"], a.loc["variety", "df_denominator"]) == (2, 10)
    assert a.loc["variety", "stratum"] == "whole-plot"
    assert a.loc["nitrogen", "F"] == pytest.approx(37.69, abs=5e-3)  # F = 37.69 (Venables & Ripley)
    assert (a.loc["nitrogen", "df"], a.loc["nitrogen", "df_denominator"]) == (3, 45)
    assert a.loc["variety:nitrogen", "stratum"] == "sub-plot"


def test_oats_variance_components_and_stratum_mean_squares(oats_fixed_blocks):
    vc = oats_fixed_blocks.variance_components
    assert vc["whole_plot"] == pytest.approx(106.06, abs=5e-3)  # Pinheiro & Bates oats (README)
    assert vc["residual"] == pytest.approx(177.08, abs=5e-3)  # sub-plot residual MS 177.08 (Venables & Ripley)
    # Whole-plot residual MS = sigma2_e + 4 sigma2_wp = 601.33 (Venables & Ripley; 4 sub-plots per whole plot).
    assert vc["residual"] + 4 * vc["whole_plot"] == pytest.approx(601.33, abs=5e-3)
    assert oats_fixed_blocks.zero_components == []


def test_oats_random_blocks(oats):
    f = lw.fit(oats, "yield", "variety*nitrogen", whole_plot="plot", random_block="block")
    vc = f.variance_components
    assert vc["block"] == pytest.approx(214.48, abs=5e-3)  # Pinheiro & Bates oats (README)
    assert vc["whole_plot"] == pytest.approx(106.06, abs=5e-3)
    assert vc["residual"] == pytest.approx(177.08, abs=5e-3)
    assert f.anova.loc["variety", "F"] == pytest.approx(1.485, abs=5e-4)
    assert f.df_whole_plot == 10 and f.df_residual == 45


# -- generated split-plot data ------------------------------------------------------------------------------
def _split_plot_data(seed, sd_wp=1.5, sd_e=1.0, replicates=3, drop=()):
    factors = [lw.Factor("Oven", 160, 200, hard_to_change=True), lw.Factor("Dwell", 5, 15),
               lw.Factor("Film", 40, 80)]
    design = lw.full_factorial(factors, replicates=replicates, seed=seed)
    t = design.table.copy()
    rng = np.random.default_rng(seed)
    a = (t["Oven"] - 180) / 20
    b = (t["Dwell"] - 10) / 5
    c = (t["Film"] - 60) / 20
    wp_effect = rng.normal(0, sd_wp, t["whole_plot"].max() + 1)[t["whole_plot"]]
    t["y"] = 50 + 3 * a + 2 * b - 1.0 * c + 0.8 * a * b + wp_effect + rng.normal(0, sd_e, len(t))
    t["a"], t["b"], t["c"] = a, b, c
    for i in drop:
        t.loc[i, "y"] = np.nan
    return factors, t


MODEL = "Oven + Dwell + Film + Oven:Dwell + Oven:Film"
REF_FORMULA = "y ~ a + b + c + a:b + a:c"
TERMS = {"Intercept": "Intercept", "Oven": "a", "Dwell": "b", "Film": "c", "Oven:Dwell": "a:b", "Oven:Film": "a:c"}


@pytest.mark.parametrize("seed,drop", [(1, ()), (7, (0, 5, 17)), (12, (3,))])
def test_against_statsmodels_mixedlm_and_gls(seed, drop):
    factors, t = _split_plot_data(seed, replicates=4, drop=drop)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    data = t.dropna(subset=["y"])
    ref = smf.mixedlm(REF_FORMULA, data, groups=data["whole_plot"]).fit(reml=True)  # statsmodels MixedLM (REML)
    assert f.variance_components["whole_plot"] == pytest.approx(float(ref.cov_re.iloc[0, 0]), rel=1e-4)
    assert f.variance_components["residual"] == pytest.approx(float(ref.scale), rel=1e-4)
    est = f.coefficients["estimate"]
    for ours, theirs in TERMS.items():
        assert est[ours] == pytest.approx(ref.fe_params[theirs], rel=1e-4, abs=1e-6)
    # GLS standard errors at the REML components: statsmodels GLS with the covariance built from MixedLM's values.
    same = (data["whole_plot"].to_numpy()[:, None] == data["whole_plot"].to_numpy()[None, :]).astype(float)
    V = ref.scale * np.eye(len(data)) + float(ref.cov_re.iloc[0, 0]) * same
    gls = smf.gls(REF_FORMULA, data, sigma=V).fit()
    se = f.coefficients["std_error"]
    for ours, theirs in TERMS.items():
        assert se[ours] == pytest.approx(gls.bse[theirs], rel=1e-4)
    # Whole-plot effects (BLUPs) against statsmodels' predicted random effects.
    blups = {k: float(v.iloc[0]) for k, v in ref.random_effects.items()}
    for label, value in f.whole_plot_effects.items():
        assert value == pytest.approx(blups[label], rel=1e-3, abs=1e-4)
    # Prediction at a new setting: GLS mean and standard error; PI adds both components; t on the whole-plot df.
    new = pd.DataFrame({"a": [0.5], "b": [-0.2], "c": [1.0]})
    pred = gls.get_prediction(new).summary_frame(alpha=0.05)
    ours = f.predict({"Oven": 190.0, "Dwell": 9.0, "Film": 80.0})
    assert ours["mean"][0] == pytest.approx(pred["mean"][0], rel=1e-4)
    assert ours["se_mean"][0] == pytest.approx(pred["mean_se"][0], rel=1e-4)
    q = stats.t.ppf(0.975, f.df_whole_plot)
    total = pred["mean_se"][0] ** 2 + float(ref.cov_re.iloc[0, 0]) + ref.scale
    assert ours["pi_high"][0] - ours["mean"][0] == pytest.approx(q * np.sqrt(total), rel=1e-4)
    assert ours["ci_high"][0] - ours["mean"][0] == pytest.approx(q * pred["mean_se"][0], rel=1e-4)
    # 2 oven settings x 4 replicates = 8 whole plots; rank [1, Oven] = 2 -> 6 whole-plot df.
    assert data["whole_plot"].nunique() == 8 and f.df_whole_plot == 6
    assert f.df_residual == len(data) - 8 - 4  # Dwell, Film, Oven:Dwell, Oven:Film within whole plots


def test_balanced_reml_equals_anova_method_of_moments():
    """Balanced 2^3 split-plot, Oven hard to change, 3 replicates: REML = the stratum ANOVA estimates."""
    factors, t = _split_plot_data(3, sd_wp=2.0, replicates=3)
    y, a, b, c = (t[k].to_numpy() for k in ("y", "a", "b", "c"))
    wp = t["whole_plot"].to_numpy()
    n, per = len(y), 4
    # Classical split-plot ANOVA by hand (common practice): whole-plot stratum on whole-plot means.
    means = pd.Series(y).groupby(wp).mean()
    oven_of = pd.Series(a).groupby(wp).first()
    level_means = means.groupby(oven_of).transform("mean")
    ss_wp_error = per * ((means - level_means) ** 2).sum()
    df_wp_error = len(means) - 2
    ms_wp = ss_wp_error / df_wp_error
    ss_between = per * ((means - y.mean()) ** 2).sum()
    sub_columns = [b, c, a * b, a * c, b * c, a * b * c]
    ss_sub_terms = sum(n * (y @ x / n) ** 2 for x in sub_columns)  # orthogonal +-1 columns
    ss_total = ((y - y.mean()) ** 2).sum()
    df_e = n - len(means) - len(sub_columns)
    ms_e = (ss_total - ss_between - ss_sub_terms) / df_e
    assert ms_wp > ms_e  # the method-of-moments whole-plot component is positive for this seed
    f = lw.fit(t, "y", "Oven*Dwell*Film", factors=factors, whole_plot="whole_plot")
    assert f.df_whole_plot == df_wp_error and f.df_residual == df_e
    # levelwise starts REML at the moment estimates, so the optimiser's gradient test confirms them; statsmodels
    # MixedLM from its own default start (ratio 1) reaches them to its tolerance (about 2e-5 relative here).
    ref = smf.mixedlm("y ~ a * b * c", t, groups=t["whole_plot"]).fit(reml=True)
    assert float(ref.scale) == pytest.approx(ms_e, rel=1e-4)
    assert float(ref.cov_re.iloc[0, 0]) == pytest.approx((ms_wp - ms_e) / per, rel=1e-4)
    assert f.variance_components["residual"] == pytest.approx(ms_e, rel=1e-6)
    assert f.variance_components["whole_plot"] == pytest.approx((ms_wp - ms_e) / per, rel=1e-6)
    ms_oven = n * (y @ a / n) ** 2
    ms_dwell = n * (y @ b / n) ** 2
    assert f.anova.loc["Oven", "F"] == pytest.approx(ms_oven / ms_wp, rel=1e-4)
    assert f.anova.loc["Dwell", "F"] == pytest.approx(ms_dwell / ms_e, rel=1e-4)
    # Balanced: GLS = OLS estimates.
    ols = lw.least_squares(t, "y", "Oven*Dwell*Film", factors=factors)
    np.testing.assert_allclose(f.coefficients["estimate"], ols.coefficients["estimate"], rtol=1e-9, atol=1e-12)


def test_zero_whole_plot_component_is_reported_and_fit_works():
    # No whole-plot noise; this seed gives a whole-plot MS below the residual MS, so REML sits at zero.
    for seed in range(40):
        factors, t = _split_plot_data(seed, sd_wp=0.0, replicates=3)
        f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
        if f.zero_components:
            break
    assert f.zero_components == ["whole_plot"]
    assert "estimated at zero" in f.notes[0]
    ols = lw.least_squares(t, "y", MODEL, factors=factors)
    # At sigma2_wp = 0 the model is the least-squares one: REML residual = s^2 and the same SEs.
    assert f.variance_components["residual"] == pytest.approx(ols.s ** 2, rel=1e-4)
    np.testing.assert_allclose(f.coefficients["std_error"], ols.coefficients["std_error"], rtol=1e-4)
    p = f.predict({"Oven": 170.0, "Dwell": 12.0, "Film": 50.0})
    assert np.isfinite(p[["mean", "ci_low", "pi_high"]].to_numpy()).all()


def test_residuals_by_whole_plot_and_run_ids():
    factors, t = _split_plot_data(5, replicates=3)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    d = f.diagnostics
    assert list(d.index) == list(f.runs) == list(t["run"])  # run ids (the design's run column)
    np.testing.assert_allclose(d["residual"], t.set_index("run")["y"] - d["fitted"], atol=1e-10)
    np.testing.assert_allclose(d["conditional_residual"], d["residual"] - d["whole_plot_effect"], atol=1e-12)
    by = f.residuals_by_whole_plot
    assert by["runs"].sum() == len(t) and len(by) == t["whole_plot"].nunique()


def test_warning_when_whole_plots_are_ignored():
    factors, t = _split_plot_data(2, replicates=3)
    with pytest.warns(lw.LevelwiseWarning, match="whole_plot='whole_plot'") as record:
        lw.fit(t.drop(columns=["a", "b", "c"]), "y", MODEL, factors=factors)
    text = str(record[0].message)
    mixed = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    ratio = mixed.ignoring_whole_plots.loc["Oven", "ratio"]
    assert f"Oven: {mixed.coefficients.loc['Oven', 'std_error']:.4g} with whole plots" in text
    assert f"(x{ratio:.2f})" in text
    # Ignoring whole plots understates the hard-to-change factor's SE here.
    assert ratio < 1
    # No warning without a whole-plot column.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lw.fit(t.drop(columns=["whole_plot"]), "y", MODEL, factors=factors)


def test_bad_whole_plot_input():
    with pytest.warns(lw.LevelwiseWarning, match="only 2 whole plots"):
        factors, t = _split_plot_data(2, replicates=1)
    with pytest.raises(LevelwiseError, match="'whole_plot' parameter must name a column"):
        lw.fit(t, "y", MODEL, factors=factors, whole_plot="nope")
    with pytest.raises(LevelwiseError, match="whole-plot stratum"):
        lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")  # 2 whole plots, Oven uses both
    t2 = t.copy()
    t2["whole_plot"] = t2["whole_plot"].astype(float)
    t2.loc[3, "whole_plot"] = np.nan
    with pytest.raises(LevelwiseError, match="empty in row 4"):
        lw.fit(t2, "y", MODEL, factors=factors, whole_plot="whole_plot")


def test_statsmodels_mixedlm_balanced_bse_matches():
    """In a balanced split-plot, MixedLM's own standard errors equal the GLS ones (statsmodels reference)."""
    factors, t = _split_plot_data(9, replicates=3)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    ref = sm.MixedLM.from_formula(REF_FORMULA, t, groups=t["whole_plot"]).fit(reml=True)
    for ours, theirs in TERMS.items():
        assert f.coefficients.loc[ours, "std_error"] == pytest.approx(ref.bse_fe[theirs], rel=1e-4)


def test_refresh_point_traces_and_slice_agree_with_predict():
    factors, t = _split_plot_data(4, replicates=3)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    settings = {"Oven": 172.0, "Dwell": 7.5, "Film": 66.0}
    out = f.refresh(settings, points=7, slice_axes=("Oven", "Film"), shape=(5, 4))
    row = f.predict(settings).iloc[0]
    for key in ("mean", "ci_low", "ci_high", "pi_low", "pi_high"):
        assert out["point"][key] == pytest.approx(row[key], rel=1e-12)
    trace = out["traces"]["Dwell"]
    grid = pd.DataFrame({"Oven": 172.0, "Dwell": np.linspace(5, 15, 7), "Film": 66.0})
    expected = f.predict(grid)
    np.testing.assert_allclose(trace["x"], grid["Dwell"])
    np.testing.assert_allclose(trace["mean"] + trace["pi_half"], expected["pi_high"], rtol=1e-12)
    s = out["slice"]
    assert s["mean"].shape == (4, 5)
    corner = f.predict({"Oven": 200.0, "Dwell": 7.5, "Film": 80.0}).iloc[0]
    assert s["mean"][-1, -1] + s["ci_half"][-1, -1] == pytest.approx(corner["ci_high"], rel=1e-12)
    with pytest.raises(LevelwiseError, match="Film"):
        f.refresh({"Oven": 170.0, "Dwell": 7.5})


def test_optimize_uses_the_split_plot_intervals():
    factors, t = _split_plot_data(6, replicates=3)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    best = lw.optimize({"y": f}, {"y": lw.maximize(45.0, 60.0)}, seed=2)
    row = f.predict(best.settings).iloc[0]
    for key in ("mean", "ci_low", "pi_high"):
        assert best.predictions.loc["y", key] == pytest.approx(row[key], rel=1e-12)
    # The whole-plot variance widens the PI beyond the least-squares one at the same setting.
    ols = lw.least_squares(t, "y", MODEL, factors=factors).predict(best.settings).iloc[0]
    assert row["pi_high"] - row["mean"] > ols["pi_high"] - ols["mean"]


def test_exclude_refits_the_split_plot_model():
    factors, t = _split_plot_data(8, replicates=3)
    f = lw.fit(t, "y", MODEL, factors=factors, whole_plot="whole_plot")
    run = f.runs[2]
    g = f.exclude(run, "oven alarm")
    direct = lw.fit(t.drop(index=t.index[2]), "y", MODEL, factors=factors, whole_plot="whole_plot")
    np.testing.assert_allclose(g.coefficients["estimate"], direct.coefficients["estimate"], rtol=1e-10)
    assert g.exclusions == ((run, "oven alarm"),) and g.n == f.n - 1


def test_reduce_by_stratum_tests_refits_by_reml():
    factors, t = _split_plot_data(10, replicates=4)
    f = lw.fit(t, "y", "Oven * Dwell * Film", factors=factors, whole_plot="whole_plot")
    final, steps = lw.reduce(f, alpha=0.05)
    assert len(steps) >= 1 and (steps["p_value"] > 0.05).all()
    assert isinstance(final, lw.MixedFit)
    kept = list(final.anova.index)
    for term in kept:  # hierarchy
        for part in term.split(":"):
            assert part in kept
    # The final fit is the REML fit of the remaining terms (statsmodels MixedLM reference on coded columns).
    formula = "y ~ " + " + ".join(term.replace("Oven", "a").replace("Dwell", "b").replace("Film", "c")
                                  for term in kept)
    ref = smf.mixedlm(formula, t, groups=t["whole_plot"]).fit(reml=True)
    assert final.variance_components["residual"] == pytest.approx(float(ref.scale), rel=1e-4)
    assert final.coefficients.loc["Oven", "estimate"] == pytest.approx(ref.fe_params["a"], rel=1e-4)
