"""Mixture slider moves (Cox direction; Cox 1971, Biometrika 58, 155-159) and ternary slices, checked against
hand-computed blends and the fit's own predict at the same blends (statsmodels agreement of predict is proven in
test_mixture_models). Yarn elongation data FROM MEMORY (tests/data/SOURCES.md)."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import LevelwiseError

DATA = Path(__file__).parent / "data" / "yarn_elongation.csv"


def test_move_component_keeps_relative_proportions():
    m = lw.Mixture(4)
    # D to 0.4 from (0.4, 0.3, 0.2, 0.1): the others share 0.6 in the ratio 4 : 3 : 2 (hand computed).
    new = lw.move_component(m, {"A": 0.4, "B": 0.3, "C": 0.2, "D": 0.1}, "D", 0.4)
    assert [new[k] for k in "ABCD"] == pytest.approx([0.6 * 4 / 9, 0.6 * 3 / 9, 0.6 * 2 / 9, 0.4])
    assert sum(new.values()) == pytest.approx(1.0)


def test_move_component_stops_at_a_bound_and_keeps_extra_keys():
    comps = [lw.Component("A", 0.6), lw.Component("B"), lw.Component("C")]
    m = lw.Mixture(comps)
    # B may rise only until A = 0.7 (1 - t) / 0.8 = 0.6: t = 11/35 (hand computed); C = 3/35.
    new = lw.move_component(m, {"A": 0.7, "B": 0.2, "C": 0.1, "Temp": 170}, "B", 0.9)
    assert [new["A"], new["B"], new["C"]] == pytest.approx([0.6, 11 / 35, 3 / 35])
    assert new["Temp"] == 170
    with pytest.raises(LevelwiseError, match="component"):
        lw.move_component(m, {"A": 0.7, "B": 0.2, "C": 0.1}, "Z", 0.1)


def test_ternary_slice_of_the_yarn_model():
    f = lw.fit_mixture(pd.read_csv(DATA), "elongation", "scheffe_quadratic", ["x1", "x2", "x3"])
    s = lw.ternary_slice(f, ("x1", "x2", "x3"), {"x1": 0.2, "x2": 0.3, "x3": 0.5}, points=5)
    assert len(s["x"]) == 15 and s["inside"].all() and s["share"] == pytest.approx(1.0)
    # the corners are the pure components: the predicted means there are b1, b2, b3 (11.7, 9.4, 16.4, from
    # memory) at triangle positions (0, 0), (1, 0), (1/2, sqrt(3)/2)
    for corner, (x, y), b in [((1, 0, 0), (0, 0), 11.7), ((0, 1, 0), (1, 0), 9.4),
                              ((0, 0, 1), (0.5, np.sqrt(3) / 2), 16.4)]:
        k = int(np.flatnonzero(np.all(np.isclose(s["barycentric"], corner), axis=1))[0])
        assert (s["x"][k], s["y"][k]) == pytest.approx((x, y))
        assert s["mean"][k] == pytest.approx(b, abs=1e-9)
    ref = f.predict(pd.DataFrame(s["blends"], columns=["x1", "x2", "x3"]))
    assert s["mean"] == pytest.approx(ref["mean"].to_numpy(), abs=1e-10)
    assert s["pi_half"] == pytest.approx((ref["pi_high"] - ref["mean"]).to_numpy(), abs=1e-10)


def test_ternary_slice_with_held_component_and_bounds():
    comps = [lw.Component("A", 0.1, 0.6), lw.Component("B"), lw.Component("C"), lw.Component("D", 0.0, 0.3)]
    d = lw.extreme_vertices(comps, centroids=(1,), randomize=False)
    data = d.table[["A", "B", "C", "D"]].copy()
    data["y"] = np.random.default_rng(2).normal(size=len(data)) + 4 * data["A"]
    f = lw.fit_mixture(data, "y", "scheffe_linear", comps)
    s = lw.ternary_slice(f, ("A", "B", "C"), {"A": 0.3, "B": 0.3, "C": 0.2, "D": 0.2}, points=21)
    assert np.allclose(s["blends"][:, 3], 0.2)  # D held
    assert np.allclose(s["blends"].sum(axis=1), 1.0) and s["share"] == pytest.approx(0.8)
    a = s["blends"][:, 0]
    assert np.array_equal(s["inside"], (a >= 0.1 - 1e-12) & (a <= 0.6 + 1e-12))  # A's bounds cut the triangle
    assert np.isnan(s["mean"][~s["inside"]]).all() and np.isfinite(s["mean"][s["inside"]]).all()
    with pytest.raises(LevelwiseError, match="three different"):
        lw.ternary_slice(f, ("A", "A", "C"), {"A": 0.3, "B": 0.3, "C": 0.2, "D": 0.2})
