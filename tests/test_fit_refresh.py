"""The interactive path ``Fit.refresh``: the same numbers as the DataFrame API and as statsmodels.

``Fit.refresh`` evaluates traces and slices as exact polynomials on cached grids; these tests check it
against two independent computations: ``Fit.predict`` at every grid point (the engine's model rows,
one per point, not the polynomials) and statsmodels ``get_prediction`` on model rows built here by hand.
Exclusions (a rank-one downdate)
are checked against a fit from scratch on the remaining runs and against statsmodels.
"""

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from levelwise import Factor, LevelwiseError, fit

FACTORS = [Factor("A", 10, 30), Factor("B", 0.5, 2.5), Factor("C", 100, 300), Factor("D", -5, 5),
           Factor("E", 1, 2)]
SETTINGS = {"A": 14.0, "B": 2.2, "C": 180.0, "D": 1.5, "E": 1.9}


def coded_of(frame, factors):
    return np.column_stack([(frame[f.name].to_numpy(float) - f.center) / f.half_range for f in factors])


def quadratic_rows(coded):
    """Full quadratic model rows built by hand (intercept, linear, two-factor products, squares)."""
    k = coded.shape[1]
    cols = [np.ones(len(coded))] + [coded[:, i] for i in range(k)]
    cols += [coded[:, i] * coded[:, j] for i, j in itertools.combinations(range(k), 2)]
    cols += [coded[:, i] ** 2 for i in range(k)]
    return np.column_stack(cols)


def point_grid(ours, x, y, settings, xs, ys):
    """Fit.predict at every point of the (ys, xs) grid: model rows, not the slice polynomials."""
    gx, gy = np.meshgrid(xs, ys)
    frame = pd.DataFrame({name: np.full(gx.size, value) for name, value in settings.items()})
    frame[x], frame[y] = gx.ravel(), gy.ravel()
    table = ours.predict(frame)
    mean = table["mean"].to_numpy()
    return {"mean": mean.reshape(gx.shape), "ci_half": (table["ci_high"].to_numpy() - mean).reshape(gx.shape),
            "pi_half": (table["pi_high"].to_numpy() - mean).reshape(gx.shape)}


@pytest.fixture(scope="module")
def study():
    """40 invented runs spread at random over the region (not orthogonal), full quadratic in 5 factors."""
    rng = np.random.default_rng(31)
    data = pd.DataFrame({f.name: rng.uniform(f.low, f.high, 40) for f in FACTORS})
    coded = coded_of(data, FACTORS)
    data["y"] = quadratic_rows(coded) @ np.linspace(2.0, -1.0, 21) + rng.normal(0, 0.3, 40)
    ours = fit(data, "y", "full_second_order", factors=FACTORS)
    reference = sm.OLS(data["y"].to_numpy(), quadratic_rows(coded)).fit()  # statsmodels OLS
    return data, ours, reference


def statsmodels_bands(reference, frame):
    """Mean, CI and PI half-widths from statsmodels get_prediction at the rows of *frame*."""
    table = reference.get_prediction(quadratic_rows(coded_of(frame, FACTORS))).summary_frame(alpha=0.05)
    mean = table["mean"].to_numpy()
    return mean, table["mean_ci_upper"].to_numpy() - mean, table["obs_ci_upper"].to_numpy() - mean


def test_point_equals_predict_and_statsmodels(study):
    data, ours, reference = study
    got = ours.refresh(SETTINGS, points=None)
    assert got["traces"] is None and got["slice"] is None
    row = ours.predict(SETTINGS).iloc[0]
    for key in ("mean", "ci_low", "ci_high", "pi_low", "pi_high", "leverage"):
        assert got["point"][key] == pytest.approx(row[key], rel=1e-12, abs=1e-12)
    assert got["point"]["extrapolated"] is bool(row["extrapolated"]) is False
    mean, ci, pi = statsmodels_bands(reference, pd.DataFrame([SETTINGS]))  # statsmodels get_prediction
    assert got["point"]["mean"] == pytest.approx(mean[0], abs=1e-9)
    assert got["point"]["ci_high"] - got["point"]["mean"] == pytest.approx(ci[0], abs=1e-9)
    assert got["point"]["pi_low"] == pytest.approx(mean[0] - pi[0], abs=1e-9)


def test_traces_equal_trace_and_statsmodels(study):
    data, ours, reference = study
    got = ours.refresh(SETTINGS, points=23)["traces"]
    batch = ours.traces(SETTINGS, points=23)
    assert list(got) == [f.name for f in FACTORS]
    for f in FACTORS:
        single = ours.trace(f.name, SETTINGS, points=23)
        frame = pd.DataFrame({name: np.full(23, value) for name, value in SETTINGS.items()})
        frame[f.name] = np.linspace(f.low, f.high, 23)
        rows = ours.predict(frame)  # a model row per point (not the trace polynomials)
        for key in ("x", "mean", "ci_half", "pi_half"):
            assert np.max(np.abs(got[f.name][key] - single[key])) < 1e-12
            assert np.max(np.abs(got[f.name][key] - batch[f.name][key])) < 1e-12
        assert np.max(np.abs(got[f.name]["mean"] - rows["mean"].to_numpy())) < 1e-12
        assert np.max(np.abs(got[f.name]["pi_half"] - (rows["pi_high"] - rows["mean"]).to_numpy())) < 1e-12
        mean, ci, pi = statsmodels_bands(reference, frame)  # statsmodels get_prediction
        assert np.max(np.abs(got[f.name]["mean"] - mean)) < 1e-9
        assert np.max(np.abs(got[f.name]["ci_half"] - ci)) < 1e-9
        assert np.max(np.abs(got[f.name]["pi_half"] - pi)) < 1e-9


@pytest.mark.parametrize("axes", [("A", "B"), ("E", "C")])
def test_slice_equals_point_predictions_and_statsmodels(study, axes):
    data, ours, reference = study
    x, y = axes
    got = ours.refresh(SETTINGS, points=None, slice_axes=axes, shape=(13, 9))["slice"]
    assert got["mean"].shape == (9, 13)
    same = ours.slice(x, y, SETTINGS, shape=(13, 9))
    alone = ours.refresh(SETTINGS, points=None, slice_axes=axes, shape=(13, 9), point=False)
    assert alone["point"] is None and np.array_equal(alone["slice"]["pi_half"], got["pi_half"])
    for key in ("mean", "ci_half", "pi_half"):
        assert np.max(np.abs(got[key] - same[key])) < 1e-12
    pointwise = point_grid(ours, x, y, SETTINGS, got["x"], got["y"])  # a model row per grid point
    for key in ("mean", "ci_half", "pi_half"):
        assert np.max(np.abs(got[key] - pointwise[key])) < 1e-12
    fx, fy = (next(f for f in FACTORS if f.name == n) for n in axes)
    assert np.array_equal(got["x"], np.linspace(fx.low, fx.high, 13))
    assert np.array_equal(got["y"], np.linspace(fy.low, fy.high, 9))
    gx, gy = np.meshgrid(got["x"], got["y"])
    frame = pd.DataFrame({name: np.full(gx.size, value) for name, value in SETTINGS.items()})
    frame[x], frame[y] = gx.ravel(), gy.ravel()
    mean, ci, pi = statsmodels_bands(reference, frame)  # statsmodels get_prediction
    assert np.max(np.abs(got["mean"].ravel() - mean)) < 1e-9
    assert np.max(np.abs(got["ci_half"].ravel() - ci)) < 1e-9
    assert np.max(np.abs(got["pi_half"].ravel() - pi)) < 1e-9


def test_traces_of_many_points_equal_predict_and_statsmodels(study):
    """10,000 points per trace: past the plan's block_limit each trace is one product with its own grid's basis
    (not one block-diagonal basis of all traces); the same numbers as a model row per point and statsmodels."""
    data, ours, reference = study
    plan = ours.engine.plan
    assert (5 * (3 + 6) + 2) * (5 * 10_000 + 1) > plan.block_limit >= (5 * (3 + 6) + 2) * (5 * 50 + 1)
    got = ours.refresh(SETTINGS, points=10_000)
    assert got["point"]["mean"] == pytest.approx(ours.predict(SETTINGS)["mean"].iloc[0], rel=1e-12)
    for f in FACTORS:
        frame = pd.DataFrame({name: np.full(10_000, value) for name, value in SETTINGS.items()})
        frame[f.name] = np.linspace(f.low, f.high, 10_000)
        rows = ours.predict(frame)  # a model row per point (not the trace polynomials)
        assert np.max(np.abs(got["traces"][f.name]["mean"] - rows["mean"].to_numpy())) < 1e-11
        ci = (rows["ci_high"] - rows["mean"]).to_numpy()
        assert np.max(np.abs(got["traces"][f.name]["ci_half"] - ci)) < 1e-11
        mean, ci, pi = statsmodels_bands(reference, frame.iloc[::499])  # statsmodels get_prediction
        assert np.max(np.abs(got["traces"][f.name]["mean"][::499] - mean)) < 1e-9
        assert np.max(np.abs(got["traces"][f.name]["pi_half"][::499] - pi)) < 1e-9


def test_cubic_and_three_factor_terms(study):
    """Powers above 2 and a three-factor product go through the same exact polynomial evaluation."""
    data, _, _ = study
    ours = fit(data, "y", "A + B + C + A:B:C + I(A**3) + I(B**2) + A:C", factors=FACTORS[:3])
    settings = {"A": 27.0, "B": 0.9, "C": 120.0}
    got = ours.refresh(settings, points=11, slice_axes=("B", "A"), shape=(6, 7))
    coded = coded_of(data, FACTORS[:3])
    a, b, c = coded.T
    exog = np.column_stack([np.ones(len(a)), a, b, c, a * b * c, a**3, b**2, a * c])
    reference = sm.OLS(data["y"].to_numpy(), exog).fit()  # statsmodels OLS
    for f in FACTORS[:3]:
        frame = pd.DataFrame({name: np.full(11, value) for name, value in settings.items()})
        frame[f.name] = np.linspace(f.low, f.high, 11)
        a, b, c = coded_of(frame, FACTORS[:3]).T
        rows = np.column_stack([np.ones(11), a, b, c, a * b * c, a**3, b**2, a * c])
        table = reference.get_prediction(rows).summary_frame(alpha=0.05)  # statsmodels get_prediction
        assert np.max(np.abs(got["traces"][f.name]["mean"] - table["mean"].to_numpy())) < 1e-9
        assert np.max(np.abs(got["traces"][f.name]["pi_half"]
                             - (table["obs_ci_upper"] - table["mean"]).to_numpy())) < 1e-9
    same = ours.slice("B", "A", settings, shape=(6, 7))
    pointwise = point_grid(ours, "B", "A", settings, same["x"], same["y"])  # a model row per grid point
    for key in ("mean", "ci_half", "pi_half"):
        assert np.max(np.abs(got["slice"][key] - pointwise[key])) < 1e-12


def test_level_and_extrapolation(study):
    data, ours, reference = study
    got = ours.refresh(SETTINGS, level=0.9, points=None)["point"]
    row = ours.predict(SETTINGS, level=0.9).iloc[0]
    assert got["pi_high"] == pytest.approx(row["pi_high"], rel=1e-12)
    table = reference.get_prediction(quadratic_rows(coded_of(pd.DataFrame([SETTINGS]), FACTORS)))
    assert got["ci_low"] == pytest.approx(table.summary_frame(alpha=0.10)["mean_ci_lower"][0], abs=1e-9)
    outside = dict(SETTINGS, C=320.0)  # C runs from 100 to 300
    assert ours.refresh(outside, points=None)["point"]["extrapolated"] is True
    assert bool(ours.predict(outside)["extrapolated"].iloc[0]) is True


@pytest.mark.parametrize(
    "settings, named",
    [
        (dict(SETTINGS, B=float("nan")), "'B'"),
        (dict(SETTINGS, C=float("inf")), "'C'"),
        (dict(SETTINGS, D="warm"), "'D'"),
        (dict(SETTINGS, E=None), "'E'"),
        ({k: v for k, v in SETTINGS.items() if k != "A"}, "'A'"),
        (dict(SETTINGS, Speed=3.0), "'Speed'"),
        ([14.0, 2.2, 180.0, 1.5, 1.9], "dict"),
    ],
)
def test_bad_settings_name_the_factor(study, settings, named):
    _, ours, _ = study
    with pytest.raises(LevelwiseError, match=named):
        ours.refresh(settings)


def test_bad_parameters(study):
    _, ours, _ = study
    with pytest.raises(LevelwiseError, match="'level'"):
        ours.refresh(SETTINGS, level=1.5)
    with pytest.raises(LevelwiseError, match="'points'"):
        ours.refresh(SETTINGS, points=1)
    with pytest.raises(LevelwiseError, match="'x' parameter"):
        ours.refresh(SETTINGS, slice_axes=("Q", "B"))
    with pytest.raises(LevelwiseError, match="'shape'"):
        ours.refresh(SETTINGS, slice_axes=("A", "B"), shape=(1, 5))


def test_categorical_fit_takes_the_general_path():
    rng = np.random.default_rng(9)
    data = pd.DataFrame({"Temp": np.tile([-1.0, 1.0, 0.0, 0.5], 6), "Speed": np.tile([0.0, 1.0, 2.0], 8),
                         "Supplier": np.repeat(["north", "east", "west"], 8)})
    data["y"] = 4 + data.Temp - 0.5 * data.Speed + (data.Supplier == "east") + rng.normal(0, 0.1, len(data))
    ours = fit(data, "y", "Temp * Supplier + Speed")
    settings = {"Temp": 0.25, "Speed": 1.5, "Supplier": "west"}
    got = ours.refresh(settings, points=5, slice_axes=("Temp", "Speed"), shape=(4, 3))
    row = ours.predict(settings).iloc[0]
    assert got["point"]["mean"] == pytest.approx(row["mean"], rel=1e-12)
    assert got["traces"]["Supplier"]["mean"] == pytest.approx(ours.trace("Supplier", settings)["mean"], rel=1e-12)
    assert got["slice"]["pi_half"] == pytest.approx(ours.slice("Temp", "Speed", settings, (4, 3))["pi_half"])
    with pytest.raises(LevelwiseError, match="'Supplier'"):
        ours.refresh(dict(settings, Supplier="south"))


def test_exclusion_equals_fit_without_the_run(study):
    data, ours, _ = study
    # Rows 5 and 17 of the data (no run column) are run ids 6 and 18.
    reduced = ours.exclude(6, "invented reason").exclude(18, "second")
    rest = data.drop(index=[data.index[5], data.index[17]])
    fresh = fit(rest, "y", "full_second_order", factors=FACTORS)
    reference = sm.OLS(rest["y"].to_numpy(), quadratic_rows(coded_of(rest, FACTORS))).fit()  # statsmodels OLS
    assert reduced.s == pytest.approx(np.sqrt(reference.scale), rel=1e-10)
    assert reduced.s == pytest.approx(fresh.s, rel=1e-12)
    assert np.max(np.abs(reduced.beta - fresh.beta)) < 1e-10
    assert reduced.coefficients["std_error"].to_numpy() == pytest.approx(fresh.coefficients["std_error"], rel=1e-10)
    assert reduced.sse == pytest.approx(float(reduced.residuals.to_numpy() @ reduced.residuals.to_numpy()), rel=1e-12)
    point = reduced.refresh(SETTINGS, points=None)["point"]
    mean, ci, pi = statsmodels_bands(reference, pd.DataFrame([SETTINGS]))  # statsmodels get_prediction
    assert point["mean"] == pytest.approx(mean[0], abs=1e-9)
    assert point["pi_high"] - point["mean"] == pytest.approx(pi[0], abs=1e-9)
    back = reduced.include(6).include(18)
    assert back.s == pytest.approx(ours.s, rel=1e-10)
    assert np.max(np.abs(back.beta - ours.beta)) < 1e-10
    with pytest.raises(ValueError):
        reduced.beta[0] = 0.0  # the fit stays immutable
