"""Backward elimination with hierarchy, against statsmodels p-values and the e-Handbook 5.6.1 reduced model."""

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from levelwise import Factor, LevelwiseError, fit, reduce, refit

CODED = [Factor(name, -1, 1) for name in ("X1", "X2", "X3")]


@pytest.fixture(scope="module")
def interaction_data():
    """Invented, seeded replicated 2^3 in natural units: A:B is active, A alone is not."""
    rng = np.random.default_rng(2026)
    coded = np.array(list(itertools.product([-1.0, 1.0], repeat=3)) * 2)
    data = pd.DataFrame(coded * [10, 2, 1] + [100, 5, 0], columns=["Temp", "C", "I"])  # names C and I on purpose
    data["y"] = 3 + 1.5 * coded[:, 0] * coded[:, 1] + 1.0 * coded[:, 2] + rng.normal(0, 0.5, len(coded))
    return data, coded


def ols_pvalues(coded, y, terms):
    """statsmodels OLS p-values for the product columns named by *terms* (tuples of factor indices)."""
    columns = [np.ones(len(y))] + [np.prod(coded[:, list(t)], axis=1) for t in terms]
    return sm.OLS(y, np.column_stack(columns)).fit().pvalues[1:]


INDEX = {"Temp": 0, "C": 1, "I": 2}


def as_indices(term):
    return tuple(INDEX[name] for name in term.split(":"))


def test_hierarchy_keeps_a_main_effect_under_its_interaction(interaction_data):
    data, coded = interaction_data
    start = fit(data, "y", "(Temp + C + I)**3")
    final, steps = reduce(start, alpha=0.05)
    assert "Temp:C" in final.terms  # the invented active interaction
    assert "Temp" in final.terms  # hierarchy: Temp stays while Temp:C stays
    assert final.coefficients.loc["Temp", "p_value"] > 0.05  # ... although it is not significant itself
    flat, _ = reduce(start, alpha=0.05, hierarchy=False)
    assert "Temp" not in flat.terms and "Temp:C" in flat.terms  # without hierarchy it goes


def test_step_log_against_statsmodels(interaction_data):
    data, coded = interaction_data
    result = reduce(fit(data, "y", "(Temp + C + I)**3"), alpha=0.05)
    steps = result.steps
    assert list(steps.columns[:5]) == ["step", "term", "estimate", "t", "p_value"]
    assert steps["step"].tolist() == list(range(1, len(steps) + 1))
    assert steps["term"].iloc[0] == "Temp:C:I"  # hierarchy: only the top term can go first
    for _, row in steps.iterrows():
        before = [t for t in row["remaining"] if t != "Intercept"] + [row["term"]]
        reference = ols_pvalues(coded, data["y"].to_numpy(), [as_indices(t) for t in before])
        # statsmodels OLS p-value of the removed term in the model it was removed from
        assert row["p_value"] == pytest.approx(reference[-1], rel=1e-9)
        assert row["p_value"] > 0.05
        # it was the least significant removable term: the largest p among terms no other term contains
        removable = [t for t in before if not any(set(t.split(":")) < set(o.split(":")) for o in before)]
        worst = max(removable, key=lambda t: reference[before.index(t)])
        assert worst == row["term"]
    # the final fit's p-values equal statsmodels' on the final terms
    final_terms = [t for t in result.fit.terms if t != "Intercept"]
    reference = ols_pvalues(coded, data["y"].to_numpy(), [as_indices(t) for t in final_terms])
    assert result.fit.coefficients["p_value"].to_numpy()[1:] == pytest.approx(reference, rel=1e-9)  # statsmodels


def test_eddy_current_reduces_to_the_published_model(data_dir):
    data = pd.read_csv(data_dir / "SPLETT3.csv")
    result = reduce(fit(data, "Y", "(X1 + X2 + X3)**2", factors=CODED))
    assert result.fit.terms == ("Intercept", "X1", "X2")  # e-Handbook 5.6.1 reduced model Y ~ X1 + X2
    coef = result.fit.coefficients["estimate"]
    # e-Handbook 5.6.1: Y = 2.6587 + 1.5512 X1 - 0.4337 X2
    assert coef.to_numpy() == pytest.approx([2.6587, 1.5512, -0.4337], abs=1e-4)
    assert result.fit.s == pytest.approx(0.3043, abs=5e-5)  # e-Handbook 5.6.1 residual SD


def test_quadratic_terms_are_kept_hierarchical():
    rng = np.random.default_rng(4)
    x = np.tile([-1.0, 0.0, 1.0], 6)
    z = np.repeat([-1.0, 0.0, 1.0], 6)
    data = pd.DataFrame({"A": x, "B": z, "y": 2 + 0.0 * x + 3 * x**2 + 0.5 * z + rng.normal(0, 0.3, 18)})
    final, _ = reduce(fit(data, "y", "full_second_order"))
    assert "A^2" in final.terms and "A" in final.terms  # hierarchy: A stays while A^2 stays (common practice)


def test_saturated_fit_is_refused(data_dir):
    data = pd.read_csv(data_dir / "SPLETT3.csv")
    with pytest.raises(LevelwiseError, match="no residual degrees of freedom.*Lenth"):
        reduce(fit(data, "Y", "X1*X2*X3", factors=CODED))
    with pytest.raises(LevelwiseError, match="'alpha'"):
        reduce(fit(data, "Y", "X1 + X2", factors=CODED), alpha=0)


@pytest.mark.parametrize("coding", ["auto", "none"])
def test_refit_on_fewer_terms_equals_a_direct_fit(interaction_data, coding):
    data, _ = interaction_data
    full = fit(data, "y", "(Temp + C + I)**2", coding=coding)
    keep = full.spec.exponents[[0, 1, 2, 3, 4]]  # Intercept, Temp, C, I, Temp:C
    smaller = refit(full, keep)
    direct = fit(data, "y", "Temp + C + I + Temp:C", coding=coding)
    assert smaller.terms == direct.terms
    # the same least-squares problem (reference: a direct fit of the smaller formula)
    assert smaller.coefficients["estimate"].to_numpy() == pytest.approx(
        direct.coefficients["estimate"].to_numpy(), rel=1e-12, abs=1e-12)
    assert smaller.s == pytest.approx(direct.s, rel=1e-12)
    with_data = refit(full, keep, data=data)
    assert with_data.coefficients["estimate"].to_numpy() == pytest.approx(
        direct.coefficients["estimate"].to_numpy(), rel=1e-12, abs=1e-12)


def test_refit_keeps_only_the_runs_of_the_fit(interaction_data):
    data, _ = interaction_data
    gappy = data.copy()
    gappy.loc[[2, 9], "y"] = np.nan  # two missing responses leave the fit
    full = fit(gappy, "y", "(Temp + C + I)**2")
    final, _ = reduce(full)
    direct = fit(gappy.dropna(), "y", " + ".join(t for t in final.terms if t != "Intercept"))
    assert final.n == 14
    assert final.coefficients["estimate"].to_numpy() == pytest.approx(
        direct.coefficients["estimate"].to_numpy(), rel=1e-12, abs=1e-12)  # reference: a direct fit
