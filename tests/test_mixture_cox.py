"""Effect traces along Cox directions (Cox 1971, "A note on polynomial response functions for mixtures",
Biometrika 58, 155-159): component i moves from a reference blend while the others keep their relative
proportions. Checked against statsmodels get_prediction at blends computed by hand (written out below).
Data: the yarn elongation example, FROM MEMORY (tests/data/SOURCES.md)."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import levelwise as lw
from levelwise import LevelwiseError

DATA = Path(__file__).parent / "data" / "yarn_elongation.csv"
NAMES = ["x1", "x2", "x3"]


def quad(x):
    x = np.atleast_2d(x)
    return np.column_stack([x[:, 0], x[:, 1], x[:, 2], x[:, 0] * x[:, 1], x[:, 0] * x[:, 2], x[:, 1] * x[:, 2]])


@pytest.fixture(scope="module")
def setup():
    yarn = pd.read_csv(DATA)
    f = lw.fit_mixture(yarn, "elongation", "scheffe_quadratic", NAMES)
    ref = sm.OLS(yarn["elongation"].to_numpy(), quad(yarn[NAMES].to_numpy())).fit()
    return f, ref


# Reference blend (0.5, 0.3, 0.2); 5 points over each component's whole range [0, 1].
HAND = {
    # x1 = t; x2 = 0.3 (1 - t) / 0.5; x3 = 0.2 (1 - t) / 0.5
    "x1": [(0, 0.6, 0.4), (0.25, 0.45, 0.3), (0.5, 0.3, 0.2), (0.75, 0.15, 0.1), (1, 0, 0)],
    # x2 = t; x1 = 0.5 (1 - t) / 0.7; x3 = 0.2 (1 - t) / 0.7
    "x2": [(5 / 7, 0, 2 / 7), (15 / 28, 1 / 4, 6 / 28), (5 / 14, 1 / 2, 2 / 14), (5 / 28, 3 / 4, 2 / 28), (0, 1, 0)],
    # x3 = t; x1 = 0.5 (1 - t) / 0.8; x2 = 0.3 (1 - t) / 0.8
    "x3": [(5 / 8, 3 / 8, 0), (15 / 32, 9 / 32, 1 / 4), (5 / 16, 3 / 16, 1 / 2), (5 / 32, 3 / 32, 3 / 4), (0, 0, 1)],
}


def test_cox_traces_match_predictions_at_hand_computed_blends(setup):
    f, ref = setup
    reference = {"x1": 0.5, "x2": 0.3, "x3": 0.2}
    traces = lw.cox_traces(f, reference, points=5)
    for i, name in enumerate(NAMES):
        blends = np.array(HAND[name], dtype=float)
        tr = traces[name]
        assert tr["blends"] == pytest.approx(blends, abs=1e-12)
        assert tr["x"] == pytest.approx(blends[:, i] - reference[name], abs=1e-12)
        frame = ref.get_prediction(quad(blends)).summary_frame(alpha=0.05)
        assert tr["mean"] == pytest.approx(frame["mean"].to_numpy(), abs=1e-8)
        assert tr["ci_half"] == pytest.approx((frame["mean_ci_upper"] - frame["mean"]).to_numpy(), abs=1e-8)
        assert tr["pi_half"] == pytest.approx((frame["obs_ci_upper"] - frame["mean"]).to_numpy(), abs=1e-8)
    # every curve passes through the reference blend at zero change
    at_ref = f.predict(reference)["mean"].iloc[0]
    for name in NAMES:
        zero = np.flatnonzero(np.abs(traces[name]["x"]) < 1e-12)
        if len(zero):
            assert traces[name]["mean"][zero[0]] == pytest.approx(at_ref, abs=1e-10)


def test_trace_range_stops_at_the_bounds():
    # Region A >= 0.6. From (0.7, 0.2, 0.1): A runs over [0.6, 1]; B may rise until A = 0.7 (1 - t) / 0.8 = 0.6,
    # i.e. t = 1 - 0.48 / 0.7 = 11/35 (hand computed); C until A = 0.7 (1 - t) / 0.9 = 0.6, t = 1 - 0.54/0.7 = 8/35.
    comps = [lw.Component("A", 0.6), lw.Component("B"), lw.Component("C")]
    d = lw.simplex_lattice(comps, 2, randomize=False)
    data = d.table[["A", "B", "C"]].copy()
    data["y"] = np.random.default_rng(3).normal(size=len(data))
    f = lw.fit_mixture(data, "y", "scheffe_linear", comps)
    tr = f.traces({"A": 0.7, "B": 0.2, "C": 0.1}, points=3)
    assert tr["A"]["amount"] == pytest.approx([0.6, 0.8, 1.0])
    assert tr["B"]["amount"][[0, -1]] == pytest.approx([0.0, 11 / 35])
    assert tr["C"]["amount"][[0, -1]] == pytest.approx([0.0, 8 / 35])
    # at B = 11/35: A = 0.7 (24/35) / 0.8 = 0.6 and C = 0.1 (24/35) / 0.8 = 3/35 (hand computed)
    assert tr["B"]["blends"][-1] == pytest.approx([0.6, 11 / 35, 3 / 35], abs=1e-12)
    # every blend on every trace is inside the region and sums to 1
    for name in ("A", "B", "C"):
        lw.Mixture(comps).check_blends(tr[name]["blends"])


def test_refresh_on_a_mixture_fit(setup):
    f, _ = setup
    out = f.refresh({"x1": 0.2, "x2": 0.3, "x3": 0.5}, points=7)
    assert out["point"]["mean"] == pytest.approx(f.predict({"x1": 0.2, "x2": 0.3, "x3": 0.5})["mean"].iloc[0])
    assert set(out["traces"]) == set(NAMES) and len(out["traces"]["x2"]["mean"]) == 7
    with pytest.raises(LevelwiseError, match="slice"):
        f.refresh({"x1": 0.2, "x2": 0.3, "x3": 0.5}, slice_axes=("x1", "x2"))
    with pytest.raises(LevelwiseError, match="sum"):
        f.traces({"x1": 0.2, "x2": 0.3, "x3": 0.4})


def test_process_factor_trace_and_total_100():
    mix = lw.simplex_centroid([lw.Component("A", units="%"), lw.Component("B", units="%"),
                               lw.Component("C", units="%")], total=100, randomize=False)
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190)], randomize=False)
    data = d.table[["A", "B", "C", "Temp"]].copy()
    data["y"] = np.random.default_rng(9).normal(size=len(data))
    f = lw.fit_mixture(data, "y", ("scheffe_linear", "main_effects"), mix.mixture,
                       process=[lw.Factor("Temp", 150, 190)])
    tr = lw.cox_traces(f, {"A": 50, "B": 30, "C": 20, "Temp": 170}, points=5)
    # x is the change of the proportion: (t - 50) / 100 for A over t in [0, 100]
    assert tr["A"]["x"] == pytest.approx([-0.5, -0.25, 0, 0.25, 0.5])
    assert tr["Temp"]["x"] == pytest.approx([150, 160, 170, 180, 190])
    hand = pd.DataFrame({"A": [50.0] * 5, "B": [30.0] * 5, "C": [20.0] * 5, "Temp": [150, 160, 170, 180, 190]})
    assert tr["Temp"]["mean"] == pytest.approx(f.predict(hand)["mean"].to_numpy(), abs=1e-10)


def test_fast_refresh_equals_the_general_path(setup):
    # A dict of plain floats takes the fast path; numpy scalars take the general (checked) path: same numbers.
    f, _ = setup
    plain = f.refresh({"x1": 0.2, "x2": 0.3, "x3": 0.5}, points=9)
    general = f.refresh({"x1": np.float64(0.2), "x2": np.float64(0.3), "x3": np.float64(0.5)}, points=9)
    for key in ("mean", "ci_low", "pi_high", "leverage"):
        assert plain["point"][key] == pytest.approx(general["point"][key], abs=1e-12)
    for name in NAMES:
        for key in ("x", "amount", "mean", "ci_half", "pi_half"):
            assert plain["traces"][name][key] == pytest.approx(general["traces"][name][key], abs=1e-12)
    # a blend that is not valid is refused on both paths
    with pytest.raises(LevelwiseError, match="sum"):
        f.refresh({"x1": 0.2, "x2": 0.3, "x3": 0.6})


@pytest.mark.parametrize("bad, named", [
    ({"A": float("nan"), "B": 0.4, "C": 0.3, "Temp": 175.0}, "'A'"),
    ({"A": float("inf"), "B": 0.4, "C": 0.3, "Temp": 175.0}, "'A'"),
    ({"A": 0.3, "B": 0.4, "C": 0.3, "Temp": float("nan")}, "'Temp'"),
    ({"A": 0.3, "B": 0.4, "C": 0.3, "Temp": float("inf")}, "'Temp'"),
    ({"A": 0.05, "B": 0.45, "C": 0.5, "Temp": 175.0}, "A = 0.05"),  # below A's lower bound 0.1
    ({"A": 0.3, "B": 0.4, "C": 0.3}, "Temp"),  # a process factor missing
    ({"A": 0.3, "B": 0.4, "C": 0.3, "Temp": 175.0, "D": 0.0}, "'D'"),  # a name the model does not have
    ({"A": 0.3, "B": 0.4, "C": 0.4, "Temp": 175.0}, "sum"),
    ({"A": 0.3, "B": 0.4, "C": 0.3, "Temp": 10**400}, "'Temp'"),  # an int beyond the float range
    ({"A": 10**400, "B": 0.4, "C": 0.3, "Temp": 175.0}, "'A'"),
])
def test_fast_refresh_refuses_what_the_checked_path_refuses(bad, named):
    # The slider fast path takes only dicts of plain finite numbers that make a valid blend; anything else goes to
    # the checked path, whose error names the component or factor.
    comps = [lw.Component("A", 0.1), lw.Component("B", 0.2), lw.Component("C")]
    mix = lw.simplex_lattice(comps, 2, randomize=False)
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190)], randomize=False)
    data = d.table[["A", "B", "C", "Temp"]].copy()
    data["y"] = np.random.default_rng(5).normal(size=len(data)) + data["A"] * 3
    f = lw.fit_mixture(data, "y", ("scheffe_linear", "main_effects"), mix.mixture,
                       process=[lw.Factor("Temp", 150, 190)])
    with pytest.raises(LevelwiseError, match=named):
        f.refresh(bad, points=5)
    # whole numbers are plain numbers too: the same event as the same blend in floats
    ints = f.refresh({"A": 0.2, "B": 0.8, "C": 0, "Temp": 170}, points=5)
    floats = f.refresh({"A": 0.2, "B": 0.8, "C": 0.0, "Temp": 170.0}, points=5)
    assert ints["point"] == floats["point"]


def test_fast_refresh_with_process_factor_and_pseudo_components():
    comps = [lw.Component("A", 0.1), lw.Component("B", 0.2), lw.Component("C")]
    mix = lw.simplex_lattice(comps, 3, randomize=False)  # 10 blends x 2 temperatures, 12 terms
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190)], randomize=False)
    data = d.table[["A", "B", "C", "Temp"]].copy()
    data["y"] = np.random.default_rng(12).normal(size=len(data)) + data["A"] * 3
    f = lw.fit_mixture(data, "y", ("scheffe_quadratic", "main_effects"), mix.mixture,
                       process=[lw.Factor("Temp", 150, 190)], pseudo=True)
    blend = {"A": 0.3, "B": 0.4, "C": 0.3, "Temp": 175.0}
    fast = f.refresh(blend, points=6)
    assert np.isfinite(fast["point"]["pi_high"])
    general = f.refresh({k: np.float64(v) for k, v in blend.items()}, points=6)
    assert fast["point"]["pi_high"] == pytest.approx(general["point"]["pi_high"], abs=1e-12)
    for name in ("A", "B", "C", "Temp"):
        assert fast["traces"][name]["mean"] == pytest.approx(general["traces"][name]["mean"], abs=1e-12)
    assert f.refresh({**blend, "Temp": 200.0}, points=None)["point"]["extrapolated"]


def special_cubic(x):
    """Scheffé special cubic in four components, written out by hand."""
    pairs = [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)]
    triples = [(0, 1, 2), (0, 1, 3), (0, 2, 3), (1, 2, 3)]
    return np.column_stack([x[:, i] for i in range(4)] + [x[:, i] * x[:, j] for i, j in pairs]
                           + [x[:, i] * x[:, j] * x[:, k] for i, j, k in triples])


def hand_cox_range(r, i, lows, highs):
    """The others' shares and the range of component i's amount t along its Cox line from r (Cox 1971:
    x_j = r_j (1 - t) / (1 - r_i); equal shares from a pure blend): each bound L_j <= s_j (1 - t) <= U_j solved
    for t by hand, as is L_i <= t <= U_i."""
    rest = 1.0 - r[i]
    share = np.array([0.0 if j == i else (r[j] / rest if rest > 0 else 1.0 / 3.0) for j in range(4)])
    lo, hi = lows[i], highs[i]
    for j in range(4):
        if share[j] > 0:  # L_j <= s_j (1 - t) <= U_j
            hi = min(hi, 1.0 - lows[j] / share[j])
            lo = max(lo, 1.0 - highs[j] / share[j])
    return share, lo, hi


@pytest.mark.parametrize("reference", [(1.0, 0.0, 0.0, 0.0), (0.6, 0.4, 0.0, 0.0), (0.35, 0.25, 0.3, 0.1)])
def test_special_cubic_traces_from_a_vertex_an_edge_and_inside_a_bounded_region(reference):
    # Four components with lower and upper bounds where the region allows the reference; seeded invented response;
    # statsmodels OLS without an intercept on hand-written Scheffé columns is the reference.
    bounded = reference[3] > 0
    lows = [0.3, 0.05, 0.0, 0.0] if bounded else [0.0] * 4
    highs = [0.7, 0.6, 0.5, 0.12] if bounded else [1.0] * 4
    comps = [lw.Component(n, lo, hi) for n, lo, hi in zip("ABCD", lows, highs)]
    mixture = lw.Mixture(comps)
    rng = np.random.default_rng(5)
    x = mixture.sample(30, rng)
    y = special_cubic(x) @ np.linspace(3.0, -2.0, 14) + rng.normal(0, 0.2, len(x))  # invented
    data = pd.DataFrame(x, columns=list("ABCD")).assign(y=y)
    f = lw.fit_mixture(data, "y", "scheffe_special_cubic", mixture)
    ref = sm.OLS(y, special_cubic(x)).fit()
    r = np.array(reference)
    out = f.refresh(dict(zip("ABCD", reference)), points=11)
    for i, name in enumerate("ABCD"):
        share, lo, hi = hand_cox_range(r, i, lows, highs)
        t = np.linspace(lo, hi, 11)
        blends = share[None, :] * (1.0 - t)[:, None]
        blends[:, i] = t
        tr = out["traces"][name]
        assert tr["amount"] == pytest.approx(t, abs=1e-12)
        assert tr["blends"] == pytest.approx(blends, abs=1e-12)
        assert tr["x"] == pytest.approx(t - r[i], abs=1e-12)
        frame = ref.get_prediction(special_cubic(blends)).summary_frame(alpha=0.05)
        assert tr["mean"] == pytest.approx(frame["mean"].to_numpy(), rel=1e-9, abs=1e-9)
        assert tr["ci_half"] == pytest.approx((frame["mean_ci_upper"] - frame["mean"]).to_numpy(), rel=1e-9)
        assert tr["pi_half"] == pytest.approx((frame["obs_ci_upper"] - frame["mean"]).to_numpy(), rel=1e-9)
    point = ref.get_prediction(special_cubic(r[None, :])).summary_frame(alpha=0.05).iloc[0]
    assert out["point"]["mean"] == pytest.approx(point["mean"], rel=1e-9)
    assert out["point"]["ci_high"] == pytest.approx(point["mean_ci_upper"], rel=1e-9)
    assert out["point"]["pi_low"] == pytest.approx(point["obs_ci_lower"], rel=1e-9)
