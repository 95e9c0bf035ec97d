"""Optimal designs by coordinate exchange, and design evaluation."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from levelwise import (
    Factor,
    LevelwiseError,
    evaluate,
    fractional_factorial,
    full_factorial,
    optimal_design,
    parse_model,
    plackett_burman,
)
from levelwise.model import monomials


def model_matrix(spec, coded):
    """Model matrix of *spec* at coded settings (the formula's exponent rows evaluated)."""
    return monomials(np.asarray(coded, dtype=float), spec.exponents)


def _det(design, model):
    X = model_matrix(parse_model(model, design.factor_names), design.coded.to_numpy())
    return np.linalg.det(X.T @ X)


def test_hadamard_bound_interactions_3_factors_8_runs():
    # Hadamard's inequality: det(X'X) <= n^p with equality for orthogonal +-1 columns (tests/data/SOURCES.md).
    d = optimal_design(3, "(A+B+C)**2", runs=8, seed=3)
    assert _det(d, "(A+B+C)**2") == pytest.approx(8.0**7, rel=1e-9)
    assert d.metadata["d_efficiency"] == pytest.approx(100.0, rel=1e-9)


def test_hadamard_bound_main_effects_7_factors_8_runs():
    d = optimal_design(7, "main_effects", runs=8, seed=3)
    assert _det(d, "main_effects") == pytest.approx(8.0**8, rel=1e-9)  # Hadamard's inequality, equality case


def test_quadratic_design_reports_and_is_reproducible():
    a = optimal_design(3, "full_second_order", runs=14, seed=5, randomize=False)
    b = optimal_design(3, "full_second_order", runs=14, seed=5, randomize=False)
    pd.testing.assert_frame_equal(a.table, b.table)
    meta = a.metadata
    X = model_matrix(parse_model("full_second_order", a.factor_names), a.coded.to_numpy())
    p = X.shape[1]
    # D-efficiency = 100 det(X'X)^(1/p) / n (common practice definition), recomputed here.
    assert meta["d_efficiency"] == pytest.approx(100 * np.linalg.det(X.T @ X) ** (1 / p) / 14, rel=1e-9)
    assert meta["average_prediction_variance"] == pytest.approx(
        evaluate(a, "full_second_order").prediction_variance["mean"])
    assert np.all(np.abs(a.coded.to_numpy()) <= 1 + 1e-12)


def test_i_criterion_lowers_average_variance():
    d = optimal_design(2, "full_second_order", runs=9, seed=2, starts=5)
    i = optimal_design(2, "full_second_order", runs=9, seed=2, starts=5, criterion="I")
    assert i.metadata["average_prediction_variance"] <= d.metadata["average_prediction_variance"] + 1e-12
    assert d.metadata["log_det"] >= i.metadata["log_det"] - 1e-12


def test_constraints_respected_and_reached():
    fs = [Factor("A", 0, 1), Factor("B", 0, 1)]
    d = optimal_design(fs, "full_second_order", runs=10, constraints=["A + B <= 1.5"], seed=4)
    total = d.table.A + d.table.B
    assert (total <= 1.5 + 1e-9).all()
    assert np.isclose(total, 1.5).any()  # runs sit on the constraint boundary


def test_empty_region_and_too_few_runs():
    fs = [Factor("A", 0, 1), Factor("B", 0, 1)]
    with pytest.raises(LevelwiseError, match="empty region"):
        optimal_design(fs, "main_effects", runs=6, constraints=["A + B >= 2.5"])
    with pytest.raises(LevelwiseError, match="has 6 terms but the design would have only 5 runs"):
        optimal_design(fs, "full_second_order", runs=5)
    with pytest.raises(LevelwiseError, match="multiplies factors together; it must be linear"):
        optimal_design(fs, "main_effects", runs=6, constraints=["A * B <= 0.5"])
    with pytest.raises(LevelwiseError, match="'criterion' parameter must be 'D' or 'I'"):
        optimal_design(fs, "main_effects", runs=6, criterion="A")


def test_fixed_runs_augment_and_progress():
    base = full_factorial(2, randomize=False)
    calls = []
    d = optimal_design(2, "full_second_order", runs=5, fixed_runs=base, seed=1, starts=4,
                       progress=lambda f, msg: calls.append(f))
    assert calls == [0.25, 0.5, 0.75, 1.0]
    # Only the new runs come back, as the next stage: block 2, run ids 5..9 after the four fixed runs.
    assert len(d) == 5 and set(d.table.role) == {"optimal"}
    assert (d.table.block == 2).all() and sorted(d.table.run) == [5, 6, 7, 8, 9]
    assert d.metadata["fixed_runs"] == 4
    both = base.combine(d)
    assert both.table.run.tolist() == list(range(1, 10))
    pd.testing.assert_frame_equal(both.table.iloc[:4], base.table)  # the fixed runs first, untouched
    # The search optimised the nine runs together: its log det is that of the combined model matrix.
    assert d.metadata["log_det"] == pytest.approx(np.log(_det(both, "full_second_order")), rel=1e-9)
    # A table of earlier runs: run ids continue after its 'run' column, the block after its 'block' column.
    table = base.table.assign(run=[11, 12, 13, 14], block=3)
    later = optimal_design(2, "full_second_order", runs=5, fixed_runs=table, seed=1, starts=2)
    assert sorted(later.table.run) == [15, 16, 17, 18, 19] and set(later.table.block) == {4}
    stopped = []
    optimal_design(2, "main_effects", runs=4, starts=10, progress=lambda f, m: stopped.append(f) or False)
    assert len(stopped) == 1  # returning False stops the search


def test_evaluate_alias_matrix_half_fraction():
    # 2^(3-1) with C = AB: A is aliased with BC, B with AC, C with AB, coefficient 1 (common practice).
    d = fractional_factorial(3, generators=["C=AB"], randomize=False)
    ev = evaluate(d, "main_effects")
    assert ev.alias_matrix.loc["A", "B:C"] == pytest.approx(1.0)
    assert ev.alias_matrix.loc["C", "A:B"] == pytest.approx(1.0)
    assert ev.alias_matrix.loc["A", "A:B"] == 0.0
    assert ev.df_error == 0 and ev.power.isna().all()


def test_evaluate_full_factorial_variance_and_power():
    ev = evaluate(full_factorial(3, randomize=False), "main_effects")
    # X'X = 8 I, so x'(X'X)^-1 x = (1 + |x|^2)/8: 1/8 at the centre, 4/8 at a corner; mean over the cube
    # (1 + 3 * 1/3)/8 = 0.25 (E[x^2] = 1/3 for x uniform on [-1, 1]).
    assert ev.prediction_variance == pytest.approx({"min": 0.125, "mean": 0.25, "max": 0.5})
    assert ev.vif.to_numpy() == pytest.approx(np.ones(3))
    # Power: coefficient = delta/2 = sigma, se = sigma/sqrt(8), df = 4; two-sided noncentral t (scipy.stats).
    nc, df = np.sqrt(8), 4
    t = stats.t.ppf(0.975, df)
    expected = 1 - stats.nct.cdf(t, df, nc) + stats.nct.cdf(-t, df, nc)
    assert ev.power["A"] == pytest.approx(expected, rel=1e-12)


def test_evaluate_plackett_burman_partial_aliasing():
    # 12-run Plackett-Burman: each main effect is partially aliased with two-factor interactions not involving
    # it, with coefficients +-1/3 (from memory: common knowledge of the 12-run design).
    ev = evaluate(plackett_burman(5, randomize=False), "main_effects")
    values = np.abs(ev.alias_matrix.loc[["A", "B", "C", "D", "E"]].to_numpy())
    assert set(np.round(np.unique(values), 12)) <= {0.0, round(1 / 3, 12)}
    assert ev.alias_matrix.loc["A", "A:B"] == 0.0


def test_evaluate_inestimable_and_vif():
    d = fractional_factorial(4, generators=["D=ABC"], randomize=False)
    ev = evaluate(d, "A + B + C + D + A:B + C:D")
    assert ev.rank == 6 and len(ev.inestimable) == 1 and set(ev.inestimable) <= {"A:B", "C:D"}
    assert np.isinf(ev.vif).all()
    with pytest.raises(LevelwiseError, match="has 11 terms but the design has only 8 runs"):
        evaluate(d, "two_factor_interactions")


def test_two_level_categorical_factor_in_optimal_design():
    fs = [Factor("T", 100, 150), Factor("P", 1, 3), Factor("Metal", levels=["steel", "brass"])]
    model = "T + P + Metal + T:P + T:Metal + I(T**2) + I(P**2)"
    d = optimal_design(fs, model, runs=12, constraints="T + 50*P <= 260", seed=1)
    assert set(d.table.Metal) == {"steel", "brass"}
    assert (d.table["T"] + 50 * d.table["P"] <= 260 + 1e-9).all()
    ev = evaluate(d, model)
    assert ev.rank == 8
    assert ev.prediction_variance["mean"] == pytest.approx(d.metadata["average_prediction_variance"], rel=1e-9)
    with pytest.raises(LevelwiseError, match=r"raises categorical factor\(s\) \['Metal'\] to a power"):
        optimal_design(fs, "full_second_order", runs=12)
    with pytest.raises(LevelwiseError, match=r"names categorical factor\(s\) \['Metal'\]"):
        optimal_design(fs, model, runs=12, constraints="Metal + T <= 3")
    # A three-level categorical factor is searched over its levels (issue 14; tests/test_categorical_designs.py).
    three = optimal_design([Factor("T", 0, 1), Factor("S", levels=["a", "b", "c"])], "main_effects", runs=6, seed=1)
    assert set(three.table["S"]) == {"a", "b", "c"}


def test_non_regular_design_has_no_alias_chains():
    d = optimal_design(2, "main_effects", runs=4, seed=1)
    assert d.generators is None and d.resolution is None
    with pytest.raises(LevelwiseError, match="regular two-level designs only.*evaluate"):
        d.aliases()
