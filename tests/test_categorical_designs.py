"""Optimal designs and design evaluation with categorical factors of more than two levels (issue 14)."""

import itertools

import numpy as np
import pandas as pd
import patsy
import pytest
from statsmodels.stats.outliers_influence import variance_inflation_factor

import levelwise as lw
from levelwise import Factor, LevelwiseError

FACTORS = [Factor("Supplier", levels=["north", "east", "south"]), Factor("Temp", 150, 200), Factor("Time", 1, 2)]
MODEL = "Supplier + Temp + Time + Supplier:Temp + Temp:Time + I(Temp**2)"
PATSY = "C(Supplier, Sum(omit=0)) + Temp + Time + C(Supplier, Sum(omit=0)):Temp + Temp:Time + I(Temp**2)"


def _patsy_matrix(table):
    """Model matrix by patsy with sum-to-zero contrasts, on coded continuous settings (an independent build)."""
    frame = pd.DataFrame({
        "Supplier": pd.Categorical(table["Supplier"], categories=FACTORS[0].levels),
        "Temp": (table["Temp"].to_numpy(float) - 175) / 25,
        "Time": (table["Time"].to_numpy(float) - 1.5) / 0.5,
    })
    return np.asarray(patsy.dmatrix(PATSY, frame))


def _plain_exchange_best(starts, runs, seed):
    """Best log det over random starts of a plain point exchange over the full candidate grid (Fedorov-type:
    swap a design point for the candidate that raises det(X'X) most, until no swap helps)."""
    grid = pd.DataFrame(list(itertools.product(FACTORS[0].levels, (150.0, 175.0, 200.0), (1.0, 2.0))),
                        columns=["Supplier", "Temp", "Time"])
    C = _patsy_matrix(grid)
    rng = np.random.default_rng(seed)
    best = -np.inf
    for _ in range(starts):
        rows = rng.choice(len(C), size=runs, replace=True)
        for _ in range(100):
            X = C[rows]
            sign, current = np.linalg.slogdet(X.T @ X)
            current = current if sign > 0 else -np.inf
            improved = False
            for i in range(runs):
                trial = np.repeat(rows[None, :], len(C), axis=0)
                trial[:, i] = np.arange(len(C))
                Xs = C[trial]
                signs, dets = np.linalg.slogdet(np.einsum("cnp,cnq->cpq", Xs, Xs))
                dets = np.where(signs > 0, dets, -np.inf)
                c = int(np.argmax(dets))
                if dets[c] > current + 1e-9:
                    rows[i], current, improved = c, dets[c], True
            if not improved:
                break
        best = max(best, current)
    return best


def test_d_optimal_with_three_level_categorical_factor_beats_plain_exchange():
    runs = 15
    d = lw.optimal_design(FACTORS, MODEL, runs=runs, starts=20, seed=3)
    X = _patsy_matrix(d.table)
    ours = np.linalg.slogdet(X.T @ X)[1]
    assert ours == pytest.approx(d.metadata["log_det"], rel=1e-10)  # metadata agrees with patsy's columns
    reference = _plain_exchange_best(starts=40, runs=runs, seed=0)
    assert ours >= reference - 1e-9
    assert set(d.table["Supplier"]) == set(FACTORS[0].levels)  # every level represented
    assert d.table["Supplier"].value_counts().min() >= 3


def test_i_optimal_with_four_level_categorical_and_metadata():
    factors = [Factor("Mesh", levels=["fine", "medium", "coarse", "bulk"]), Factor("Temp", 150, 200)]
    d = lw.optimal_design(factors, "Mesh + Temp + Mesh:Temp", runs=12, criterion="I", seed=1, starts=5)
    assert set(d.table["Mesh"]) == set(factors[0].levels)
    ev = lw.evaluate(d, "Mesh + Temp + Mesh:Temp")
    assert d.metadata["average_prediction_variance"] == pytest.approx(ev.prediction_variance["mean"], rel=1e-9)
    assert ev.rank == 8 and ev.df_error == 4


def test_evaluate_with_three_level_categorical_against_statsmodels_and_quadrature():
    d = lw.optimal_design(FACTORS, MODEL, runs=15, starts=5, seed=2)
    ev = lw.evaluate(d, MODEL)
    X = _patsy_matrix(d.table)
    assert ev.rank == X.shape[1] == 9 and ev.inestimable == ()
    # VIF: statsmodels variance_inflation_factor on the same columns (intercept included in each regression).
    # patsy's column order: Intercept, S[east], S[south], Temp, S[east]:Temp, S[south]:Temp, Time, Temp:Time, Temp^2.
    reference = [variance_inflation_factor(X, j) for j in (1, 2, 3, 6, 4, 5, 7, 8)]
    np.testing.assert_allclose(ev.vif.to_numpy(), reference, rtol=1e-8)
    assert list(ev.vif.index) == ["Supplier[east]", "Supplier[south]", "Temp", "Time", "Supplier[east]:Temp",
                                  "Supplier[south]:Temp", "Temp:Time", "Temp^2"]
    # Mean prediction variance over the region: Gauss-Legendre quadrature in Temp and Time (exact for these
    # polynomial degrees) times the three equally likely suppliers.
    nodes, weights = np.polynomial.legendre.leggauss(6)
    grid = pd.DataFrame([(s, 175 + 25 * a, 1.5 + 0.5 * b) for s in FACTORS[0].levels for a in nodes for b in nodes],
                        columns=["Supplier", "Temp", "Time"])
    w = np.array([wa * wb / 4 / 3 for _ in FACTORS[0].levels for wa in weights for wb in weights])
    F = _patsy_matrix(grid)
    v = np.einsum("ij,jk,ik->i", F, np.linalg.inv(X.T @ X), F)
    assert ev.prediction_variance["mean"] == pytest.approx(float(w @ v), rel=1e-10)
    # The default alias terms include the Supplier:Time interaction, two columns.
    assert {"Supplier[east]:Time", "Supplier[south]:Time"} <= set(ev.alias_matrix.columns)


def test_general_factorial_evaluated_is_orthogonal_between_terms():
    d = lw.full_factorial([Factor("Supplier", levels=["a", "b", "c"]), Factor("Temp", 150, 200, n_levels=3)])
    ev = lw.evaluate(d, "Supplier + Temp + I(Temp**2)")
    # In a full factorial the columns of different terms are orthogonal (common practice); the two contrast
    # columns of one term correlate 0.5 (sum-to-zero contrasts, balanced).
    corr = ev.correlation
    assert corr.loc["Supplier[b]", "Temp"] == pytest.approx(0, abs=1e-12)
    assert corr.loc["Supplier[b]", "Supplier[c]"] == pytest.approx(0.5)


def test_categorical_power_refused_and_presets_skip_it():
    with pytest.raises(LevelwiseError, match="raises categorical factor 'Supplier' to a power"):
        lw.optimal_design(FACTORS, "Supplier + I(Supplier**2) + Temp", runs=10, seed=1)
    d = lw.optimal_design(FACTORS, "full_second_order", runs=16, seed=1, starts=3)
    assert "Supplier^2" not in d.metadata["columns"] and "Temp^2" in d.metadata["columns"]


def test_augmenting_runs_with_a_three_level_categorical_factor_returns_the_new_stage():
    factors = [Factor("Supplier", levels=["north", "east", "south"]), Factor("Temp", 150, 200)]
    first = lw.full_factorial(factors, seed=1)  # 6 runs
    more = lw.optimal_design(factors, "Supplier + Temp + Supplier:Temp", runs=6, fixed_runs=first, seed=2,
                             starts=3)
    assert len(more) == 6 and more.table["run"].min() == 7 and set(more.table["role"]) == {"optimal"}
    assert more.metadata["fixed_runs"] == 6
    both = pd.concat([first.table, more.table])
    X = _patsy_matrix_two(both)
    assert np.linalg.slogdet(X.T @ X)[1] == pytest.approx(more.metadata["log_det"], rel=1e-10)


def _patsy_matrix_two(table):
    frame = pd.DataFrame({"Supplier": pd.Categorical(table["Supplier"], categories=["north", "east", "south"]),
                          "Temp": (table["Temp"].to_numpy(float) - 175) / 25})
    return np.asarray(patsy.dmatrix("C(Supplier, Sum(omit=0)) * Temp", frame))
