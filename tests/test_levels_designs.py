"""Beyond two levels (issue 14): factors with any number of levels and general (mixed-level) full factorials."""

import itertools
from collections import Counter

import numpy as np
import pytest

import levelwise as lw
from levelwise import Factor, LevelwiseError


# -- factors ---------------------------------------------------------------------------------------------------
def test_categorical_factor_any_number_of_levels_in_given_order():
    f = Factor("Supplier", levels=["north", "east", "south", "west"])  # not sorted: the given order is kept
    assert f.levels == ("north", "east", "south", "west")
    # Level positions -1 + 2i/(L-1) on [-1, +1] (our convention, stated in Factor's docstring).
    assert f.coded_levels == (-1.0, -1.0 / 3.0, 1.0 / 3.0, 1.0)
    assert f.to_coded(["north", "west", "east"]).tolist() == [-1.0, 1.0, -1.0 / 3.0]
    assert f.to_natural([1 / 3, -1.0]).tolist() == ["south", "north"]
    with pytest.raises(LevelwiseError, match="level positions"):
        f.to_natural(0.0)
    with pytest.raises(LevelwiseError, match="has levels"):
        f.to_coded("central")


def test_continuous_factor_with_n_levels_equally_spaced():
    f = Factor("Temp", 150, 200, n_levels=3)
    assert f.natural_levels == (150.0, 175.0, 200.0)  # equally spaced from low to high (issue 14)
    assert f.coded_levels == (-1.0, 0.0, 1.0)
    five = Factor("Mesh", 10, 50, n_levels=5)
    assert five.natural_levels == (10.0, 20.0, 30.0, 40.0, 50.0)
    assert five.to_coded(20) == -0.5
    assert Factor("T", 0, 1).n_levels is None and Factor("T", 0, 1).coded_levels is None


@pytest.mark.parametrize("bad", [1, 0, 2.5, True, "3"])
def test_n_levels_bad_input(bad):
    with pytest.raises(LevelwiseError, match="n_levels"):
        Factor("T", 0, 1, n_levels=bad)


def test_n_levels_refused_for_categorical():
    with pytest.raises(LevelwiseError, match="n_levels.*continuous"):
        Factor("S", levels=["a", "b", "c"], n_levels=3)


# -- general full factorials -------------------------------------------------------------------------------------
MIXED = [
    Factor("Supplier", levels=["a", "b", "c"]),
    Factor("Temp", 150, 200, n_levels=3),
    Factor("Metal", levels=["steel", "brass"]),
    Factor("Mesh", 10, 40, n_levels=4),
]


def _combinations(table, names):
    return Counter(tuple(row) for row in table[names].itertuples(index=False))


@pytest.mark.parametrize("replicates", [1, 2, 3])
def test_mixed_level_full_factorial_every_combination_once_per_replicate(replicates):
    d = lw.full_factorial(MIXED, replicates=replicates, seed=4)
    names = [f.name for f in MIXED]
    assert len(d) == 3 * 3 * 2 * 4 * replicates  # product of the level counts (common practice)
    wanted = set(itertools.product(*[f.natural_levels for f in MIXED]))
    counts = _combinations(d.table, names)
    assert set(counts) == wanted and set(counts.values()) == {replicates}
    # Within each standard-order replicate every combination appears exactly once.
    std = d.table.set_index("standard_order").sort_index()
    for r in range(replicates):
        part = std.loc[r * 72 + 1:(r + 1) * 72]
        assert set(_combinations(part, names).values()) == {1} and len(part) == 72


def test_general_factorial_seeded_randomisation():
    a = lw.full_factorial(MIXED, seed=11)
    b = lw.full_factorial(MIXED, seed=11)
    c = lw.full_factorial(MIXED, seed=12)
    assert a.table.equals(b.table)
    assert not a.table["standard_order"].equals(c.table["standard_order"])
    plain = lw.full_factorial(MIXED, randomize=False)
    assert plain.table["standard_order"].tolist() == list(range(1, 73))
    # Standard order: first factor changes fastest (as the two-level builder).
    assert plain.table["Supplier"].tolist()[:4] == ["a", "b", "c", "a"]


def test_general_factorial_blocks_hold_whole_replicates():
    d = lw.full_factorial(MIXED[:2], replicates=4, blocks=2, seed=1)
    assert d.table.groupby("block").size().tolist() == [18, 18]
    for _, part in d.table.groupby("block"):
        assert set(_combinations(part, ["Supplier", "Temp"]).values()) == {2}


def test_three_level_factorial_in_three_blocks_confounds_an_interaction_component():
    factors = [Factor(n, 0, 2, n_levels=3) for n in "ABC"]
    d = lw.full_factorial(factors, blocks=3, randomize=False)
    assert d.table.groupby("block").size().tolist() == [9, 9, 9]
    # x1 + x2 + x3 mod 3 splits a 3^3 into three blocks of 9 (the classic confounding of the ABC interaction
    # component; common practice).
    assert d.metadata["block_generators"] == [{"A": 1, "B": 1, "C": 1}]
    idx = d.table[list("ABC")].to_numpy().astype(int)
    for _, rows in d.table.groupby("block").groups.items():
        assert len({int(v) for v in idx[rows].sum(axis=1) % 3}) == 1
    # No main effect is confounded with blocks: each block holds every level of every factor equally often.
    for name in "ABC":
        for _, part in d.table.groupby("block"):
            assert Counter(part[name]) == {0.0: 3, 1.0: 3, 2.0: 3}


def test_general_factorial_centre_runs_at_each_level_of_categorical_factors():
    factors = [Factor("Oven", 160, 200), Factor("Time", 10, 20), Factor("Supplier", levels=["a", "b", "c"])]
    d = lw.full_factorial(factors, center_points=2, seed=3)
    centre = d.table[d.table["role"] == "centre"]
    assert len(d) == 4 * 3 + 2 * 3
    assert Counter(centre["Supplier"]) == {"a": 2, "b": 2, "c": 2}
    assert set(centre["Oven"]) == {180.0} and set(centre["Time"]) == {15.0}


def test_general_factorial_bad_input():
    with pytest.raises(LevelwiseError, match="blocks.*must divide"):
        lw.full_factorial([Factor("S", levels=list("abc")), Factor("T", 0, 1)], blocks=2)
    with pytest.raises(LevelwiseError, match="limit is 1,000,000"):
        lw.full_factorial([Factor(n, 0, 1, n_levels=10) for n in "ABCDEFG"])
    with pytest.raises(LevelwiseError, match="center_points.*every factor is categorical"):
        lw.full_factorial([Factor("S", levels=list("abc"))], center_points=1)


def test_two_level_full_factorial_unchanged_by_delegation():
    d = lw.full_factorial(3, blocks=2, randomize=False)
    assert d.kind == "full factorial" and d.block_confounded == ["ABC"]


def test_mixed_level_blocks_confound_only_an_interaction_of_the_two_level_factors():
    factors = [Factor("A", 0, 1), Factor("B", 0, 1), Factor("S", levels=["a", "b", "c"])]
    d = lw.full_factorial(factors, blocks=2, seed=7)
    assert d.metadata["block_generators"] == [{"A": 1, "B": 1}] and d.metadata["block_modulus"] == 2
    for _, part in d.table.groupby("block"):
        assert len(part) == 6
        # Every level of every factor equally often in each block: no main effect is confounded with blocks.
        for name in ("A", "B", "S"):
            assert len(set(Counter(part[name]).values())) == 1 and part[name].nunique() == (3 if name == "S" else 2)
        # A x B is: the block holds A = B or A != B only (AB interaction confounded; common practice).
        assert (part["A"] == part["B"]).nunique() == 1


def test_general_factorial_roles_are_documented():
    from levelwise.design import ROLES

    d = lw.full_factorial([Factor("T", 0, 1, n_levels=3), Factor("S", levels=["a", "b"]), Factor("P", 0, 1)],
                          center_points=1)
    assert set(d.table["role"]) == {"corner", "grid", "centre"} and set(d.table["role"]) <= set(ROLES)
    corner = d.coded[d.table["role"] == "corner"].to_numpy()
    assert np.all(np.abs(corner) == 1.0)
