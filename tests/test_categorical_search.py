"""optimize and steepest_path over categorical factors (issue 14). References: statsmodels fits of the same
models, a dense grid over the continuous factors at every level, and Derringer & Suich (1980) desirabilities
written out here."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf

import levelwise as lw
from levelwise import Factor, LevelwiseError

LEVELS = ["north", "east", "south"]
FACTORS = [Factor("A", 10, 20), Factor("B", 0, 4), Factor("Supplier", levels=LEVELS)]


def _data(seed=0):
    d = lw.full_factorial([Factor("A", 10, 20, n_levels=3), Factor("B", 0, 4, n_levels=3),
                           Factor("Supplier", levels=LEVELS)], replicates=2, seed=seed)
    t = d.table[["A", "B", "Supplier"]].copy()
    a, b = (t["A"] - 15) / 5, (t["B"] - 2) / 2
    rng = np.random.default_rng(seed)
    shift = t["Supplier"].map({"north": 0.0, "east": 3.0, "south": -2.0})
    slope = t["Supplier"].map({"north": 1.0, "east": -1.0, "south": 0.0})
    t["y1"] = 50 + 3 * a - 2 * b - 2 * a**2 - b**2 + shift + slope * a + rng.normal(0, 0.5, len(t))
    t["y2"] = 20 - 2 * a + t["Supplier"].map({"north": -1.0, "east": 2.0, "south": 0.0}) + rng.normal(0, 0.5, len(t))
    return t


MODEL1 = "A + B + Supplier + A:Supplier + I(A**2) + I(B**2)"
MODEL2 = "A + Supplier"


def _sm(formula, data, response):
    formula = formula.replace("Supplier", "C(Supplier, Sum(omit=0))")  # levels in the factor's order
    data = data.assign(Supplier=pd.Categorical(data["Supplier"], categories=LEVELS))
    return smf.ols(f"{response} ~ {formula}", data=data).fit()


def test_optimize_over_levels_finds_the_grid_winner():
    data = _data(1)
    fits = {"y1": lw.fit(data, "y1", MODEL1, factors=FACTORS), "y2": lw.fit(data, "y2", MODEL2, factors=FACTORS)}
    goals = {"y1": lw.maximize(40, 70), "y2": lw.minimize(15, 25)}
    found = lw.optimize(fits, goals, seed=0, starts=8)
    # Reference: statsmodels predictions on a 201 x 201 grid per supplier, desirabilities written out
    # (Derringer & Suich 1980): d1 = (y1 - 40)/30, d2 = (25 - y2)/10 clipped to [0, 1], D = sqrt(d1 d2).
    s1, s2 = _sm(MODEL1, data, "y1"), _sm(MODEL2, data, "y2")
    grid_a, grid_b = np.meshgrid(np.linspace(10, 20, 201), np.linspace(0, 4, 201))
    best = {}
    for level in LEVELS:
        frame = pd.DataFrame({"A": grid_a.ravel(), "B": grid_b.ravel(),
                              "Supplier": pd.Categorical([level] * grid_a.size, categories=LEVELS)})
        d1 = np.clip((s1.predict(frame) - 40) / 30, 0, 1)
        d2 = np.clip((25 - s2.predict(frame)) / 10, 0, 1)
        best[level] = float(np.sqrt(d1 * d2).max())
    winner = max(best, key=best.get)
    assert found.winner == {"Supplier": winner}
    assert found.settings["Supplier"] == winner
    assert found.overall >= best[winner] - 1e-6 and found.overall <= best[winner] + 1e-3
    # One row per supplier, each at least its grid maximum, best first.
    table = found.by_level.set_index("Supplier")
    assert list(found.by_level["Supplier"])[0] == winner and set(table.index) == set(LEVELS)
    for level in LEVELS:
        assert table.loc[level, "overall_D"] >= best[level] - 1e-6
    # Predictions at the optimum come from the full fit and agree with statsmodels.
    point = pd.DataFrame({k: [v] for k, v in found.settings.items()})
    point["Supplier"] = pd.Categorical(point["Supplier"], categories=LEVELS)
    assert found.predictions.loc["y1", "mean"] == pytest.approx(float(s1.predict(point).iloc[0]), rel=1e-9)


def test_optimize_region_holds_a_categorical_factor_at_chosen_levels():
    data = _data(2)
    fits = {"y1": lw.fit(data, "y1", MODEL1, factors=FACTORS)}
    found = lw.optimize(fits, {"y1": lw.maximize(40, 70)}, region={"Supplier": ["north", "south"]}, seed=1,
                        starts=4)
    assert set(found.by_level["Supplier"]) == {"north", "south"}
    with pytest.raises(LevelwiseError, match="one of its levels"):
        lw.optimize(fits, {"y1": lw.maximize(40, 70)}, region={"Supplier": "west"})


def test_steepest_path_holds_the_winning_level_and_follows_the_continuous_coefficients():
    data = _data(3)
    fit = lw.fit(data, "y2", "A + B + Supplier", factors=FACTORS)
    ref = _sm("A + B + Supplier", data.assign(A=(data["A"] - 15) / 5, B=(data["B"] - 2) / 2), "y2")
    # Level effects from the sum-to-zero coefficients (statsmodels Sum(omit=0): first level = -sum of the others).
    east, south = ref.params.iloc[1], ref.params.iloc[2]
    effects = {"north": -(east + south), "east": east, "south": south}
    path = lw.steepest_path(fit, step=0.5, steps=4)
    assert path.winner == {"Supplier": max(effects, key=effects.get)}
    got = path.level_effects.set_index("level")["effect"]
    for level, value in effects.items():
        assert got[level] == pytest.approx(value, rel=1e-9)
    # Direction: the coded first-order coefficients, key factor A (largest |b|) moving 0.5 per step.
    b = np.array([ref.params["A"], ref.params["B"]])
    np.testing.assert_allclose(path.direction.to_numpy(), 0.5 * b / np.abs(b).max(), rtol=1e-9)
    assert (path.path["Supplier"] == path.winner["Supplier"]).all()
    frame = path.path[["A", "B", "Supplier"]].assign(A=lambda f: (f["A"] - 15) / 5, B=lambda f: (f["B"] - 2) / 2,
                                                     Supplier=lambda f: pd.Categorical(f["Supplier"], LEVELS))
    np.testing.assert_allclose(path.path["mean"].to_numpy(), ref.predict(frame).to_numpy(), rtol=1e-9)
    descent = lw.steepest_path(fit, ascent=False)
    assert descent.winner == {"Supplier": min(effects, key=effects.get)}


def test_steepest_path_refuses_interactions_with_a_categorical_factor():
    data = _data(3)
    fit = lw.fit(data, "y2", "A + B + Supplier + A:Supplier", factors=FACTORS)
    with pytest.raises(LevelwiseError, match="first-order model"):
        lw.steepest_path(fit)


@pytest.mark.parametrize("level", LEVELS)
def test_slice_with_a_categorical_factor_held_matches_statsmodels(level):
    data = _data(4)
    fit = lw.fit(data, "y1", MODEL1, factors=FACTORS)
    got = lw.slice_grid(fit, "A", "B", {"A": 15.0, "B": 2.0, "Supplier": level}, shape=(6, 5))
    gx, gy = np.meshgrid(got["x"], got["y"])
    frame = pd.DataFrame({"A": gx.ravel(), "B": gy.ravel(), "Supplier": level})
    ref = _sm(MODEL1, data, "y1").get_prediction(frame.assign(
        Supplier=pd.Categorical(frame["Supplier"], LEVELS))).summary_frame(alpha=0.05)  # statsmodels reference
    np.testing.assert_allclose(np.ravel(got["mean"]), ref["mean"], rtol=1e-9)
    np.testing.assert_allclose(np.ravel(got["ci_half"]), ref["mean_ci_upper"] - ref["mean"], rtol=1e-7)
    np.testing.assert_allclose(np.ravel(got["pi_half"]), ref["obs_ci_upper"] - ref["mean"], rtol=1e-7)
    with pytest.raises(LevelwiseError, match="continuous factor"):
        lw.slice_grid(fit, "A", "Supplier", {"A": 15.0, "B": 2.0, "Supplier": level})
