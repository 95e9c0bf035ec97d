"""Surface slices by exact separable polynomial evaluation, against point predictions and statsmodels,
and the one settings check shared by every prediction call.

References: levelwise's own point predictor (``Fit.predict``, itself checked against statsmodels elsewhere) and
statsmodels ``OLS.get_prediction`` (reference library) on a model written in natural units.
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf

from levelwise import Factor, LevelwiseError, fit, slice_grid

NAMES = ["x1", "x2", "x3", "x4", "x5"]


@pytest.fixture(scope="module")
def quadratic_data():
    """An invented, seeded 5-factor data set: a 2^(5-1)-like cube, axial points and centre points, jittered."""
    rng = np.random.default_rng(7)
    cube = rng.choice([-1.0, 1.0], size=(16, 5))
    axial = np.vstack([np.eye(5) * 2, -np.eye(5) * 2])
    coded = np.vstack([cube, axial, np.zeros((4, 5)), rng.uniform(-1.5, 1.5, (6, 5))])
    lows, highs = np.array([10, 0.1, 200, -5, 1]), np.array([30, 0.5, 260, 5, 3])
    natural = (lows + highs) / 2 + coded * (highs - lows) / 2
    data = pd.DataFrame(natural, columns=NAMES)
    data["y"] = (5 + coded @ [1, -2, 0.5, 0.3, 0] + 0.8 * coded[:, 0] * coded[:, 1]
                 - 1.2 * coded[:, 2] ** 2 + rng.normal(0, 0.4, len(coded)))
    factors = [Factor(n, lo, hi) for n, lo, hi in zip(NAMES, lows, highs)]
    return data, factors


def brute_force(result, grid, x, y, settings, level=None):
    xx, yy = np.meshgrid(grid["x"], grid["y"])
    frame = pd.DataFrame({name: np.full(xx.size, settings.get(name, 0.0)) for name in NAMES})
    frame[x], frame[y] = xx.ravel(), yy.ravel()
    return result.predict(frame, level=level), xx.shape


@pytest.mark.parametrize(("x", "y"), [("x1", "x2"), ("x3", "x5"), ("x4", "x1")])
def test_slice_equals_point_predictions(quadratic_data, x, y):
    data, factors = quadratic_data
    result = fit(data, "y", "full_second_order", factors=factors)
    settings = {"x1": 25.0, "x2": 0.2, "x3": 250.0, "x4": -1.0, "x5": 2.7}
    grid = slice_grid(result, x, y, settings, shape=(23, 17))
    assert grid["mean"].shape == (17, 23)
    points, shape = brute_force(result, grid, x, y, settings)
    mean = points["mean"].to_numpy().reshape(shape)
    ci_half = (points["ci_high"] - points["mean"]).to_numpy().reshape(shape)
    pi_half = (points["pi_high"] - points["mean"]).to_numpy().reshape(shape)
    assert np.abs(grid["mean"] - mean).max() < 1e-10  # reference: point predictions, same fit
    assert np.abs(grid["ci_half"] - ci_half).max() < 1e-10
    assert np.abs(grid["pi_half"] - pi_half).max() < 1e-10
    # the axes span each factor's range (natural units)
    j = NAMES.index(x)
    assert grid["x"][[0, -1]] == pytest.approx([factors[j].low, factors[j].high])


def test_slice_of_a_cubic_model_with_a_three_factor_term(quadratic_data):
    data, factors = quadratic_data
    model = "x1 + x2 + x3 + x1:x2:x3 + I(x1**2) + I(x1**3) + I(x2**2):x3"
    result = fit(data, "y", model, factors=factors)
    settings = {"x3": 215.0, "x4": 0.0, "x5": 2.0}
    grid = slice_grid(result, "x1", "x2", settings, shape=(9, 11), level=0.9)
    points, shape = brute_force(result, grid, "x1", "x2", settings, level=0.9)
    assert np.abs(grid["mean"] - points["mean"].to_numpy().reshape(shape)).max() < 1e-10  # point predictions
    ci_half = (points["ci_high"] - points["mean"]).to_numpy().reshape(shape)
    assert np.abs(grid["ci_half"] - ci_half).max() < 1e-10  # point predictions at level 0.9
    pi_half = (points["pi_high"] - points["mean"]).to_numpy().reshape(shape)
    assert np.abs(grid["pi_half"] - pi_half).max() < 1e-10


def test_slice_against_statsmodels_get_prediction(quadratic_data):
    data, factors = quadratic_data
    result = fit(data, "y", "full_second_order", factors=factors)
    terms = NAMES + [f"{a}:{b}" for i, a in enumerate(NAMES) for b in NAMES[i + 1:]] + [f"I({n}**2)" for n in NAMES]
    reference = smf.ols("y ~ " + " + ".join(terms), data=data).fit()
    settings = {"x3": 230.0, "x4": 2.5, "x5": 1.5}
    grid = slice_grid(result, "x1", "x2", settings, shape=(5, 4))
    for i, j in [(0, 0), (3, 4), (1, 2), (2, 1)]:
        point = pd.DataFrame({"x1": [grid["x"][j]], "x2": [grid["y"][i]], **{k: [v] for k, v in settings.items()}})
        frame = reference.get_prediction(point).summary_frame(alpha=0.05)
        # statsmodels get_prediction: mean, CI and PI (obs) bounds
        assert grid["mean"][i, j] == pytest.approx(frame["mean"].iloc[0], rel=1e-9)
        assert grid["ci_half"][i, j] == pytest.approx(frame["mean_ci_upper"].iloc[0] - frame["mean"].iloc[0], rel=1e-9)
        assert grid["pi_half"][i, j] == pytest.approx(frame["obs_ci_upper"].iloc[0] - frame["mean"].iloc[0], rel=1e-9)


def test_slice_of_a_saturated_fit_has_a_mean_but_no_intervals(data_dir):
    data = pd.read_csv(data_dir / "SPLETT3.csv")
    result = fit(data, "Y", "X1*X2*X3", factors=[Factor(n, -1, 1) for n in ("X1", "X2", "X3")])
    grid = slice_grid(result, "X1", "X2", {"X3": 1}, shape=(2, 2))
    # e-Handbook 5.6.1: a saturated fit reproduces the data: run with X1=-1, X2=-1, X3=+1 has Y = 1.51
    expected = data.query("X1 == -1 and X2 == -1 and X3 == 1")["Y"].iloc[0]
    assert grid["mean"][0, 0] == pytest.approx(expected, abs=1e-12)
    assert np.isnan(grid["ci_half"]).all()  # no residual df: intervals not available (common practice)


def test_every_prediction_call_refuses_missing_settings_alike(quadratic_data):
    """One settings check: {} is refused by slice, refresh, predict, trace and traces, naming the factors."""
    data, factors = quadratic_data
    result = fit(data, "y", "full_second_order", factors=factors)
    calls = {
        "slice": lambda s: slice_grid(result, "x1", "x4", s, shape=(6, 5)),
        "refresh": lambda s: result.refresh(s),
        "predict": lambda s: result.predict(s),
        "trace": lambda s: result.trace("x1", s),
        "traces": lambda s: result.traces(s),
    }
    for call in calls.values():
        with pytest.raises(LevelwiseError, match=r"missing factor\(s\) \[('x1', )?'x2', 'x3'"):
            call({})  # every call: the same refusal
    # The swept factors may be left out; every other factor the model uses must be given.
    held = {"x2": 0.3, "x3": 240.0, "x5": 2.0}
    grid = slice_grid(result, "x1", "x4", held, shape=(6, 5))
    points, shape = brute_force(result, grid, "x1", "x4", held)
    assert np.abs(grid["mean"] - points["mean"].to_numpy().reshape(shape)).max() < 1e-10  # point predictions
    with pytest.raises(LevelwiseError, match=r"missing factor\(s\) \['x5'\]"):
        slice_grid(result, "x1", "x4", {"x2": 0.3, "x3": 240.0}, shape=(6, 5))
    # points must be an integer from 2 to 100000 everywhere.
    for call in (lambda: result.trace("x1", dict(held, x1=20.0, x4=0.0), points=2.7),
                 lambda: result.traces(dict(held, x1=20.0, x4=0.0), points=2.7),
                 lambda: result.refresh(dict(held, x1=20.0, x4=0.0), points=2.7)):
        with pytest.raises(LevelwiseError, match="'points' parameter must be an integer"):
            call()


def test_predict_needs_only_the_factors_the_model_uses(quadratic_data):
    data, factors = quadratic_data
    result = fit(data, "y", "x1 + x2 + x1:x2", factors=factors)  # x3..x5 are factors of the fit, unused
    small = result.predict({"x1": 20.0, "x2": 0.3}).iloc[0]
    full = result.predict({"x1": 20.0, "x2": 0.3, "x3": 201.0, "x4": 4.0, "x5": 1.1}).iloc[0]
    reference = smf.ols("y ~ x1 * x2", data=data).fit()  # statsmodels formula OLS on the same runs
    expected = reference.get_prediction(pd.DataFrame({"x1": [20.0], "x2": [0.3]})).summary_frame(alpha=0.05)
    assert small["mean"] == pytest.approx(expected["mean"].iloc[0], rel=1e-9)
    assert small["pi_high"] == pytest.approx(expected["obs_ci_upper"].iloc[0], rel=1e-9)
    assert small["mean"] == full["mean"] and small["pi_high"] == full["pi_high"]
    assert result.refresh({"x1": 20.0, "x2": 0.3}, points=5)["point"]["mean"] == pytest.approx(small["mean"], rel=1e-12)
    with pytest.raises(LevelwiseError, match=r"names \['x9'\]"):
        result.predict({"x1": 20.0, "x2": 0.3, "x9": 1.0})


def test_slice_bad_input(quadratic_data):
    data, factors = quadratic_data
    result = fit(data, "y", "full_second_order", factors=factors)
    with pytest.raises(LevelwiseError, match="'x' parameter must be one of"):
        slice_grid(result, "nope", "x2", {})
    with pytest.raises(LevelwiseError, match="two different factors"):
        slice_grid(result, "x2", "x2", {})
    with pytest.raises(LevelwiseError, match="'shape'"):
        slice_grid(result, "x1", "x2", {}, shape=(1, 5))
    with pytest.raises(LevelwiseError, match="'level'"):
        slice_grid(result, "x1", "x2", {}, level=1.0)
    with pytest.raises(LevelwiseError, match="factor 'x3' must be a finite number"):
        slice_grid(result, "x1", "x2", {"x3": float("nan"), "x4": 0.0, "x5": 2.0})
