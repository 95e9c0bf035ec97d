"""Mixture models: Scheffé presets fitted with no intercept, checked against statsmodels and a published example.

Sources: the yarn elongation example (tests/data/yarn_elongation.csv; J. A. Cornell, Experiments with Mixtures,
FROM MEMORY, see tests/data/SOURCES.md) and its printed Scheffé quadratic coefficients, also FROM MEMORY;
statsmodels OLS without an intercept on the Scheffé columns (coefficients, standard errors, get_prediction CI and
PI); statsmodels OLS with a constant on an equivalent parametrisation for the corrected-total R² and ANOVA (the
model contains the mean: the proportions sum to 1, Scheffé 1958, JRSS B 20, 344-360); L-pseudo-components of
McLean & Anderson (1966), Technometrics 8, 447-454. Random responses are used only where statsmodels is the
reference.
"""

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import levelwise as lw
from levelwise import LevelwiseError

DATA = Path(__file__).parent / "data" / "yarn_elongation.csv"
NAMES = ["x1", "x2", "x3"]


@pytest.fixture(scope="module")
def yarn():
    return pd.read_csv(DATA)


def scheffe_columns(x, preset):
    """Scheffé columns written out by hand (independent of the code under test)."""
    q = x.shape[1]
    cols = [x[:, i] for i in range(q)]
    pairs = list(itertools.combinations(range(q), 2))
    if preset != "linear":
        cols += [x[:, i] * x[:, j] for i, j in pairs]
    if preset == "cubic":
        cols += [x[:, i] * x[:, j] * (x[:, i] - x[:, j]) for i, j in pairs]
    if preset in ("special_cubic", "cubic"):
        cols += [x[:, i] * x[:, j] * x[:, k] for i, j, k in itertools.combinations(range(q), 3)]
    return np.column_stack(cols)


def test_yarn_published_coefficients(yarn):
    # Published Scheffé quadratic (FROM MEMORY, see the module docstring): 11.7, 9.4, 16.4, 19.0, 11.4, -9.6.
    f = lw.fit_mixture(yarn, "elongation", "scheffe_quadratic", NAMES)
    assert list(f.coefficients.index) == ["x1", "x2", "x3", "x1:x2", "x1:x3", "x2:x3"]
    assert f.coefficients["estimate"].to_numpy() == pytest.approx([11.7, 9.4, 16.4, 19.0, 11.4, -9.6], abs=1e-9)


def test_yarn_against_statsmodels_no_intercept(yarn):
    f = lw.fit_mixture(yarn, "elongation", "scheffe_quadratic", NAMES)
    X = scheffe_columns(yarn[NAMES].to_numpy(), "quadratic")
    ref = sm.OLS(yarn["elongation"].to_numpy(), X).fit()  # statsmodels OLS without intercept
    assert f.coefficients["estimate"].to_numpy() == pytest.approx(ref.params, abs=1e-8)
    assert f.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, abs=1e-8)
    blends = pd.DataFrame({"x1": [0.3, 0.2, 1 / 3, 0.0], "x2": [0.3, 0.5, 1 / 3, 0.25], "x3": [0.4, 0.3, 1 / 3, 0.75]})
    ours = f.predict(blends)
    frame = ref.get_prediction(scheffe_columns(blends.to_numpy(), "quadratic")).summary_frame(alpha=0.05)
    for a, b in [("mean", "mean"), ("ci_low", "mean_ci_lower"), ("ci_high", "mean_ci_upper"),
                 ("pi_low", "obs_ci_lower"), ("pi_high", "obs_ci_upper")]:
        assert ours[a].to_numpy() == pytest.approx(frame[b].to_numpy(), abs=1e-8)


def test_corrected_total_r_squared_and_anova(yarn):
    # The model contains the mean: statsmodels OLS with a constant on [1, x1, x2, x1x2, x1x3, x2x3] spans the same
    # columns, and reports the corrected-total R², adjusted R², model SS and F.
    f = lw.fit_mixture(yarn, "elongation", "scheffe_quadratic", NAMES)
    x = yarn[NAMES].to_numpy()
    y = yarn["elongation"].to_numpy()
    quad = scheffe_columns(x, "quadratic")
    ref = sm.OLS(y, np.column_stack([np.ones(len(y)), x[:, :2], quad[:, 3:]])).fit()
    assert f.r_squared == pytest.approx(ref.rsquared, abs=1e-10)
    assert f.r_squared_adj == pytest.approx(ref.rsquared_adj, abs=1e-10)
    a = f.anova
    assert a.loc["Model", "df"] == 5 and a.loc["Total", "df"] == 14
    assert a.loc["Model", "sum_sq"] == pytest.approx(ref.ess, abs=1e-8)
    assert a.loc["Model", "F"] == pytest.approx(ref.fvalue, abs=1e-8)
    assert a.loc["Model", "p_value"] == pytest.approx(ref.f_pvalue, abs=1e-12)
    # Linear mixture: SS of the linear blending model beyond the mean (statsmodels OLS with a constant on x1, x2).
    lin = sm.OLS(y, np.column_stack([np.ones(len(y)), x[:, :2]])).fit()
    assert a.loc["Linear mixture", "df"] == 2
    assert a.loc["Linear mixture", "sum_sq"] == pytest.approx(lin.ess, abs=1e-8)
    # Each blending term: extra SS over the model without it (statsmodels fits).
    for j, term in enumerate(["x1:x2", "x1:x3", "x2:x3"]):
        without = sm.OLS(y, np.delete(quad, 3 + j, axis=1)).fit()
        full = sm.OLS(y, quad).fit()
        assert a.loc[term, "sum_sq"] == pytest.approx(without.ssr - full.ssr, abs=1e-8)
    # Residual is all pure error on the replicated {3, 2} lattice: 15 runs at 6 blends, 9 df.
    assert a.loc["Pure error", "df"] == 9


@pytest.mark.parametrize("preset,terms", [("scheffe_linear", 3), ("scheffe_special_cubic", 7),
                                          ("scheffe_cubic", 10)])
def test_presets_against_statsmodels(preset, terms):
    # Random responses on a {3, 3} lattice plus centroid and axial points; statsmodels OLS is the reference.
    d = lw.simplex_lattice(3, 3, interior_check=True, overall_centroid=True, randomize=False)
    data = d.table[["A", "B", "C"]].copy()
    rng = np.random.default_rng(7)
    data["y"] = rng.normal(size=len(data)) + 3 * data["A"] + 5 * data["A"] * data["B"]
    f = lw.fit_mixture(data, "y", preset, ["A", "B", "C"])
    X = scheffe_columns(data[["A", "B", "C"]].to_numpy(), preset.replace("scheffe_", ""))
    ref = sm.OLS(data["y"].to_numpy(), X).fit()
    table = f.coefficients_proportions  # the canonical form (for the cubic: x_i x_j (x_i - x_j) terms)
    assert len(table) == terms
    assert table["estimate"].to_numpy() == pytest.approx(ref.params, abs=1e-8)
    assert table["std_error"].to_numpy() == pytest.approx(ref.bse, abs=1e-8)
    assert np.asarray(f.fitted) == pytest.approx(ref.fittedvalues, abs=1e-8)
    if preset == "scheffe_cubic":
        assert "A:B:(A-B)" in table.index


def test_pseudo_components(yarn):
    # The yarn responses placed at blends x = L + z (1 - sum L), z the published lattice (McLean & Anderson 1966):
    # in pseudo-components the coefficients are the yarn ones; in proportions they match statsmodels OLS on the
    # Scheffé columns of x.
    comps = [lw.Component("x1", 0.1), lw.Component("x2", 0.2), lw.Component("x3", 0.1)]
    m = lw.Mixture(comps)
    data = pd.DataFrame(m.from_pseudo(yarn[NAMES].to_numpy()), columns=NAMES)
    data["elongation"] = yarn["elongation"]
    f = lw.fit_mixture(data, "elongation", "scheffe_quadratic", m, pseudo=True)
    assert f.coefficients_pseudo["estimate"].to_numpy() == pytest.approx([11.7, 9.4, 16.4, 19.0, 11.4, -9.6],
                                                                         abs=1e-9)
    ref = sm.OLS(data["elongation"].to_numpy(), scheffe_columns(data[NAMES].to_numpy(), "quadratic")).fit()
    assert f.coefficients_proportions["estimate"].to_numpy() == pytest.approx(ref.params, abs=1e-8)
    assert f.coefficients_proportions["std_error"].to_numpy() == pytest.approx(ref.bse, abs=1e-7)
    plain = lw.fit_mixture(data, "elongation", "scheffe_quadratic", m)
    blend = {"x1": 0.3, "x2": 0.4, "x3": 0.3}
    assert f.predict(blend).iloc[0].to_numpy(dtype=float) == pytest.approx(
        plain.predict(blend).iloc[0].to_numpy(dtype=float), abs=1e-9)
    with pytest.raises(LevelwiseError, match="pseudo"):
        _ = plain.coefficients_pseudo


def test_total_100_and_bad_blends(yarn):
    data = yarn.copy()
    data[NAMES] = data[NAMES] * 100
    comps = [lw.Component("x1", units="%"), lw.Component("x2", units="%"), lw.Component("x3", 0, 80, units="%")]
    f = lw.fit_mixture(data[data.x3 <= 80], "elongation", "scheffe_linear", comps, total=100)
    ok = f.predict({"x1": 30, "x2": 30, "x3": 40})
    assert not ok["extrapolated"].iloc[0]
    with pytest.raises(LevelwiseError) as info:
        f.predict({"x1": 30, "x2": 30, "x3": 30})
    assert "x1 30 + x2 30 + x3 30 = 90" in str(info.value) and "total 100" in str(info.value)
    with pytest.raises(LevelwiseError, match=r"x3 = 90 \(allowed 0..80\)"):
        f.predict({"x1": 5, "x2": 5, "x3": 90})
    with pytest.raises(LevelwiseError, match="missing component"):
        f.predict({"x1": 50, "x2": 50})
    bad = data.copy()
    bad.loc[3, "x1"] = 60
    with pytest.raises(LevelwiseError, match="row 3.*does not sum"):
        lw.fit_mixture(bad, "elongation", "scheffe_linear", NAMES, total=100)


def test_extrapolation_flag_outside_the_tested_blends():
    # Runs only near the A corner: a blend far from them has leverage beyond every run's (the extrapolation rule).
    d = lw.simplex_lattice([lw.Component("A", 0.6), lw.Component("B"), lw.Component("C")], 2, randomize=False)
    data = d.table[["A", "B", "C"]].copy()
    data["y"] = np.random.default_rng(3).normal(size=len(data))
    f = lw.fit_mixture(data, "y", "scheffe_linear", ["A", "B", "C"])
    assert not f.predict({"A": 0.7, "B": 0.15, "C": 0.15})["extrapolated"].iloc[0]
    assert f.predict({"A": 0.0, "B": 0.5, "C": 0.5})["extrapolated"].iloc[0]


def test_reduction_keeps_every_linear_blending_term(yarn):
    rng = np.random.default_rng(11)
    data = yarn[NAMES].copy()
    data["y"] = 10 + rng.normal(size=len(data))  # no blending effects at all
    f = lw.fit_mixture(data, "y", "scheffe_quadratic", NAMES)
    final, steps = lw.reduce(f, alpha=0.05)
    assert set(final.terms) >= set(NAMES)
    assert isinstance(final, lw.MixtureFit)
    assert all(t not in NAMES for t in steps["term"])
    # the reduced model is the statsmodels no-intercept fit of the remaining columns
    cols = {"x1": data.x1, "x2": data.x2, "x3": data.x3, "x1:x2": data.x1 * data.x2, "x1:x3": data.x1 * data.x3,
            "x2:x3": data.x2 * data.x3}
    ref = sm.OLS(data["y"].to_numpy(), np.column_stack([cols[t] for t in final.terms])).fit()
    assert final.coefficients["estimate"].to_numpy() == pytest.approx(ref.params, abs=1e-8)


def test_mixture_process_model_against_statsmodels():
    mix = lw.simplex_centroid(3, randomize=False)
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190)], randomize=False)
    data = d.table[["A", "B", "C", "Temp"]].copy()
    rng = np.random.default_rng(5)
    data["y"] = rng.normal(size=len(data)) + 2 * data["A"] + data["Temp"] / 100
    f = lw.fit_mixture(data, "y", ("scheffe_quadratic", "main_effects"), ["A", "B", "C"],
                       process=[lw.Factor("Temp", 150, 190)])
    x = data[["A", "B", "C"]].to_numpy()
    z = ((data["Temp"] - 170) / 20).to_numpy()
    quad = scheffe_columns(x, "quadratic")
    ref = sm.OLS(data["y"].to_numpy(), np.column_stack([quad, quad * z[:, None]])).fit()
    assert f.p == 12
    order = {t: i for i, t in enumerate(["A", "B", "C", "A:B", "A:C", "B:C"])}
    ref_names = list(order) + [f"{t}:Temp" for t in order]
    ours = f.coefficients["estimate"]
    assert [ours[t] for t in ref_names] == pytest.approx(ref.params, abs=1e-8)
    point = f.predict({"A": 0.2, "B": 0.3, "C": 0.5, "Temp": 180})
    row = np.concatenate([scheffe_columns(np.array([[0.2, 0.3, 0.5]]), "quadratic")[0]] * 2) * \
        np.repeat([1.0, 0.5], 6)
    frame = ref.get_prediction(row[None, :]).summary_frame(alpha=0.05)
    assert point["pi_high"].iloc[0] == pytest.approx(frame["obs_ci_upper"].iloc[0], abs=1e-8)
    assert f.predict({"A": 0.2, "B": 0.3, "C": 0.5, "Temp": 200})["extrapolated"].iloc[0]


def test_formula_models_drop_the_intercept(yarn):
    f = lw.fit_mixture(yarn, "elongation", "x1 + x2 + x3 + x1:x2", NAMES)
    assert f.terms == ("x1", "x2", "x3", "x1:x2")
    with pytest.raises(LevelwiseError, match="unknown factor"):
        lw.fit_mixture(yarn, "elongation", "x1 + x4", NAMES)


@pytest.mark.parametrize("q", [3, 4, 5, 6])
@pytest.mark.parametrize("preset,count", [
    ("scheffe_linear", lambda q: q),
    ("scheffe_quadratic", lambda q: q * (q + 1) // 2),
    ("scheffe_special_cubic", lambda q: q * (q + 1) // 2 + q * (q - 1) * (q - 2) // 6),
    ("scheffe_cubic", lambda q: q + q * (q - 1) + q * (q - 1) * (q - 2) // 6),
])
def test_preset_term_counts(q, preset, count):
    # Scheffé (1958): q, q(q+1)/2, q(q+1)/2 + C(q,3), and q + 2 C(q,2) + C(q,3) = C(q+2, 3) terms.
    names = [f"x{i}" for i in range(q)]
    spec = lw.parse_model(preset, names)
    assert spec.p == count(q) and not spec.has_intercept
