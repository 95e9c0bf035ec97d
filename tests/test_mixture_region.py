"""Mixture components, bounds, L-pseudo-components and the vertices of a constrained mixture region.

Sources: McLean & Anderson (1966), "Extreme vertices design of mixture experiments", Technometrics 8, 447-454
(L-pseudo-components x'_i = (x_i - L_i) / (1 - sum L); vertices of the bounded region). The vertex enumeration is
checked against an independent linear-programming vertex search (scipy.optimize.linprog, HiGHS): the optimum of a
linear objective in a generic direction is a vertex, so many random directions find every vertex.
"""

import numpy as np
import pytest
from scipy.optimize import linprog

import levelwise as lw
from levelwise import LevelwiseError


def lp_vertices(mixture, directions, seed=0):
    """Vertices found by LPs in random directions (independent of the enumeration under test)."""
    rng = np.random.default_rng(seed)
    A, b = mixture._inequalities()
    found = []
    for _ in range(directions):
        res = linprog(rng.normal(size=mixture.q), A_ub=A, b_ub=b, A_eq=np.ones((1, mixture.q)),
                      b_eq=[mixture.total], bounds=[(None, None)] * mixture.q, method="highs")
        assert res.status == 0
        found.append(res.x)
    found = np.round(np.array(found) / mixture.total, 8)
    return np.unique(found, axis=0)


def is_extreme(V, i):
    """True when V[i] is not a convex combination of the other points (LP feasibility, scipy)."""
    others = np.delete(V, i, axis=0)
    A_eq = np.vstack([others.T, np.ones(len(others))])
    b_eq = np.append(V[i], 1.0)
    res = linprog(np.zeros(len(others)), A_eq=A_eq, b_eq=b_eq, bounds=[(0, None)] * len(others), method="highs")
    return res.status == 2  # infeasible


REGIONS = [
    # (components, total, constraints, LP directions)
    ([lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4)], 1.0, None, 300),
    ([lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4),
      lw.Component("D", 0.0, 0.2)], 1.0, None, 800),
    ([lw.Component("resin", 30, 70), lw.Component("hardener", 5, 20), lw.Component("filler", 10, 40),
      lw.Component("pigment", 2, 10), lw.Component("additive", 0, 5)], 100.0, None, 3000),
    ([lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4),
      lw.Component("D", 0.0, 0.2)], 1.0, ["A + B <= 0.75", "C - 2*D >= 0"], 1500),
    ([lw.Component("A", 0.05, 0.6), lw.Component("B", 0.1, 0.5), lw.Component("C", 0.0, 0.3),
      lw.Component("D", 0.0, 0.25), lw.Component("E", 0.05, 0.4)], 1.0, ["A + C <= 0.7"], 4000),
]


@pytest.mark.parametrize("components,total,constraints,directions", REGIONS)
def test_vertices_match_linear_programming_search(components, total, constraints, directions):
    m = lw.Mixture(components, total=total, constraints=constraints)
    V = m.vertices()
    ours = np.unique(np.round(V / total, 8), axis=0)
    lp = lp_vertices(m, directions)
    assert ours.shape == lp.shape, (ours, lp)
    assert np.allclose(ours, lp, atol=1e-7)
    # every vertex is a blend of the region and an extreme point of the enumerated set
    m.check_blends(V)
    assert all(is_extreme(V, i) for i in range(len(V)))


def test_simplex_region_has_the_pure_components_as_vertices():
    # No bounds: the region is the simplex, whose vertices are the pure components (common practice).
    V = lw.Mixture(4).vertices()
    assert np.allclose(np.sort(V, axis=0)[::-1].sum(axis=0), 1.0)
    assert sorted(map(tuple, V)) == sorted(map(tuple, np.eye(4)))


def test_edges_and_faces_obey_euler_relation():
    # Euler's relation V - E + F = 2 for a 3-dimensional polytope (4 components) (common practice).
    m = lw.Mixture(REGIONS[1][0])
    assert len(m.vertices()) - len(m.faces(1)) + len(m.faces(2)) == 2
    m = lw.Mixture(REGIONS[3][0], constraints=REGIONS[3][2])
    assert len(m.vertices()) - len(m.faces(1)) + len(m.faces(2)) == 2


def test_implied_bounds():
    # A <= 1 - (lows of the others); A >= 1 - (highs of the others) (common practice).
    m = lw.Mixture([lw.Component("A"), lw.Component("B", 0.3, 0.5), lw.Component("C", 0.1, 0.2)])
    assert np.allclose(m.lows, [0.3, 0.3, 0.1])
    assert np.allclose(m.highs, [0.6, 0.5, 0.2])


def test_pseudo_components_map_the_lower_bounded_region_to_the_simplex():
    # McLean & Anderson (1966): x'_i = (x_i - L_i) / (1 - sum L); with total T: (x_i - L_i) / (T - sum L).
    comps = [lw.Component("A", 20), lw.Component("B", 10), lw.Component("C", 5)]
    m = lw.Mixture(comps, total=100)
    x = np.array([[50.0, 30.0, 20.0], [85.0, 10.0, 5.0]])
    z = m.to_pseudo(x)
    assert np.allclose(z, [[30 / 65, 20 / 65, 15 / 65], [1.0, 0.0, 0.0]])
    assert np.allclose(z.sum(axis=1), 1.0)
    assert np.allclose(m.from_pseudo(z), x)
    assert m.is_simplex
    assert not lw.Mixture([lw.Component("A", 0.2, 0.5), lw.Component("B"), lw.Component("C")]).is_simplex


@pytest.mark.parametrize("components,total,words", [
    ([lw.Component("A", 0.5), lw.Component("B", 0.6)], 1.0, ["lower bounds", "sum to 1.1", "more than"]),
    ([lw.Component("A", 0, 0.3), lw.Component("B", 0, 0.3), lw.Component("C", 0, 0.3)], 1.0,
     ["upper bounds", "sum to 0.9", "less than"]),
    ([lw.Component("A", 50), lw.Component("B", 50)], 100, ["exactly", "only one blend"]),
    ([lw.Component("A", 0, 0.5), lw.Component("B", 0, 0.5)], 1.0, ["exactly", "only one blend"]),
    ([lw.Component("A", 1.0), lw.Component("B")], 1.0, ["'A'", "at or above"]),
])
def test_infeasible_bounds_are_refused_saying_why(components, total, words):
    with pytest.raises(LevelwiseError) as info:
        lw.Mixture(components, total=total)
    for word in words:
        assert word in str(info.value)


def test_empty_constrained_region_is_refused():
    with pytest.raises(LevelwiseError, match="constraints"):
        lw.Mixture(3, constraints=["A + B >= 1.2"])


@pytest.mark.parametrize("bad,match", [
    (dict(name=""), "name"), (dict(name="A", low=-0.1), "'low'.*>= 0"), (dict(name="A", low=0.5, high=0.2), "high"),
    (dict(name="A", low=float("nan")), "finite"), (dict(name="A", units=3), "units"),
])
def test_bad_components(bad, match):
    with pytest.raises(LevelwiseError, match=match):
        lw.Component(**bad)


def test_duplicate_and_too_few_components():
    with pytest.raises(LevelwiseError, match="unique"):
        lw.Mixture([lw.Component("A"), lw.Component("A")])
    with pytest.raises(LevelwiseError, match="at least 2"):
        lw.Mixture([lw.Component("A")])
    with pytest.raises(LevelwiseError, match="total"):
        lw.Mixture(3, total=0)


def test_blend_checks_name_the_components():
    m = lw.Mixture([lw.Component("resin", 30, 70), lw.Component("filler", 10, 60), lw.Component("pigment", 2, 10)],
                   total=100)
    with pytest.raises(LevelwiseError) as info:
        m.check_blends([[60, 30, 5]])
    assert "95" in str(info.value) and "resin" in str(info.value) and "total 100" in str(info.value)
    with pytest.raises(LevelwiseError) as info:
        m.check_blends([[75, 20, 5]])
    assert "resin = 75 (allowed 30..70)" in str(info.value)
    with pytest.raises(LevelwiseError, match="missing component"):
        m.amounts_from({"resin": 60, "filler": 35})
    assert np.allclose(m.amounts_from({"resin": 60, "filler": 35, "pigment": 5}), [[60, 35, 5]])
