"""levelwise.fit: aliasing named, achieved settings, missing responses, saturated fits, categorical factors,
natural-unit coefficients and bad input. Each expected value names its source beside it."""

import itertools
import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf

from levelwise import Factor, LevelwiseError, LevelwiseWarning, fit, full_factorial

CODED5 = [Factor(name, -1, 1) for name in "ABCDE"]


def half_fraction_with_centres(centres=3, seed=0):
    """2^(5-1) with generator E = ABCD (resolution V, common practice), plus centre points."""
    corners = np.array(list(itertools.product((-1.0, 1.0), repeat=4)))
    runs = np.column_stack([corners, corners.prod(axis=1)])
    runs = np.vstack([runs, np.zeros((centres, 5))])
    data = pd.DataFrame(runs, columns=list("ABCDE"))
    rng = np.random.default_rng(seed)
    data["y"] = 10 + data.A - 0.5 * data.B * data.C + rng.normal(0, 0.1, len(data))
    return data


# ----- aliasing --------------------------------------------------------------------------------------------------
def test_full_quadratic_on_half_fraction_names_inestimable_squares():
    data = half_fraction_with_centres()
    # Common practice: on a two-level design with centre points all squared columns are equal (1 at corners,
    # 0 at centres), so only one pure quadratic is estimable; B^2..E^2 are each the same column as A^2.
    with pytest.raises(LevelwiseError) as info:
        fit(data, "y", "full_second_order", factors=CODED5)
    message = str(info.value)
    for term in ["B^2", "C^2", "D^2", "E^2"]:
        assert f"'{term}' = +1*A^2" in message
    assert "4 term(s) are aliased" in message
    with pytest.warns(LevelwiseWarning, match="They were dropped from the fit"):
        result = fit(data, "y", "full_second_order", factors=CODED5, on_rank_deficiency="warn")
    assert list(result.aliased) == ["B^2", "C^2", "D^2", "E^2"]
    assert set(result.aliased.values()) == {"+1*A^2"}
    # Resolution V (E = ABCD): every main effect and 2-factor interaction stays estimable (common practice).
    assert len(result.terms) == 1 + 5 + 10 + 1
    assert "B^2" not in result.coefficients.index
    assert np.isfinite(result.coefficients["std_error"]).all()


def test_no_minimum_norm_split_in_warn_mode():
    data = half_fraction_with_centres(seed=4)
    with pytest.warns(LevelwiseWarning):
        result = fit(data, "y", "full_second_order", factors=CODED5, on_rank_deficiency="warn")
    # The kept A^2 carries the whole curvature: equal to a fit with A^2 as the only square (statsmodels OLS).
    cols = [np.ones(len(data))] + [data[c] for c in "ABCDE"]
    cols += [data[a] * data[b] for a, b in itertools.combinations("ABCDE", 2)] + [data.A**2]
    ref = sm.OLS(data["y"].to_numpy(), np.column_stack(cols)).fit()
    assert result.beta == pytest.approx(ref.params, rel=1e-9, abs=1e-12)


def test_bad_on_rank_deficiency_value():
    with pytest.raises(LevelwiseError, match="'on_rank_deficiency' parameter must be 'raise' or 'warn'. Got 'drop'"):
        fit(half_fraction_with_centres(), "y", "main_effects", on_rank_deficiency="drop")


# ----- achieved settings -----------------------------------------------------------------------------------------
FACTORS3 = [Factor("A", 10, 30), Factor("B", 1, 2), Factor("C", 100, 200)]


def planned_design():
    data = full_factorial(FACTORS3, center_points=2, randomize=False).table.copy()
    rng = np.random.default_rng(8)
    data["y"] = 3 + 0.1 * data.A + data.B + rng.normal(0, 0.2, len(data))
    return data


def ols_on(settings, y, model_terms):
    coded = {f.name: (settings[f.name] - f.center) / f.half_range for f in FACTORS3}
    cols = [np.ones(len(settings))] + [np.prod([coded[n] for n in t.split(":")], axis=0) for t in model_terms]
    return sm.OLS(np.asarray(y), np.column_stack(cols)).fit()


def test_achieved_settings_change_the_fit_exactly_as_a_refit():
    data = planned_design()
    data["A (achieved)"] = data["A"]
    data["B (achieved)"] = np.nan  # nothing recorded for B: the plan stands
    data.loc[2, "A (achieved)"] = data.loc[2, "A"] + 1.7
    data.loc[5, "B (achieved)"] = data.loc[5, "B"] - 0.08
    result = fit(data, "y", "A + B + C + A:B", factors=FACTORS3)
    perturbed = data[["A", "B", "C"]].copy()
    perturbed.loc[2, "A"] += 1.7
    perturbed.loc[5, "B"] -= 0.08
    ref = ols_on(perturbed, data["y"], ["A", "B", "C", "A:B"])  # statsmodels OLS refit on the perturbed matrix
    assert result.beta == pytest.approx(ref.params, rel=1e-10, abs=1e-12)
    assert result.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, rel=1e-10)
    planned_only = fit(data.drop(columns=["A (achieved)", "B (achieved)"]), "y", "A + B + C + A:B", factors=FACTORS3)
    assert not np.allclose(planned_only.beta, result.beta)
    dev = result.setting_deviations
    # Rows 2 and 5 of the data (no run column) are run ids 3 and 6.
    assert dev.loc[3, "A"] == pytest.approx(1.7) and dev.loc[6, "B"] == pytest.approx(-0.08)  # the perturbations
    assert (dev.drop(index=[3, 6]).to_numpy() == 0).all()
    assert planned_only.setting_deviations is None


def test_achieved_mapping_with_own_column_names():
    data = planned_design()
    data["A reached"] = data["A"] + np.linspace(-0.5, 0.5, len(data))
    result = fit(data, "y", "A + B", factors=FACTORS3, achieved={"A": "A reached"})
    perturbed = data[["A", "B", "C"]].assign(A=data["A reached"])
    ref = ols_on(perturbed, data["y"], ["A", "B"])  # statsmodels OLS on the achieved matrix
    assert result.beta == pytest.approx(ref.params, rel=1e-10)
    with pytest.raises(LevelwiseError, match="maps factor 'A' to column 'nope', which is not in the data"):
        fit(data, "y", "A + B", factors=FACTORS3, achieved={"A": "nope"})


# ----- missing responses -----------------------------------------------------------------------------------------
def test_missing_response_keeps_all_mains_and_two_factor_interactions():
    factors = [Factor(n, -1, 1) for n in "ABCD"]
    data = full_factorial(factors, randomize=False).table.copy()
    rng = np.random.default_rng(2)
    data["y"] = 5 + data.A + 0.5 * data.B * data.C + rng.normal(0, 0.3, 16)
    data.loc[6, "y"] = np.nan
    result = fit(data, "y", "(A+B+C+D)**2", factors=factors)
    assert result.missing_runs == (int(data.loc[6, "run"]),)  # named by the design's run id
    assert result.n == 15 and len(result.terms) == 11  # 1 + 4 mains + 6 2FIs (common practice)
    assert np.isfinite(result.coefficients["std_error"]).all()
    # Independently: numpy corrcoef on the 10 model columns of the 15 runs left.
    kept = data.drop(index=6)
    cols = [kept[c].to_numpy() for c in "ABCD"] + [kept[a].to_numpy() * kept[b].to_numpy()
                                                    for a, b in itertools.combinations("ABCD", 2)]
    corr = np.corrcoef(np.column_stack(cols), rowvar=False)
    np.fill_diagonal(corr, 0)
    assert result.max_abs_correlation == pytest.approx(np.abs(corr).max(), rel=1e-12)  # numpy corrcoef
    assert result.max_abs_correlation > 0.05  # orthogonality really is lost
    assert result.orthogonality["missing_runs"] == (7,)  # run id 7 (row 6)
    full = fit(data.fillna({"y": 0.0}), "y", "(A+B+C+D)**2", factors=factors)
    assert full.max_abs_correlation == pytest.approx(0.0, abs=1e-12)  # 2^4 full factorial is orthogonal


def test_all_responses_missing():
    data = planned_design().assign(y=np.nan)
    with pytest.raises(LevelwiseError, match="response column 'y' has no values: every run is missing"):
        fit(data, "y", "A + B")


# ----- saturated fits ------------------------------------------------------------------------------------------
def test_saturated_fit_never_crashes(data_dir):
    eddy = pd.read_csv(data_dir / "SPLETT3.csv")
    result = fit(eddy, "Y", "X1*X2*X3", factors=[Factor(n, -1, 1) for n in ("X1", "X2", "X3")])
    assert result.df_resid == 0
    coef = result.coefficients
    assert coef.loc["X1", "estimate"] == pytest.approx(1.55125, abs=5e-6)  # e-Handbook 5.6.1 full model
    assert coef[["std_error", "t", "p_value", "ci_low"]].isna().all().all()
    assert result.anova["F"].isna().all()
    assert result.diagnostics["leverage"].to_numpy() == pytest.approx(np.ones(8))  # saturated: h = 1 (common practice)
    assert np.isnan(result.press)
    pred = result.predict({"X1": 0.5, "X2": 0.0, "X3": -0.5})
    assert np.isnan(pred["pi_high"].iloc[0]) and np.isfinite(pred["mean"].iloc[0])


# ----- e-Handbook 5.6.1 pseudo-replication -----------------------------------------------------------------------
def test_eddy_current_main_effects_and_interactions(data_dir):
    published = json.loads((data_dir / "ehandbook_published_results.json").read_text())["eddy_current_5_6_1"]
    eddy = pd.read_csv(data_dir / "SPLETT3.csv")
    result = fit(eddy, "Y", "(X1+X2+X3)**2", factors=[Factor(n, -1, 1) for n in ("X1", "X2", "X3")])
    assert result.s == pytest.approx(published["published"]["pseudo_replication_sd"], abs=5e-8)  # e-Handbook 5.6.1
    assert result.coefficients["std_error"].to_numpy() == pytest.approx(
        [published["published"]["coef_se_from_pseudo_sd"]] * 7, abs=5e-6)  # e-Handbook 5.6.1 SE 0.07125
    t = result.coefficients["t"]
    for name, value in published["published"]["t_values"].items():  # e-Handbook 5.6.1 t values (2 decimals)
        term = ":".join(f"X{d}" for d in name[1:].split("X"))
        # The handbook's t is effect / SE(effect) = coefficient / SE(coefficient).
        assert t[term] == pytest.approx(value, abs=5e-3), term


def test_eddy_current_reduced_model_f(data_dir):
    published = json.loads((data_dir / "ehandbook_published_results.json").read_text())["eddy_current_5_6_1"]
    reduced = published["published"]["reduced_model_x1_x2"]
    eddy = pd.read_csv(data_dir / "SPLETT3.csv")
    result = fit(eddy, "Y", "X1 + X2", factors=[Factor(n, -1, 1) for n in ("X1", "X2", "X3")])
    assert result.anova.loc["Model", "F"] == pytest.approx(reduced["F"], abs=0.05)  # e-Handbook 5.6.1 F 112.1
    assert result.anova.loc["Model", "df"] == reduced["F_df"][0]  # e-Handbook 5.6.1
    assert result.anova.loc["Model", "p_value"] == pytest.approx(reduced["F_p_value"], rel=1e-3)  # e-Handbook 5.6.1


# ----- categorical factors ---------------------------------------------------------------------------------------
def categorical_data():
    rng = np.random.default_rng(9)
    data = pd.DataFrame({
        "Temp": np.tile([-1.0, 1.0, -1.0, 1.0], 6),
        "Supplier": np.repeat(["north", "east", "west"], 8),
    })
    effect = data["Supplier"].map({"north": 0.5, "east": -0.2, "west": -0.3})
    data["y"] = 4 + data.Temp + effect + 0.3 * data.Temp * effect + rng.normal(0, 0.1, len(data))
    return data


def test_categorical_sum_to_zero_matches_statsmodels():
    data = categorical_data()
    result = fit(data, "y", "Temp * Supplier")
    # statsmodels with patsy Sum (sum-to-zero) contrasts over the levels in sorted order, the first level
    # omitted (it is minus the sum of the others), as we document.
    ref = smf.ols("y ~ Temp * C(Supplier, Sum(omit=0))", data=data).fit()
    assert result.terms == ("Intercept", "Temp", "Supplier[north]", "Supplier[west]",
                            "Temp:Supplier[north]", "Temp:Supplier[west]")
    c = "C(Supplier, Sum(omit=0))"
    names = ["Intercept", "Temp", f"{c}[S.north]", f"{c}[S.west]", f"Temp:{c}[S.north]", f"Temp:{c}[S.west]"]
    assert result.beta == pytest.approx(ref.params[names].to_numpy(), rel=1e-10)
    assert result.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse[names].to_numpy(), rel=1e-10)
    assert result.categories == {"Supplier": ("east", "north", "west")}
    assert result.anova.loc["Supplier", "df"] == 2 and result.anova.loc["Temp:Supplier", "df"] == 2
    new = pd.DataFrame({"Temp": [0.5, -0.5], "Supplier": ["west", "north"]})
    exog = pd.DataFrame({"Temp": [0.5, -0.5], "Supplier": ["west", "north"]})
    frame = ref.get_prediction(exog).summary_frame(alpha=0.05)  # statsmodels get_prediction
    got = result.predict(new)
    assert got["mean"].to_numpy() == pytest.approx(frame["mean"].to_numpy(), rel=1e-10)
    assert got["pi_high"].to_numpy() == pytest.approx(frame["obs_ci_upper"].to_numpy(), rel=1e-10)
    trace = result.trace("Supplier", {"Temp": 0.0, "Supplier": "east"})
    assert list(trace["x"]) == ["east", "north", "west"]


def test_unseen_categorical_level_at_prediction():
    result = fit(categorical_data(), "y", "Temp + Supplier")
    with pytest.raises(LevelwiseError, match="categorical factor 'Supplier' in row 1 is level 'south', which was not "
                                             r"in the data of this fit. Allowed levels: \['east', 'north', 'west'\]"):
        result.predict({"Temp": 0.0, "Supplier": "south"})


# ----- natural units ----------------------------------------------------------------------------------------------
def test_natural_coefficients_match_a_fit_in_natural_units():
    data = planned_design()
    data["A"] = data["A"] + np.linspace(-1, 1, len(data))  # break the balance a little
    coded = fit(data, "y", "A + B + C + A:B + I(A**2)", factors=FACTORS3)
    natural = coded.coefficients_natural
    ref = smf.ols("y ~ A + B + C + A:B + I(A**2)", data=data).fit()  # statsmodels OLS in natural units
    assert list(natural.index) == ["Intercept", "A", "B", "C", "A:B", "A^2"]
    assert natural["estimate"].to_numpy() == pytest.approx(ref.params.to_numpy(), rel=1e-8)
    assert natural["std_error"].to_numpy() == pytest.approx(ref.bse.to_numpy(), rel=1e-8)
    none = fit(data, "y", "A + B + C + A:B + I(A**2)", coding="none")
    assert none.beta == pytest.approx(ref.params.to_numpy(), rel=1e-8)
    assert none.r_squared == pytest.approx(ref.rsquared, rel=1e-12)  # statsmodels rsquared
    assert coded.r_squared == pytest.approx(ref.rsquared, rel=1e-12)  # coding does not change the fit


def test_declared_categorical_factor_uses_its_level_order_and_levels_seen():
    data = categorical_data()
    factors = [Factor("Temp", -1, 1), Factor("Supplier", levels=["west", "north", "east", "south"])]
    result = fit(data, "y", "Temp + Supplier", factors=factors)
    # "south" was never run: the contrasts cover the three levels seen, in the declared order.
    assert result.categories == {"Supplier": ("west", "north", "east")}
    assert result.terms == ("Intercept", "Temp", "Supplier[north]", "Supplier[east]")
    # Sum-to-zero: the effect of the first level is minus the sum of the others (patsy Sum contrasts, statsmodels).
    ref = smf.ols("y ~ Temp + C(Supplier, Sum(omit=0), levels=['west', 'north', 'east'])", data=data).fit()
    assert result.beta == pytest.approx(ref.params.to_numpy()[[0, 3, 1, 2]], rel=1e-10)
    with pytest.raises(LevelwiseError, match="level 'south', which was not in the data of this fit"):
        result.predict({"Temp": 0.0, "Supplier": "south"})
    bad = data.copy()
    bad.loc[0, "Supplier"] = "mars"
    with pytest.raises(LevelwiseError, match="column 'Supplier' holds level 'mars', which is not a level"):
        fit(bad, "y", "Temp + Supplier", factors=factors)


def test_categorical_factor_needs_two_distinct_levels():
    with pytest.raises(LevelwiseError, match="'levels' of factor 'S' must be at least 2 distinct levels"):
        Factor("S", levels=["a"])
    assert Factor("S", levels=["a", "b"]).is_categorical and not Factor("T", 0, 1).is_categorical


def test_natural_coefficients_of_a_non_hierarchical_model_list_the_extra_monomials():
    data = planned_design()
    coded = fit(data, "y", "A + A:B", factors=FACTORS3)
    natural = coded.coefficients_natural
    # (A-20)/10 * (B-1.5)/0.5 expands to AB/5 - 0.3 A - 4 B + 6 (algebra): B appears although not in the model.
    assert list(natural.index) == ["Intercept", "A", "A:B", "B"]
    b = coded.beta
    assert natural.loc["A:B", "estimate"] == pytest.approx(b[2] / 5)  # algebra above
    assert natural.loc["B", "estimate"] == pytest.approx(-4 * b[2])  # algebra above
    assert natural.loc["A", "estimate"] == pytest.approx(b[1] / 10 - 0.3 * b[2])  # algebra above
    assert natural.loc["Intercept", "estimate"] == pytest.approx(b[0] - 2 * b[1] + 6 * b[2])  # algebra above


def test_more_bad_input():
    data = planned_design()
    result = fit(data, "y", "A + B", factors=FACTORS3)
    with pytest.raises(LevelwiseError, match=r"'level' parameter must be a number in the open interval .* Got 0"):
        result.predict({"A": 20, "B": 1.5, "C": 150}, level=0)
    with pytest.raises(LevelwiseError, match="setting for factor 'A' must be a finite number"):
        result.predict({"A": -np.inf, "B": 1.5, "C": 150})
    with pytest.raises(LevelwiseError, match=r"'run' parameter of include must be an excluded run \[\]. Got 3"):
        result.include(3)
    text = data.astype({"B": object})
    text.loc[4, "B"] = "high"
    with pytest.raises(LevelwiseError, match=r"factor column 'B' must hold numbers. Row 5 .* holds 'high'"):
        fit(text, "y", "A + B", factors=FACTORS3)
    with pytest.raises(LevelwiseError, match="'Zeta' names an unknown factor"):
        fit(data, "y", "A + Zeta", factors=FACTORS3)


def test_float_columns_refuse_infinity_and_empty_settings_by_row():
    data = planned_design()
    infinite = data.astype({"y": float})
    infinite.loc[3, "y"] = np.inf
    with pytest.raises(LevelwiseError, match=r"response column 'y' must hold finite numbers. Row 4 holds inf"):
        fit(infinite, "y", "A + B", factors=FACTORS3)
    minus = data.astype({"B": float})
    minus.loc[6, "B"] = -np.inf
    with pytest.raises(LevelwiseError, match=r"factor column 'B' must hold finite numbers. Row 7 holds -inf"):
        fit(minus, "y", "A + B", factors=FACTORS3)
    empty = data.astype({"C": float})
    empty.loc[1, "C"] = np.nan
    with pytest.raises(LevelwiseError, match=r"factor column 'C' is empty in row 2, a run with a response"):
        fit(empty, "y", "A + B + C", factors=FACTORS3)


def test_empty_setting_in_a_run_without_response_leaves_the_fit_as_without_that_run():
    data = planned_design().astype({"A": float, "B": float, "C": float})
    data.loc[4, "y"] = np.nan
    data.loc[4, "B"] = np.nan  # the run left out by its missing response has no B either
    data.loc[0, "C"] = np.nan  # C is in no term of the model
    result = fit(data, "y", "A + B + A:B", factors=FACTORS3)
    kept = data.drop(index=4)
    ref = ols_on(kept, kept["y"], ["A", "B", "A:B"])  # statsmodels OLS on the other runs
    assert result.missing_runs == (int(data.loc[4, "run"]),)
    assert result.beta == pytest.approx(ref.params, rel=1e-10)
    assert result.s == pytest.approx(np.sqrt(ref.scale), rel=1e-10)


def test_fit_keeps_its_own_copy_of_the_data():
    data = planned_design().astype({"A": float, "y": float})
    result = fit(data, "y", "A + B", factors=FACTORS3)
    y_before, settings_before = result.y.copy(), result.run_settings.copy()
    data.loc[:, "y"] = 0.0
    data.loc[:, "A"] = 99.0
    assert np.array_equal(result.y, y_before)
    assert np.array_equal(result.run_settings, settings_before)


def test_extrapolation_by_leverage_inside_the_ranges():
    # Runs on the diagonal A = B only: a point at (low, high) is inside both ranges but far from every run,
    # so its leverage exceeds the largest leverage of the design (the rule of issue 4).
    data = pd.DataFrame({"A": [0.0, 0.5, 1.0, 0.0, 1.0, 0.5], "B": [0.0, 0.5, 1.0, 0.1, 0.9, 0.45]})
    data["y"] = [1.0, 2.0, 3.1, 1.2, 2.9, 2.1]
    result = fit(data, "y", "A + B")
    pred = result.predict(pd.DataFrame({"A": [0.0, 0.5], "B": [1.0, 0.5]}))
    assert pred["leverage"].iloc[0] > result.leverage.max()
    assert list(pred["extrapolated"]) == [True, False]


def test_fit_is_immutable_and_exclusion_leaves_the_original_alone():
    data = planned_design()
    result = fit(data, "y", "A + B + C", factors=FACTORS3)
    before = result.beta.copy()
    with pytest.raises(ValueError):  # numpy: assignment destination is read-only
        result.beta[0] = 0.0
    with pytest.raises(AttributeError):  # frozen dataclass
        result.level = 0.9
    reduced = result.exclude(2, "spilled sample")
    assert result.beta == pytest.approx(before, rel=0, abs=0) and result.n == len(data)
    assert reduced.exclusions == ((2, "spilled sample"),) and result.exclusions == ()
    assert reduced.orthogonality["excluded_runs"] == (2,)


@pytest.mark.parametrize("model", ["full_second_order", "A*B*C + I(A**3) + I(B**2*C)", "A + B - 1"])
def test_compiled_predictor_rows_equal_the_product_of_powers(model):
    rng = np.random.default_rng(12)
    data = pd.DataFrame(rng.uniform(-1, 1, (40, 3)), columns=list("ABC"))
    data["y"] = rng.normal(size=40)
    result = fit(data, "y", model)
    for m in (1, 7, 300):
        natural = rng.uniform(-1, 1, (m, len(result.factor_names)))
        coded = (natural - result.coding.center) / result.coding.scale
        # Direct definition (common practice): each term is the product of coded factors to their powers.
        expected = np.prod(coded[:, None, :] ** result.spec.exponents[None, :, :], axis=2)
        assert result.engine.rows(natural) == pytest.approx(expected, rel=1e-13, abs=1e-15)


def test_balanced_categorical_design_counts_as_orthogonal():
    result = fit(categorical_data(), "y", "Temp * Supplier")
    # Balanced 2 x 3 layout: columns of different terms are uncorrelated (common practice); the two contrast
    # columns of Supplier are correlated 0.5 by construction and are not a loss of orthogonality.
    assert result.max_abs_correlation == pytest.approx(0.0, abs=1e-12)
    assert abs(np.corrcoef(result.X[:, 2], result.X[:, 3])[0, 1]) == pytest.approx(0.5)  # numpy corrcoef


def test_refit_on_fewer_terms_keeps_the_achieved_settings():
    # levelwise.refit reads Fit.settings: the settings actually used (achieved where recorded).
    from levelwise import refit

    data = planned_design()
    data["A (achieved)"] = data["A"] + np.linspace(-0.4, 0.4, len(data))
    full = fit(data, "y", "A + B + C + A:B", factors=FACTORS3)
    smaller = refit(full, [[0, 0, 0], [1, 0, 0], [0, 1, 0]])
    achieved = data[["A", "B", "C"]].assign(A=data["A (achieved)"])
    ref = ols_on(achieved, data["y"], ["A", "B"])  # statsmodels OLS on the achieved matrix
    assert smaller.beta == pytest.approx(ref.params, rel=1e-10)


@pytest.mark.parametrize("model", ["full_second_order", "A*B*C + I(A**3) + I(B**2*C)", "A + B - 1"])
def test_trace_equals_point_predictions_for_several_models(model):
    rng = np.random.default_rng(13)
    data = pd.DataFrame(rng.uniform(-1, 1, (40, 3)), columns=list("ABC"))
    data["y"] = rng.normal(size=40)
    result = fit(data, "y", model)
    names = result.factor_names
    settings = {n: 0.3 for n in names}
    for name in names:
        trace = result.trace(name, settings, points=9)
        points = pd.DataFrame({n: trace["x"] if n == name else 0.3 for n in names})
        direct = result.predict(points)  # point predictions, row by row (the general path)
        assert trace["mean"] == pytest.approx(direct["mean"].to_numpy(), rel=1e-12, abs=1e-13)
        assert trace["ci_half"] == pytest.approx((direct["ci_high"] - direct["mean"]).to_numpy(), rel=1e-9)
        assert trace["pi_half"] == pytest.approx((direct["pi_high"] - direct["mean"]).to_numpy(), rel=1e-12)


def test_traces_of_all_factors_equal_single_traces():
    data = categorical_data()
    data["Speed"] = np.linspace(10, 20, len(data))
    result = fit(data, "y", "Temp * Supplier + Speed + I(Speed**2)")
    settings = {"Temp": 0.2, "Supplier": "west", "Speed": 12.0}
    batch = result.traces(settings, points=11)
    assert list(batch) == list(result.factor_names)
    for name in result.factor_names:
        single = result.trace(name, settings, points=11)  # one factor at a time (checked against predict above)
        for key in ("mean", "ci_half", "pi_half"):
            assert batch[name][key] == pytest.approx(single[key], rel=1e-12, abs=1e-13)
        assert list(batch[name]["x"]) == list(single["x"])


def test_fit_reads_the_achieved_columns_of_a_run_sheet():
    # levelwise.design.run_sheet writes "<factor> (achieved)" columns, blank = as planned: the convention fit() reads.
    from levelwise.design import run_sheet

    design = full_factorial(FACTORS3, center_points=2, seed=4)
    sheet = run_sheet(design, responses=["y"])
    rng = np.random.default_rng(4)
    sheet["y"] = 2 + 0.05 * sheet["A"] + rng.normal(0, 0.1, len(sheet))
    sheet.loc[3, "A (achieved)"] = sheet.loc[3, "A"] + 2.5
    sheet.loc[7, "C (achieved)"] = sheet.loc[7, "C"] - 4.0
    result = fit(sheet, "y", "A + B + C", factors=design.factors)
    actual = sheet[["A", "B", "C"]].copy()
    actual.loc[3, "A"] += 2.5
    actual.loc[7, "C"] -= 4.0
    ref = ols_on(actual, sheet["y"], ["A", "B", "C"])  # statsmodels OLS on the achieved settings
    assert result.beta == pytest.approx(ref.params, rel=1e-10)
    run_a, run_c = sheet.loc[3, "run"], sheet.loc[7, "run"]  # deviations are indexed by run id
    assert result.setting_deviations.loc[run_a, "A"] == pytest.approx(2.5)  # the perturbation above
    assert result.setting_deviations.loc[run_c, "C"] == pytest.approx(-4.0)  # the perturbation above
    assert np.count_nonzero(result.setting_deviations.to_numpy()) == 2
    summary = result.setting_deviation_summary
    assert summary.loc["A", "runs_moved"] == 1 and summary.loc["B", "runs_moved"] == 0
    assert summary.loc["A", "max_abs_coded"] == pytest.approx(2.5 / 10)  # A: 10..30, half-range 10
    assert summary.loc["C", "rms"] == pytest.approx(np.sqrt(16 / len(sheet)))  # one run moved by 4
