"""Conference matrices and definitive screening designs (issue 14)."""

import itertools
from collections import Counter

import numpy as np
import pytest

import levelwise as lw
from levelwise import Factor, LevelwiseError
from levelwise.design._conference import SHIPPED_ORDERS, conference_matrix, is_conference, paley


# -- conference matrices -------------------------------------------------------------------------------------------
@pytest.mark.parametrize("order", SHIPPED_ORDERS)
def test_every_shipped_conference_matrix_satisfies_the_identity(order):
    C = conference_matrix(order)
    n = len(C)
    assert n == order
    # Definition of a conference matrix (Paley 1933; Belevitch 1950): zero diagonal, +-1 elsewhere,
    # C C' = (n - 1) I, checked here independently of is_conference.
    assert np.all(np.diag(C) == 0)
    assert set(np.unique(np.abs(C[~np.eye(n, dtype=bool)]))) == {1.0}
    np.testing.assert_array_equal(C @ C.T, (n - 1) * np.eye(n))
    # Symmetric for n = 2 (mod 4), antisymmetric for n = 0 (mod 4) (Delsarte, Goethals & Seidel 1971).
    if n % 4 == 2:
        np.testing.assert_array_equal(C, C.T)
    else:
        np.testing.assert_array_equal(C, -C.T)


def test_paley_refuses_non_prime_powers_and_is_conference_catches_errors():
    with pytest.raises(LevelwiseError, match="prime power"):
        paley(15)
    C = conference_matrix(6)
    C[0, 1] = -C[0, 1]
    assert not is_conference(C)
    with pytest.raises(LevelwiseError, match="available orders"):
        conference_matrix(22)  # none exists: 21 is not a sum of two squares (Belevitch 1950)


# -- definitive screening designs ----------------------------------------------------------------------------------
def _second_order_columns(X):
    k = X.shape[1]
    two_fi = [X[:, a] * X[:, b] for a, b in itertools.combinations(range(k), 2)]
    quad = [X[:, a] ** 2 - (X[:, a] ** 2).mean() for a in range(k)]  # centred quadratic columns
    return np.column_stack(two_fi), np.column_stack(quad)


@pytest.mark.parametrize("k", range(4, 13))
def test_definitive_screening_properties(k):
    d = lw.definitive_screening(k, seed=k)
    X = d.coded.to_numpy(dtype=float)
    # Run counts: 2k + 1 for even k, 2k + 3 for odd k (Jones & Nachtsheim 2011).
    assert len(d) == (2 * k + 1 if k % 2 == 0 else 2 * k + 3)
    # Three levels -1, 0, +1 in every column (Jones & Nachtsheim 2011).
    for j in range(k):
        assert set(X[:, j]) == {-1.0, 0.0, 1.0}
    # Main effects orthogonal to each other, to every 2FI and to every centred quadratic (Jones & Nachtsheim 2011).
    gram = X.T @ X
    np.testing.assert_array_equal(gram - np.diag(np.diag(gram)), 0.0)
    two_fi, quad = _second_order_columns(X)
    np.testing.assert_allclose(X.T @ two_fi, 0.0, atol=1e-12)
    np.testing.assert_allclose(X.T @ quad, 0.0, atol=1e-12)
    # The same facts as reported by second_order_aliasing.
    aliasing = lw.second_order_aliasing(d)
    assert aliasing.max_abs_main_vs_second_order == 0.0
    assert len(aliasing.second_order) == k * (k - 1) // 2 + k
    # No two second-order terms are fully confounded in a DSD for k >= 4 (Jones & Nachtsheim 2011).
    assert aliasing.confounded_pairs == () and aliasing.max_abs_among_second_order < 1


def test_definitive_screening_extra_centre_runs_and_roles():
    d = lw.definitive_screening(6, extra_centre_runs=3, randomize=False)
    assert len(d) == 13 + 3
    assert Counter(d.table["role"]) == {"fold_pair": 12, "centre": 4}
    assert (d.coded[d.table["role"] == "centre"].to_numpy() == 0).all()


def test_definitive_screening_with_two_level_categorical_factors():
    factors = [Factor(n, 0, 10) for n in "ABCDE"] + [Factor("Line", levels=["old", "new"]),
                                                    Factor("Shift", levels=["day", "night"])]
    d = lw.definitive_screening(factors, seed=2)
    m = 8  # 7 columns -> conference order 8
    assert len(d) == 2 * m + 2  # two centre runs, one at each categorical level (Jones & Nachtsheim 2013)
    X = d.coded.to_numpy(dtype=float)
    cont, cat = X[:, :5], X[:, 5:]
    assert set(np.unique(cat)) == {-1.0, 1.0} and (cat.sum(axis=0) == 0).all()
    for j in range(5):
        assert set(cont[:, j]) == {-1.0, 0.0, 1.0}
    gram = cont.T @ cont
    np.testing.assert_array_equal(gram - np.diag(np.diag(gram)), 0.0)
    # Every main effect (continuous and categorical) orthogonal to every second-order term of the continuous
    # factors and to every continuous x categorical interaction (fold-over; Jones & Nachtsheim 2013).
    two_fi, quad = _second_order_columns(cont)
    mixed = np.column_stack([cont[:, a] * cat[:, b] for a in range(5) for b in range(2)])
    for block in (two_fi, quad, mixed):
        np.testing.assert_allclose(X.T @ block, 0.0, atol=1e-12)
    # Categorical vs continuous main effects: |r| = 1/sqrt(m^2 - 1), derived in the module docstring.
    r = np.corrcoef(X.T)[:5, 5:]
    np.testing.assert_allclose(np.abs(r), 1 / np.sqrt(m * m - 1), rtol=1e-12)


def test_definitive_screening_bad_input():
    with pytest.raises(LevelwiseError, match="exactly 2 levels"):
        lw.definitive_screening([Factor("A", 0, 1), Factor("S", levels=list("abc"))])
    with pytest.raises(LevelwiseError, match="n_levels"):
        lw.definitive_screening([Factor("A", 0, 1, n_levels=5), Factor("B", 0, 1)])
    with pytest.raises(LevelwiseError, match="extra_centre_runs"):
        lw.definitive_screening(4, extra_centre_runs=-1)
    with pytest.raises(LevelwiseError, match="one of them continuous"):
        lw.definitive_screening([Factor("S", levels=["a", "b"]), Factor("T", levels=["x", "y"])])


def test_evaluate_reports_the_second_order_alias_structure():
    d = lw.definitive_screening(6, seed=1)
    ev = lw.evaluate(d, "A + B + C + D + E + F")
    so = ev.second_order
    assert so.max_abs_main_vs_second_order == 0.0  # Jones & Nachtsheim 2011
    assert so.correlation.shape == (21, 21) and so.confounded_pairs == ()
    # In the resolution IV half fraction 2^(4-1) with D = ABC the two-factor interactions are confounded in
    # pairs, AB = CD (common practice).
    frac = lw.fractional_factorial(4, generators=["D=ABC"], randomize=False)
    pairs = lw.evaluate(frac, "A + B + C + D").second_order.confounded_pairs
    assert ("A:B", "C:D") in pairs


def test_definitive_screening_roles_are_documented():
    from levelwise.design import ROLES

    assert set(lw.definitive_screening(5).table["role"]) == {"fold_pair", "centre"} <= set(ROLES)
