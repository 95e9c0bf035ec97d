"""Multi-column terms tested as one term, backward elimination by term, and the curvature row with discrete
factors (issue 14). Reference: statsmodels (anova_lm typ=2; the F test of a nested model)."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import levelwise as lw
from levelwise import Factor

SUPPLIER = Factor("Supplier", levels=["north", "east", "south"])


def _data(seed=0, supplier_effect=(0.0, 1.5, -2.0), curvature=0.0, centre_points=0, replicates=2):
    factors = [Factor("A", 10, 20), Factor("B", 0, 1), SUPPLIER]
    d = lw.full_factorial(factors, replicates=replicates, center_points=centre_points, seed=seed)
    t = d.table.copy()
    rng = np.random.default_rng(seed)
    a = (t["A"] - 15) / 5
    b = (t["B"] - 0.5) / 0.5
    effect = t["Supplier"].map(dict(zip(SUPPLIER.levels, supplier_effect)))
    centre = (np.abs(a) < 1e-9) & (np.abs(b) < 1e-9)
    t["y"] = 50 + 3 * a - 2 * b + 1.2 * a * b + effect + curvature * centre + rng.normal(0, 1.0, len(t))
    return t[["run", "A", "B", "Supplier", "y"]], factors


def _sm(formula, data):
    # Sum-to-zero contrasts, the coding of levelwise's categorical columns.
    return smf.ols(formula.replace("Supplier", "C(Supplier, Sum)"), data=data).fit()


def test_three_level_categorical_term_partial_f_matches_statsmodels_type2():
    data, factors = _data(seed=1)
    fit = lw.fit(data, "y", "A + B + Supplier + A:Supplier + A:B", factors=factors)
    table = lw.term_tests(fit)
    ref = anova_lm(_sm("y ~ A + B + Supplier + A:Supplier + A:B", data), typ=2)  # statsmodels reference
    names = {"Supplier": "C(Supplier, Sum)", "A:Supplier": "A:C(Supplier, Sum)", "A": "A", "A:B": "A:B"}
    for ours, theirs in names.items():
        assert table.loc[ours, "df"] == ref.loc[theirs, "df"]
        assert table.loc[ours, "sum_sq"] == pytest.approx(ref.loc[theirs, "sum_sq"], rel=1e-9)
        assert table.loc[ours, "F"] == pytest.approx(ref.loc[theirs, "F"], rel=1e-9)
        assert table.loc[ours, "p_value"] == pytest.approx(ref.loc[theirs, "PR(>F)"], rel=1e-7)
    assert table.loc["Supplier", "df"] == 2 and table.loc["A:Supplier", "df"] == 2


def test_reduce_removes_a_categorical_term_as_a_whole():
    data, factors = _data(seed=5, supplier_effect=(0.0, 0.0, 0.0))  # no supplier effect in the invented data
    fit = lw.fit(data, "y", "A + B + Supplier + A:B + A:Supplier", factors=factors)
    result = lw.reduce(fit, alpha=0.05)
    final, steps = result
    # A:Supplier can only go before Supplier (hierarchy); both go as whole terms, 2 columns each.
    removed = steps["term"].tolist()
    assert removed[:2] == ["A:Supplier", "Supplier"]
    assert steps.set_index("term").loc[["A:Supplier", "Supplier"], "df"].tolist() == [2, 2]
    assert not any(t.startswith("Supplier[") for t in final.terms)
    assert set(final.terms) >= {"Intercept", "A", "B", "A:B"}
    # The p-value of each step is the statsmodels type-2 p-value of the term in the model it left.
    first = anova_lm(_sm("y ~ A + B + Supplier + A:B + A:Supplier", data), typ=2)
    assert steps.loc[0, "p_value"] == pytest.approx(first.loc["A:C(Supplier, Sum)", "PR(>F)"], rel=1e-7)
    second = anova_lm(_sm("y ~ A + B + Supplier + A:B", data), typ=2)
    assert steps.loc[1, "p_value"] == pytest.approx(second.loc["C(Supplier, Sum)", "PR(>F)"], rel=1e-7)


def test_reduce_keeps_an_active_categorical_term():
    data, factors = _data(seed=2, supplier_effect=(0.0, 4.0, -4.0))
    final, steps = lw.reduce(lw.fit(data, "y", "A + B + Supplier + A:Supplier", factors=factors), alpha=0.05)
    assert "Supplier[east]" in final.terms and "Supplier[south]" in final.terms
    assert "Supplier" not in steps["term"].tolist()


def test_reduce_with_categorical_factor_and_data_argument_gives_the_same_fit():
    data, factors = _data(seed=5, supplier_effect=(0.0, 0.0, 0.0))
    fit = lw.fit(data, "y", "A + B + Supplier + A:B", factors=factors)
    a = lw.reduce(fit).fit
    b = lw.reduce(fit, data=data).fit
    assert a.terms == b.terms
    np.testing.assert_allclose(a.beta, b.beta, rtol=1e-12)


def _curvature_reference(data, formula, centre):
    frame = data.assign(centre=centre.astype(float))
    reduced = _sm(f"y ~ {formula}", frame)
    full = _sm(f"y ~ {formula} + centre", frame)
    return reduced, full


def test_curvature_row_with_centre_runs_at_each_categorical_level_no_pure_error():
    # Corners once, one centre run per supplier: no replicated settings, so the curvature F uses the rest of the
    # residual, which is the statsmodels F test of adding the indicator to the same model.
    data, factors = _data(seed=3, curvature=4.0, centre_points=1, replicates=1)
    fit = lw.fit(data, "y", "A + B + Supplier + A:B", factors=factors)
    centre = ((data["A"] == 15) & (data["B"] == 0.5)).to_numpy()
    assert centre.sum() == 3
    row = fit.anova.loc["Curvature"]
    reduced, full = _curvature_reference(data, "A + B + Supplier + A:B", centre)
    f_ref, p_ref, df_ref = full.compare_f_test(reduced)  # statsmodels reference
    assert row["df"] == df_ref == 1
    assert row["sum_sq"] == pytest.approx(reduced.ssr - full.ssr, rel=1e-9)
    assert row["F"] == pytest.approx(f_ref, rel=1e-9)
    assert row["p_value"] == pytest.approx(p_ref, rel=1e-7)


def test_curvature_row_with_replicated_centre_runs_uses_pure_error():
    data, factors = _data(seed=4, curvature=3.0, centre_points=2, replicates=1)
    fit = lw.fit(data, "y", "A + B + Supplier + A:B", factors=factors)
    centre = ((data["A"] == 15) & (data["B"] == 0.5)).to_numpy()
    reduced, full = _curvature_reference(data, "A + B + Supplier + A:B", centre)
    row = fit.anova.loc["Curvature"]
    assert row["sum_sq"] == pytest.approx(reduced.ssr - full.ssr, rel=1e-9)
    # Pure error from statsmodels' cell-means model (one mean per distinct setting).
    cells = smf.ols("y ~ C(cell)", data=data.assign(cell=data[["A", "B", "Supplier"]].astype(str).agg("|".join,
                                                                                               axis=1))).fit()
    assert fit.anova.loc["Pure error", "sum_sq"] == pytest.approx(cells.ssr, rel=1e-9)
    assert fit.anova.loc["Pure error", "df"] == cells.df_resid == 3
    assert row["F"] == pytest.approx((reduced.ssr - full.ssr) / (cells.ssr / cells.df_resid), rel=1e-9)


def test_curvature_row_when_a_continuous_factor_is_discrete():
    # B is numeric but run at two levels only: the centre runs sit at A = 0 and B = -1 / +1.
    rng = np.random.default_rng(9)
    corners = [(a, b) for a in (-1, 1) for b in (-1, 1)] * 2
    centres = [(0, -1), (0, 1), (0, -1), (0, 1)]
    x = np.array(corners + centres, dtype=float)
    y = 10 + 2 * x[:, 0] - x[:, 1] + 3 * (x[:, 0] == 0) + rng.normal(0, 0.5, len(x))
    data = pd.DataFrame({"A": x[:, 0], "B": x[:, 1], "y": y})
    fit = lw.fit(data, "y", "A + B + A:B", factors=[Factor("A", -1, 1), Factor("B", -1, 1)])
    centre = x[:, 0] == 0
    reduced = smf.ols("y ~ A + B + A:B", data=data).fit()
    full = smf.ols("y ~ A + B + A:B + centre", data=data.assign(centre=centre.astype(float))).fit()
    assert fit.anova.loc["Curvature", "sum_sq"] == pytest.approx(reduced.ssr - full.ssr, rel=1e-9)


def test_no_curvature_row_when_the_model_has_the_quadratic_or_no_centre_runs():
    data, factors = _data(seed=3, curvature=4.0, centre_points=1, replicates=1)
    assert "Curvature" not in lw.fit(data[data["A"] != 15], "y", "A + B + Supplier", factors=factors).anova.index
    three = pd.DataFrame({"A": [-1, 0, 1] * 3, "y": [1.0, 2.1, 2.9, 1.2, 2.0, 3.1, 0.9, 2.2, 3.0]})
    assert "Curvature" not in lw.fit(three, "y", "A + I(A**2)").anova.index
