"""Mixture designs: simplex lattice, simplex centroid, extreme vertices, mixture-process, optimal, evaluate.

Sources: Scheffé (1958), "Experiments with mixtures", JRSS B 20, 344-360 ({q, m} lattice: C(q+m-1, m) points);
Scheffé (1963), "The simplex-centroid design for experiments with mixtures", JRSS B 25, 235-263 (2^q - 1 points);
McLean & Anderson (1966), Technometrics 8, 447-454 (extreme vertices, centroids as vertex averages,
L-pseudo-components); Kiefer (1961), "Optimum designs in regression problems II", Ann. Math. Statist. 32,
298-325 (the {q, 2} lattice is D-optimal for the Scheffé quadratic; from memory); Kiefer & Wolfowitz (1960),
"The equivalence of two extremum problems", Canad. J. Math. 12, 363-366 (a D-optimal design has maximum scaled
prediction variance p over the region).
"""

import math

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import LevelwiseError
from levelwise.design._mixture import role_column


def roles(design):
    return design.table[role_column(design)].to_list()


@pytest.mark.parametrize("q", [3, 4, 5, 6])
@pytest.mark.parametrize("m", [1, 2, 3, 4])
def test_simplex_lattice_point_count(q, m):
    # Scheffé (1958): the {q, m} simplex lattice has C(q + m - 1, m) points.
    d = lw.simplex_lattice(q, m, randomize=False)
    expected = {(3, 1): 3, (3, 2): 6, (3, 3): 10, (3, 4): 15, (4, 1): 4, (4, 2): 10, (4, 3): 20, (4, 4): 35,
                (5, 1): 5, (5, 2): 15, (5, 3): 35, (5, 4): 70, (6, 1): 6, (6, 2): 21, (6, 3): 56, (6, 4): 126}
    assert len(d) == expected[(q, m)] == math.comb(q + m - 1, m)
    X = d.table[d.factor_names].to_numpy()
    assert np.allclose(X.sum(axis=1), 1.0)
    assert np.allclose(X * m, np.round(X * m))  # proportions 0, 1/m, ..., 1
    assert len(np.unique(np.round(X, 12), axis=0)) == len(X)


@pytest.mark.parametrize("q", [3, 4, 5, 6])
def test_simplex_centroid_point_count_and_roles(q):
    # Scheffé (1963): 2^q - 1 points; q pure blends, C(q, 2) binary blends, one overall centroid.
    d = lw.simplex_centroid(q, randomize=False)
    assert len(d) == 2**q - 1
    r = roles(d)
    assert r.count("vertex") == q and r.count("edge_centroid") == math.comb(q, 2)
    assert r.count("overall_centroid") == 1 and r.count("face_centroid") == 2**q - 1 - q - math.comb(q, 2) - 1
    X = d.table[d.factor_names].to_numpy()
    centre = X[np.array(r) == "overall_centroid"][0]
    assert np.allclose(centre, 1.0 / q)


def test_interior_check_points():
    # Axial points halfway from the centroid to each vertex: x_i = (q + 1) / (2q), others 1 / (2q) (common practice).
    d = lw.simplex_centroid(3, interior_check=True, randomize=False)
    X = d.table[d.factor_names].to_numpy()[np.array(roles(d)) == "interior_check"]
    assert np.allclose(np.sort(X, axis=1), [[1 / 6, 1 / 6, 2 / 3]] * 3)
    d = lw.simplex_lattice(3, 2, interior_check=True, overall_centroid=True, randomize=False)
    assert len(d) == 6 + 1 + 3


def test_lattice_in_pseudo_components_with_lower_bounds_and_total_100():
    # McLean & Anderson (1966): x = L + z (T - sum L) maps the pseudo-component lattice onto the region.
    comps = [lw.Component("A", 20), lw.Component("B", 10), lw.Component("C", 5)]
    d = lw.simplex_lattice(comps, 2, total=100, randomize=False)
    X = d.table[["A", "B", "C"]].to_numpy()
    assert np.allclose(X.sum(axis=1), 100.0)
    assert {tuple(r) for r in np.round(X, 9)} == {(85, 10, 5), (20, 75, 5), (20, 10, 70), (52.5, 42.5, 5),
                                                   (52.5, 10, 37.5), (20, 42.5, 37.5)}


def test_simplex_designs_refuse_a_cut_region():
    comps = [lw.Component("A", 0.1, 0.5), lw.Component("B"), lw.Component("C")]
    with pytest.raises(LevelwiseError, match="extreme_vertices"):
        lw.simplex_lattice(comps, 2)
    with pytest.raises(LevelwiseError, match="degree"):
        lw.simplex_lattice(3, 0)


def test_extreme_vertices_design():
    comps = [lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4),
             lw.Component("D", 0.0, 0.2)]
    m = lw.Mixture(comps)
    d = lw.extreme_vertices(comps, centroids=(1, 2), randomize=False)
    r = np.array(roles(d))
    X = d.table[m.names].to_numpy()
    V = m.vertices()
    assert np.allclose(X[r == "vertex"], V)
    assert (r == "edge_centroid").sum() == len(m.faces(1)) and (r == "face_centroid").sum() == len(m.faces(2))
    assert np.allclose(X[r == "overall_centroid"], V.mean(axis=0))  # average of the vertices
    # an edge centroid is the midpoint of two vertices
    for e, face in zip(X[r == "edge_centroid"], m.faces(1)):
        assert len(face) == 2 and np.allclose(e, V[face].mean(axis=0))
    m.check_blends(X)
    with pytest.raises(LevelwiseError, match="centroids"):
        lw.extreme_vertices(comps, centroids=(3,))


def test_extreme_vertices_with_total_and_constraint():
    comps = [lw.Component("resin", 30, 70), lw.Component("hardener", 5, 20), lw.Component("filler", 10, 40),
             lw.Component("pigment", 2, 10)]
    d = lw.extreme_vertices(comps, total=100, constraints="resin + hardener <= 80", centroids=1, seed=3)
    X = d.table[["resin", "hardener", "filler", "pigment"]].to_numpy()
    assert np.allclose(X.sum(axis=1), 100.0)
    assert np.all(X[:, 0] + X[:, 1] <= 80 + 1e-9)
    assert d.metadata["mixture_total"] == 100.0


def test_mixture_process_crossing():
    mix = lw.simplex_centroid(3, randomize=False)
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190), lw.Factor("Time", 1, 3)], seed=2)
    assert len(d) == 7 * 4
    t = d.table
    combos = {tuple(np.round(row, 9)) for row in t[["A", "B", "C", "Temp", "Time"]].to_numpy()}
    assert len(combos) == 28  # every blend at every process run
    assert set(t["Temp"]) == {150.0, 190.0}
    with pytest.raises(LevelwiseError, match="mixture design"):
        lw.mixture_process(lw.full_factorial(2), [lw.Factor("T", 0, 1)])


def test_d_optimal_quadratic_on_the_simplex_is_the_lattice():
    # Kiefer (1961), from memory: the {3, 2} lattice is D-optimal for the Scheffé quadratic model.
    d = lw.optimal_design(lw.Mixture(3), "scheffe_quadratic", 6, seed=1, randomize=False)
    X = d.table[["A", "B", "C"]].to_numpy()
    lattice = lw.simplex_lattice(3, 2, randomize=False).table[["A", "B", "C"]].to_numpy()
    assert {tuple(r) for r in np.round(X, 9)} == {tuple(r) for r in np.round(lattice, 9)}


def test_d_optimal_linear_runs_sit_on_vertices():
    # det(M0 + x x') = det(M0) (1 + x' M0^-1 x) is convex in each run x, so each run of a D-optimal design for
    # a first-order model sits at a vertex of the region (common practice).
    comps = [lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4)]
    d = lw.optimal_design(comps, "scheffe_linear", 6, seed=4, randomize=False)
    V = lw.Mixture(comps).vertices()
    X = d.table[["A", "B", "C"]].to_numpy()
    assert all(np.abs(V - x).max(axis=1).min() < 1e-9 for x in X)


def test_optimal_mixture_process_with_constraints_and_i_criterion():
    comps = [lw.Component("A", 0.1, 0.5), lw.Component("B", 0.2, 0.6), lw.Component("C", 0.1, 0.4)]
    factors = comps + [lw.Factor("Temp", 150, 190)]
    model = ("scheffe_linear", "main_effects")
    kw = dict(constraints=["A + B <= 0.75", "Temp - 100*A <= 160"], seed=5, randomize=False, starts=4)
    d_i = lw.optimal_design(factors, model, 10, criterion="I", **kw)
    d_d = lw.optimal_design(factors, model, 10, criterion="D", **kw)
    for d in (d_i, d_d):
        t = d.table
        lw.Mixture(comps).check_blends(t[["A", "B", "C"]].to_numpy())
        assert np.all(t["A"] + t["B"] <= 0.75 + 1e-9) and np.all(t["Temp"] - 100 * t["A"] <= 160 + 1e-6)
        assert t["Temp"].between(150 - 1e-9, 190 + 1e-9).all()
    ev_i, ev_d = lw.evaluate(d_i, model), lw.evaluate(d_d, model)
    assert ev_i.rank == ev_d.rank == 6
    # the I-optimal design has the smaller average prediction variance, the D-optimal the larger determinant
    assert ev_i.prediction_variance["mean"] <= ev_d.prediction_variance["mean"] * 1.02
    assert d_d.metadata["log_det"] >= d_i.metadata["log_det"] - 1e-9


def test_optimal_mixture_bad_input():
    with pytest.raises(LevelwiseError, match="at least 6"):
        lw.optimal_design(lw.Mixture(3), "scheffe_quadratic", 5)
    with pytest.raises(LevelwiseError, match="criterion"):
        lw.optimal_design(lw.Mixture(3), "scheffe_linear", 5, criterion="A")


def test_evaluate_simplex_lattice():
    d = lw.simplex_lattice(3, 2, randomize=False)
    ev = lw.evaluate(d, "scheffe_quadratic")
    assert ev.rank == 6 and ev.df_error == 0
    # Kiefer & Wolfowitz (1960): the D-optimal {3,2} lattice (n = p = 6) has max x'(X'X)^-1 x = p / n = 1.
    assert ev.prediction_variance["max"] == pytest.approx(1.0, abs=1e-9)
    # x1 x2 x3 is zero at every point of the {3, 2} lattice, so it biases no coefficient.
    assert np.allclose(ev.alias_matrix["A:B:C"], 0.0)
    ev = lw.evaluate(lw.simplex_centroid(3, randomize=False), "scheffe_special_cubic")
    assert ev.rank == 7


def test_optimal_mixture_augments_fixed_runs():
    # Augmenting the {3, 1} lattice (3 pure blends) for the quadratic: the 3 new runs must be the binary blends,
    # which complete the D-optimal {3, 2} lattice (Kiefer 1961, from memory). As optimal_design does for process
    # factors, only the new runs come back, as the next stage (run ids 4..6, block 2).
    fixed = lw.simplex_lattice(3, 1, randomize=False)
    d = lw.optimal_design(lw.Mixture(3), "scheffe_quadratic", 3, fixed_runs=fixed, seed=2, randomize=False)
    assert roles(d) == ["optimal"] * 3 and d.metadata["fixed_runs"] == 3
    assert list(d.table["run"]) == [4, 5, 6] and set(d.table["block"]) == {2}
    new = d.table[["A", "B", "C"]].to_numpy()
    assert {tuple(x) for x in np.round(new, 9)} == {(0.5, 0.5, 0.0), (0.5, 0.0, 0.5), (0.0, 0.5, 0.5)}
    with pytest.raises(LevelwiseError, match="sum"):
        lw.optimal_design(lw.Mixture(3), "scheffe_linear", 3, fixed_runs=pd.DataFrame({"A": [0.5], "B": [0.2],
                                                                                       "C": [0.2]}))
