"""Binomial and Poisson fits (issue 15) against statsmodels GLM, a published example and bad counts."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats

import levelwise as lw
from levelwise import LevelwiseError

FACTORS = [lw.Factor("Oven", 160, 200), lw.Factor("Dwell", 5, 15), lw.Factor("Metal", levels=["steel", "brass"])]
MODEL = "Oven + Dwell + Metal + Oven:Dwell"
REF = "{y} ~ a + b + m + a:b"  # statsmodels formula on coded columns computed here
TERMS = {"Intercept": "Intercept", "Oven": "a", "Dwell": "b", "Metal[brass]": "m", "Oven:Dwell": "a:b"}
RTOL = 1e-8


def _data(seed, replicates=2, overdispersed=False):
    design = lw.full_factorial(FACTORS, replicates=replicates, center_points=0, seed=seed)
    t = design.table.copy()
    rng = np.random.default_rng(seed)
    t["a"] = (t["Oven"] - 180) / 20
    t["b"] = (t["Dwell"] - 10) / 5
    t["m"] = np.where(t["Metal"] == "brass", 1.0, -1.0)  # sum-to-zero: first level -1
    eta = 0.7 + 0.9 * t["a"] - 0.4 * t["b"] + 0.2 * t["m"] + 0.3 * t["a"] * t["b"]
    p = 1 / (1 + np.exp(-eta))
    if overdispersed:
        p = rng.beta(p * 3, (1 - p) * 3)
    t["tested"] = rng.integers(15, 30, len(t))
    t["passed"] = rng.binomial(t["tested"], p)
    t["area"] = rng.uniform(0.5, 2.5, len(t))
    t["defects"] = rng.poisson(t["area"] * np.exp(eta))
    t["failed"] = t["tested"] - t["passed"]
    return t


def _close(ours, theirs, rtol=RTOL, atol=1e-12):
    np.testing.assert_allclose(np.asarray(ours, dtype=float), np.asarray(theirs, dtype=float), rtol=rtol, atol=atol)


@pytest.mark.parametrize("link", ["logit", "probit"])
@pytest.mark.parametrize("seed", [1, 2])
def test_binomial_against_statsmodels_glm(seed, link):
    t = _data(seed)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested", link=link)
    fam = sm.families.Binomial(link=sm.families.links.Logit() if link == "logit" else sm.families.links.Probit())
    ref = smf.glm(REF.format(y="passed + failed"), t, family=fam).fit()  # statsmodels GLM, (successes, failures)
    names = list(TERMS)
    _close(f.coefficients.loc[names, "estimate"], ref.params[list(TERMS.values())])
    _close(f.coefficients.loc[names, "std_error"], ref.bse[list(TERMS.values())])
    _close(f.coefficients.loc[names, "ci_low"], ref.conf_int()[0][list(TERMS.values())])
    assert f.deviance == pytest.approx(ref.deviance, rel=RTOL)
    assert f.pearson_chi2 == pytest.approx(ref.pearson_chi2, rel=RTOL)
    # Pearson chi-square by its definition, sum (y - m p)^2 / (m p (1 - p)) (common practice), with the trials.
    p_hat, m = ref.fittedvalues.to_numpy(), t["tested"].to_numpy()
    assert f.pearson_chi2 == pytest.approx((((t["passed"] - m * p_hat) ** 2) / (m * p_hat * (1 - p_hat))).sum(),
                                           rel=1e-10)
    if link == "logit":
        _close(f.coefficients.loc[names, "odds_ratio"], np.exp(ref.params[list(TERMS.values())]))
    # Prediction: mean and CI on the probability scale (statsmodels: link-scale interval, transformed).
    new = pd.DataFrame({"Oven": [165.0, 180.0, 200.0], "Dwell": [6.0, 10.0, 15.0],
                        "Metal": ["steel", "brass", "steel"]})
    coded = pd.DataFrame({"a": (new["Oven"] - 180) / 20, "b": (new["Dwell"] - 10) / 5,
                          "m": np.where(new["Metal"] == "brass", 1.0, -1.0)})
    frame = ref.get_prediction(coded).summary_frame(alpha=0.05)
    ours = f.predict(new)
    _close(ours["mean"], frame["mean"])
    _close(ours["ci_low"], frame["mean_ci_lower"])
    _close(ours["ci_high"], frame["mean_ci_upper"])
    # Residuals and influence against statsmodels' GLM results and GLMInfluence (expected information, which
    # for the canonical logit link is also the observed one).
    infl = ref.get_influence(observed=False)
    d = f.diagnostics
    _close(d["deviance_residual"], ref.resid_deviance)
    _close(d["pearson_residual"], ref.resid_pearson)
    _close(d["leverage"], infl.hat_matrix_diag, rtol=1e-7)
    _close(d["cooks_distance"], infl.cooks_distance[0], rtol=1e-7)


def _lr_reference(t, formula_full, formula_reduced, family, **kw):
    full = smf.glm(formula_full, t, family=family, **kw).fit()
    reduced = smf.glm(formula_reduced, t, family=family, **kw).fit()
    return reduced.deviance - full.deviance


def test_likelihood_ratio_terms_follow_the_hierarchy_rule():
    t = _data(3)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    fam = sm.families.Binomial()
    y = "passed + failed ~ "
    # Oven is tested after Dwell and Metal but without Oven:Dwell, which contains it (statsmodels deviances).
    assert f.anova.loc["Oven", "lr_chi2"] == pytest.approx(
        _lr_reference(t, y + "a + b + m", y + "b + m", fam), rel=RTOL)
    assert f.anova.loc["Metal", "lr_chi2"] == pytest.approx(
        _lr_reference(t, y + "a + b + m + a:b", y + "a + b + a:b", fam), rel=RTOL)
    assert f.anova.loc["Oven:Dwell", "lr_chi2"] == pytest.approx(
        _lr_reference(t, y + "a + b + m + a:b", y + "a + b + m", fam), rel=RTOL)
    assert f.anova.loc["Oven:Dwell", "df"] == 1


def test_poisson_with_exposure_against_statsmodels_glm():
    t = _data(4)
    f = lw.fit(t, "defects", MODEL, factors=FACTORS, family="poisson", exposure="area")
    ref = smf.glm(REF.format(y="defects"), t, family=sm.families.Poisson(), exposure=t["area"]).fit()
    names = list(TERMS)
    _close(f.coefficients.loc[names, "estimate"], ref.params[list(TERMS.values())])
    _close(f.coefficients.loc[names, "std_error"], ref.bse[list(TERMS.values())])
    _close(f.coefficients.loc[names, "rate_ratio"], np.exp(ref.params[list(TERMS.values())]))
    assert f.deviance == pytest.approx(ref.deviance, rel=RTOL)
    assert f.pearson_chi2 == pytest.approx(ref.pearson_chi2, rel=RTOL)
    new = pd.DataFrame({"Oven": [170.0, 190.0], "Dwell": [5.0, 12.0], "Metal": ["brass", "steel"]})
    coded = pd.DataFrame({"a": (new["Oven"] - 180) / 20, "b": (new["Dwell"] - 10) / 5,
                          "m": np.where(new["Metal"] == "brass", 1.0, -1.0)})
    frame = ref.get_prediction(coded, exposure=np.ones(2)).summary_frame(alpha=0.05)  # rate per unit exposure
    ours = f.predict(new, exposure=[2.0, 2.0])
    _close(ours["mean"], frame["mean"])
    _close(ours["ci_low"], frame["mean_ci_lower"])
    _close(ours["ci_high"], frame["mean_ci_upper"])
    _close(ours["expected_count"], 2.0 * frame["mean"])
    lr = _lr_reference(t, "defects ~ a + b + m + a:b", "defects ~ a + b + a:b", sm.families.Poisson(),
                       exposure=t["area"])
    assert f.anova.loc["Metal", "lr_chi2"] == pytest.approx(lr, rel=RTOL)
    infl = ref.get_influence()
    _close(f.diagnostics["leverage"], infl.hat_matrix_diag, rtol=1e-7)
    _close(f.diagnostics["cooks_distance"], infl.cooks_distance[0], rtol=1e-7)


def test_intervals_stay_in_range_on_a_dense_grid():
    t = _data(5)
    # A strong effect, so the link-scale intervals reach far into the tails inside the region.
    t["passed"] = np.where(t["a"] > 0, t["tested"] - 1 - (t["b"] > 0), 1 + (t["b"] > 0).astype(int))
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    g = lw.fit(_data(4), "defects", MODEL, factors=FACTORS, family="poisson", exposure="area")
    assert not f.notes and not g.notes  # no separation: every estimate finite
    oven, dwell = np.meshgrid(np.linspace(160, 200, 60), np.linspace(5, 15, 60))
    for metal in ("steel", "brass"):
        grid = pd.DataFrame({"Oven": oven.ravel(), "Dwell": dwell.ravel(), "Metal": metal})
        p = f.predict(grid)
        assert (p["ci_low"] > 0).all() and (p["ci_high"] < 1).all()
        assert (p["ci_low"] <= p["mean"]).all() and (p["mean"] <= p["ci_high"]).all()
        r = g.predict(grid)
        assert (r["ci_low"] > 0).all() and (r["ci_low"] <= r["mean"]).all()


def test_overdispersion_reported_and_quasi_scale():
    t = _data(6, replicates=3, overdispersed=True)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    assert f.dispersion > 1.5
    assert "overdispersion" in f.overdispersion and "fit.quasi()" in f.overdispersion
    q = f.quasi()
    plain = smf.glm(REF.format(y="passed + failed"), t, family=sm.families.Binomial()).fit()
    # statsmodels GLM with the scale fixed at its own Pearson chi-square / df.
    ref = smf.glm(REF.format(y="passed + failed"), t, family=sm.families.Binomial()).fit(
        scale=plain.pearson_chi2 / plain.df_resid)
    _close(q.coefficients.loc[list(TERMS), "std_error"], ref.bse[list(TERMS.values())])
    _close(q.coefficients["std_error"], f.coefficients["std_error"] * np.sqrt(f.dispersion))
    assert q.anova.loc["Oven", "F"] == pytest.approx(f.anova.loc["Oven", "lr_chi2"] / f.dispersion, rel=1e-10)
    calm = lw.fit(_data(1), "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    if calm.dispersion < 1.5:
        assert "No sign of overdispersion" in calm.overdispersion


def test_reduce_by_likelihood_ratio_keeps_hierarchy():
    t = _data(7, replicates=3)
    f = lw.fit(t, "passed", "Oven * Dwell * Metal", factors=FACTORS, family="binomial", trials="tested")
    final, steps = f.reduce(alpha=0.05)
    assert len(steps) >= 1 and (steps["p_value"] > 0.05).all()
    kept = [label for label, _ in final.groups]
    assert (final.anova.loc[[k for k in kept if not any(k != o and set(k.split(":")) < set(o.split(":"))
                                                         for o in kept)], "p_value"] <= 0.05).all()
    for term in kept:  # hierarchy: every factor of a kept interaction is kept
        for part in term.split(":"):
            assert part in kept
    assert final.deviance > f.deviance
    # lw.reduce dispatches to the likelihood-ratio elimination for a GLM fit.
    again = lw.reduce(f, alpha=0.05)
    assert again.fit.terms == final.terms and again.steps.equals(steps)
    # The first step's LR statistic is statsmodels' deviance difference for that term (hierarchy rule).
    first = steps.iloc[0]
    assert first["lr_chi2"] == pytest.approx(f.anova.loc[first["term"], "lr_chi2"], rel=1e-12)


def test_effects_at_the_centre():
    t = _data(8)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    ref = smf.glm(REF.format(y="passed + failed"), t, family=sm.families.Binomial()).fit()
    b = ref.params
    expit = lambda x: 1 / (1 + np.exp(-x))  # noqa: E731
    e = f.effects
    assert e.loc["Oven", "change"] == pytest.approx(expit(b["Intercept"] + b["a"]) - expit(b["Intercept"] - b["a"]),
                                                    rel=1e-8)
    assert e.loc["Oven", "link_effect"] == pytest.approx(2 * b["a"], rel=1e-8)
    assert e.loc["Oven", "at_centre"] == pytest.approx(expit(b["Intercept"]), rel=1e-8)


def test_bliss_beetle_mortality_published_logit():
    """Bliss (1935) beetle mortality, logit fit as published in Dobson & Barnett, *An Introduction to
    Generalized Linear Models* (data, coefficients -60.72 (SE 5.18) and 34.27 (SE 2.91), deviance 11.23
    on 6 df: from memory)."""
    d = pd.DataFrame({
        "dose": [1.6907, 1.7242, 1.7552, 1.7842, 1.8113, 1.8369, 1.8610, 1.8839],
        "beetles": [59, 60, 62, 56, 63, 59, 62, 60],
        "killed": [6, 13, 18, 28, 52, 53, 61, 60],
    })
    f = lw.fit(d, "killed", "dose", family="binomial", trials="beetles", coding="none")
    c = f.coefficients
    assert c.loc["Intercept", "estimate"] == pytest.approx(-60.72, abs=0.005)
    assert c.loc["dose", "estimate"] == pytest.approx(34.27, abs=0.005)
    assert c.loc["Intercept", "std_error"] == pytest.approx(5.18, abs=0.005)
    assert c.loc["dose", "std_error"] == pytest.approx(2.91, abs=0.005)
    assert f.deviance == pytest.approx(11.23, abs=0.005) and f.df_resid == 6


@pytest.mark.parametrize("column,value,message", [
    ("passed", -1, "Run 3: the response column 'passed' holds -1; counts cannot be negative"),
    ("passed", 2.5, "Run 3: the response column 'passed' holds 2.5; counts must be whole numbers"),
    ("passed", 99, "Run 3: 99 passes in column 'passed' is more than the"),
    ("tested", 0, "Run 3: the trials column 'tested' holds 0"),
    ("tested", 12.5, "Run 3: the trials column 'tested' holds 12.5"),
])
def test_bad_binomial_counts_name_run_and_column(column, value, message):
    t = _data(1)
    t["run"] = np.arange(1, len(t) + 1)
    t[column] = t[column].astype(float)
    t.loc[2, column] = value
    with pytest.raises(LevelwiseError, match=message.replace("(", r"\(").replace(")", r"\)")):
        lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")


def test_bad_poisson_input():
    t = _data(1)
    t["run"] = np.arange(101, 101 + len(t))
    t2 = t.copy()
    t2["area"] = t2["area"].astype(float)
    t2.loc[4, "area"] = 0.0
    with pytest.raises(LevelwiseError, match="Run 105: the exposure column 'area' must be positive"):
        lw.fit(t2, "defects", MODEL, factors=FACTORS, family="poisson", exposure="area")
    t3 = t.copy()
    t3["defects"] = t3["defects"].astype(object)
    t3.loc[0, "defects"] = "many"
    with pytest.raises(LevelwiseError, match="Run 101: the response column 'defects' must hold a whole number"):
        lw.fit(t3, "defects", MODEL, factors=FACTORS, family="poisson")
    with pytest.raises(LevelwiseError, match="'family' parameter must be one of"):
        lw.fit(t, "defects", MODEL, factors=FACTORS, family="gamma")
    with pytest.raises(LevelwiseError, match="'link' parameter for family 'poisson'"):
        lw.fit(t, "defects", MODEL, factors=FACTORS, family="poisson", link="logit")
    with pytest.raises(LevelwiseError, match="needs 'trials'"):
        lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial")


def test_separation_is_noted():
    t = _data(5)  # this seed has a corner with no defects at all, so the Poisson estimates run off
    g = lw.fit(t, "defects", MODEL, factors=FACTORS, family="poisson", exposure="area")
    assert "separation" in g.notes[0] and "Oven:Dwell" in g.notes[0]


def test_missing_response_leaves_the_fit_and_run_ids_are_kept():
    t = _data(2)
    t["passed"] = t["passed"].astype(float)
    t.loc[[1, 6], "passed"] = np.nan
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    assert f.n == len(t) - 2 and len(f.missing_runs) == 2
    assert len(f.diagnostics) == f.n and list(f.diagnostics.index) == list(f.runs)
    assert "No interval for one new count" in f.new_observation_note


def test_refresh_point_traces_and_slice_agree_with_predict():
    t = _data(2)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    settings = {"Oven": 185.0, "Dwell": 12.0, "Metal": "brass"}
    out = f.refresh(settings, points=9, slice_axes=("Oven", "Dwell"), shape=(3, 6))
    row = f.predict(settings).iloc[0]
    for key in ("mean", "ci_low", "ci_high"):
        assert out["point"][key] == pytest.approx(row[key], rel=1e-12)
    metal = out["traces"]["Metal"]
    assert list(metal["x"]) == ["steel", "brass"]
    expected = f.predict({"Oven": 185.0, "Dwell": 12.0, "Metal": ["steel", "brass"]})
    np.testing.assert_allclose(metal["ci_low"], expected["ci_low"], rtol=1e-12)
    oven = out["traces"]["Oven"]
    np.testing.assert_allclose(oven["mean"], f.predict(
        pd.DataFrame({"Oven": np.linspace(160, 200, 9), "Dwell": 12.0, "Metal": "brass"}))["mean"], rtol=1e-12)
    assert out["slice"]["mean"].shape == (6, 3)


def test_refresh_polynomial_path_for_continuous_factors():
    t = _data(3)
    f = lw.fit(t, "defects", "Oven * Dwell", factors=FACTORS[:2], family="poisson", exposure="area")
    out = f.refresh({"Oven": 170.0, "Dwell": 9.0}, points=11)
    row = f.predict({"Oven": 170.0, "Dwell": 9.0}).iloc[0]
    assert out["point"]["ci_low"] == pytest.approx(row["ci_low"], rel=1e-10)
    assert f.engine.plan is not None  # every factor continuous: the exact trace polynomials are used
    expected = f.predict(pd.DataFrame({"Oven": np.linspace(160, 200, 11), "Dwell": 9.0}))
    for key in ("mean", "ci_low", "ci_high"):
        np.testing.assert_allclose(out["traces"]["Oven"][key], expected[key], rtol=1e-10)


def test_desirability_goal_on_a_pass_rate():
    """A goal on a probability: pass rate at least 30 %, fully satisfying from 98 %."""
    t = _data(9, replicates=3)
    f = lw.fit(t, "passed", "Oven * Dwell", factors=FACTORS[:2], family="binomial", trials="tested")
    best = lw.optimize({"passed": f}, {"passed": lw.maximize(0.30, 0.98)}, seed=1)
    row = f.predict(best.settings).iloc[0]
    assert best.predictions.loc["passed", "mean"] == pytest.approx(row["mean"], rel=1e-12)
    assert 0 < best.predictions.loc["passed", "mean"] < 1
    # The optimum is the corner with the largest fitted pass rate among the region's corners and centre.
    corners = pd.DataFrame({"Oven": [160.0, 160.0, 200.0, 200.0, 180.0], "Dwell": [5.0, 15.0, 5.0, 15.0, 10.0]})
    assert row["mean"] >= f.predict(corners)["mean"].max() - 1e-9
    expected_d = min(1.0, max(0.0, (row["mean"] - 0.30) / (0.98 - 0.30)))
    assert best.desirability["passed"] == pytest.approx(expected_d, rel=1e-9)


def test_exclude_and_include_refit_by_run_id():
    t = _data(2)
    t["run"] = np.arange(1, len(t) + 1)
    f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
    run = f.runs[4]
    g = f.exclude(run, "label smudged")
    assert g.exclusions == ((run, "label smudged"),) and run not in list(g.runs) and g.missing_runs == ()
    # The same as fitting without that row (statsmodels GLM on the remaining runs).
    rest = t.drop(index=t.index[4])
    ref = smf.glm(REF.format(y="passed + failed"), rest, family=sm.families.Binomial()).fit()
    _close(g.coefficients.loc[list(TERMS), "estimate"], ref.params[list(TERMS.values())])
    back = g.include(run)
    _close(back.coefficients["estimate"], f.coefficients["estimate"])
    assert back.exclusions == ()
    with pytest.raises(LevelwiseError, match="non-empty text"):
        f.exclude(run, " ")


@pytest.mark.parametrize("family", ["binomial", "poisson"])
def test_standardized_residuals_and_residuals_of_any_rows(family):
    t = _data(11)
    if family == "binomial":
        f = lw.fit(t, "passed", MODEL, factors=FACTORS, family="binomial", trials="tested")
        ref = smf.glm(REF.format(y="passed + failed"), t, family=sm.families.Binomial()).fit()
    else:
        f = lw.fit(t, "defects", MODEL, factors=FACTORS, family="poisson", exposure="area")
        ref = smf.glm(REF.format(y="defects"), t, family=sm.families.Poisson(), exposure=t["area"]).fit()
    infl = ref.get_influence(observed=False)
    d = f.diagnostics
    # statsmodels GLMInfluence.resid_studentized: Pearson residual / sqrt(scale (1 - h)).
    _close(d["standardized_pearson"], infl.resid_studentized, rtol=1e-7)
    _close(d["standardized_deviance"], ref.resid_deviance / np.sqrt(1 - infl.hat_matrix_diag), rtol=1e-7)
    # Blom positions (i - 3/8) / (n + 1/4) of the standardized deviance residuals (common practice).
    order = np.argsort(d["standardized_deviance"].to_numpy())
    n = len(d)
    _close(d["normal_quantile"].to_numpy()[order], stats.norm.ppf((np.arange(1, n + 1) - 0.375) / (n + 0.25)))
    # residuals_of: the same residuals for rows given as data (e.g. excluded runs), from statsmodels' fit.
    rows = f.residuals_of(t)
    _close(rows["deviance_residual"], ref.resid_deviance)
    _close(rows["pearson_residual"], ref.resid_pearson)
    # statsmodels' fitted values: the probability (binomial), the expected count (Poisson: divided by the area).
    _close(rows["fitted_mean"], ref.fittedvalues if family == "binomial" else ref.fittedvalues / t["area"])
    with pytest.raises(LevelwiseError, match="need the column"):
        f.residuals_of(t.drop(columns=["tested" if family == "binomial" else "area"]))
