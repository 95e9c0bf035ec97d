"""Two-level fractions: minimum aberration, the NIST resolution-IV index, generators, blocking, fold-over."""

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from levelwise import Design, LevelwiseError, fold_over, fractional_factorial, full_factorial
from levelwise.design import default_names
from tests.design_helpers import brute_force_wlp, factorial_part

DATA = Path(__file__).parent / "data"


def test_nist_resolution_iv_index():
    # Source: NIST DEXRES4.TXT index of minimal resolution-IV designs (tests/data, WLP recomputed there).
    table = pd.read_csv(DATA / "nist_dexres4_resolution_iv.csv")
    for row in table.itertuples():
        k, runs = int(row.factors_k), int(row.runs)
        published_wlp = tuple(int(v) for v in row.wlp_A3_to_A8_recomputed.split())
        if k == 5:
            # Erratum (tests/data/SOURCES.md): the printed k=5 definitions give an 8-run resolution-III design.
            d = fractional_factorial(5, runs=16, randomize=False)
            assert d.resolution >= 4
            printed = fractional_factorial(5, generators=row.definitions_in_letters.split(), randomize=False)
            assert printed.resolution == int(row.resolution_recomputed) == 3
            assert (printed.word_length_pattern + (0,) * 6)[:6] == published_wlp
            continue
        if k <= 11:
            d = fractional_factorial(k, runs=runs, randomize=False)  # searched: maximum resolution, then MA
        else:
            d = fractional_factorial(k, generators=row.definitions_in_letters.split(), randomize=False)
        assert len(d) == runs
        assert d.resolution >= 4
        wlp = (d.word_length_pattern + (0,) * 6)[:6]
        assert wlp == published_wlp, (k, wlp, published_wlp)
        assert brute_force_wlp(factorial_part(d))[2:8] == wlp[: len(brute_force_wlp(factorial_part(d))[2:8])]


def test_minimum_aberration_2_7_2():
    # 2^(7-2) minimum aberration: A4 = 1, A5 = 2 (from memory: Box, Hunter & Hunter).
    d = fractional_factorial(7, runs=32, randomize=False)
    assert d.resolution == 4
    assert d.word_length_pattern[:3] == (0, 1, 2)
    assert brute_force_wlp(factorial_part(d))[2:5] == (0, 1, 2)


@pytest.mark.parametrize("k,m", [(5, 3), (6, 3), (6, 4), (7, 4), (8, 4), (9, 4), (7, 5), (8, 5)])
def test_search_matches_exhaustive(k, m):
    # Exhaustive reference: every set of k-m distinct interaction columns of the 2^m factorial, with the
    # word-length pattern counted by brute force over all factor subsets (tests/design_helpers.py).
    basic = np.array(list(itertools.product((-1, 1), repeat=m)))
    columns = [mask for mask in range(1, 1 << m) if bin(mask).count("1") >= 2]
    best = None
    for combo in itertools.combinations(columns, k - m):
        added = [np.prod(basic[:, [j for j in range(m) if mask >> j & 1]], axis=1) for mask in combo]
        wlp = brute_force_wlp(np.column_stack([basic, *added]))
        best = wlp if best is None or wlp < best else best
    d = fractional_factorial(k, runs=1 << m, randomize=False)
    assert brute_force_wlp(factorial_part(d)) == best
    assert d.word_length_pattern == best[2:]


def test_given_generators_and_aliases():
    d = fractional_factorial(4, generators=["D=ABC"], randomize=False)
    assert d.generators == ["D=ABC"] and d.defining_relation == ("ABCD",) and d.resolution == 4
    coded = d.coded
    assert np.all(coded.D == coded.A * coded.B * coded.C)
    aliases = d.aliases(max_order=2)
    assert aliases["AB"] == ["CD"] and aliases["A"] == []  # I = ABCD: AB = CD (common practice)
    neg = fractional_factorial(4, generators=["D=-ABC"], randomize=False)
    assert np.all(neg.coded.D == -neg.coded.A * neg.coded.B * neg.coded.C)
    assert neg.defining_relation == ("-ABCD",) and neg.aliases(2)["AB"] == ["-CD"]


def test_named_factor_generators():
    from levelwise import Factor

    fs = [Factor("Oven", 0, 1), Factor("Dwell", 0, 1), Factor("Film", 0, 1)]
    d = fractional_factorial(fs, generators=["Film=Oven:Dwell"], randomize=False)
    assert d.generators == ["Film=Oven:Dwell"] and d.aliases(1)["Oven"] == []
    assert d.aliases(2)["Oven"] == ["Dwell:Film"]


def test_bad_generators_and_runs():
    with pytest.raises(LevelwiseError, match="not independent.*same column"):
        fractional_factorial(5, generators=["D=AB", "E=AB"])
    with pytest.raises(LevelwiseError, match="not independent.*single"):
        fractional_factorial(4, generators=["D=A"])
    with pytest.raises(LevelwiseError, match="not independent.*generated factor"):
        fractional_factorial(5, generators=["D=AB", "E=AD"])
    with pytest.raises(LevelwiseError, match="unknown factor 'Z'"):
        fractional_factorial(4, generators=["D=AZ"])
    with pytest.raises(LevelwiseError, match="'runs' parameter must be a power of two.*Got 12"):
        fractional_factorial(5, runs=12)
    with pytest.raises(LevelwiseError, match=r"'runs' parameter \(8\) is too small for 9 factors"):
        fractional_factorial(9, runs=8)
    with pytest.raises(LevelwiseError, match="No regular fraction of 6 factors in 16 runs reaches resolution 5"):
        fractional_factorial(6, runs=16, resolution=5)
    with pytest.raises(LevelwiseError, match=r"'runs' parameter \(16\) is more than the 8 distinct runs"):
        fractional_factorial(3, runs=16)
    with pytest.raises(LevelwiseError, match="needs 'runs', 'generators' or 'resolution'"):
        fractional_factorial(5)


def test_resolution_picks_smallest_runs():
    # Resolution V needs 16 runs for 5 factors and 64 for 8 (2^(5-1), 2^(8-2); common practice).
    assert len(fractional_factorial(5, resolution=5)) == 16
    assert len(fractional_factorial(8, resolution=5)) == 64


def test_full_factorial_blocks():
    # 2^3 in 2 blocks confounds ABC; 2^5 in 4 blocks confounds three effects, none below order 3
    # (standard blocking, common practice).
    d = full_factorial(3, blocks=2, randomize=False)
    assert d.block_confounded == ["ABC"]
    assert (d.coded.prod(axis=1) * np.where(d.table.block == 1, 1, -1)).abs().sum() == 8
    assert len(set((d.coded.prod(axis=1) * np.where(d.table.block == 1, 1, -1)).tolist())) == 1
    d5 = full_factorial(5, blocks=4, randomize=False)
    assert len(d5.block_confounded) == 3
    assert min(len(e) for e in d5.block_confounded) == 3
    with pytest.raises(LevelwiseError, match="power of two"):
        full_factorial(3, blocks=3)
    with pytest.raises(LevelwiseError, match="main effect would be confounded"):
        full_factorial(3, blocks=8)


def test_fraction_blocks_reported_in_aliases():
    d = fractional_factorial(6, runs=32, blocks=2, randomize=False)
    assert d.resolution == 6 and d.table.block.nunique() == 2
    confounded = d.block_confounded
    assert confounded and all("Block" in d.aliases(3)[e.split(" = ")[0]] for e in confounded
                              if len(e.split(" = ")[0]) <= 3)


def test_randomisation_seeded_within_blocks():
    a = full_factorial(4, blocks=2, center_points=2, seed=11)
    b = full_factorial(4, blocks=2, center_points=2, seed=11)
    c = full_factorial(4, blocks=2, center_points=2, seed=12)
    pd.testing.assert_frame_equal(a.table, b.table)
    assert not a.table.standard_order.equals(c.table.standard_order)
    assert a.table.block.is_monotonic_increasing  # blocks kept in sequence
    assert sorted(a.table.standard_order) == list(range(1, 19))


#: The textbook 2^(7-4) resolution III design D=AB, E=AC, F=BC, G=ABC (Box, Hunter & Hunter 2005, ch. 6; from
#: memory). Folded over on every factor, the odd-length words of its defining relation drop out (common practice):
#: the combined 16 runs keep exactly the seven 4-letter words, resolution IV, and the odd-length words (seven of
#: length 3 and ABCDEFG) are confounded with the fold-over block. The words are recomputed by brute force below.
TEXTBOOK_7_4 = ["D=AB", "E=AC", "F=BC", "G=ABC"]
TEXTBOOK_7_4_FOLDED_WORDS = {"ABCG", "ABEF", "ACDF", "ADEG", "BCDE", "BDFG", "CEFG"}


def _brute_force_words(coded, names):
    """Words of the defining relation: products of factor columns constant over the runs (brute force)."""
    out = {}
    for r in range(1, len(names) + 1):
        for combo in itertools.combinations(range(len(names)), r):
            column = coded[:, list(combo)].prod(axis=1)
            if np.all(column == column[0]):
                out["".join(names[j] for j in combo)] = int(column[0])
    return out


def test_fold_over_returns_only_the_new_runs_as_the_next_stage():
    d = fractional_factorial(7, generators=TEXTBOOK_7_4, seed=3)
    before = d.table.copy()
    new = fold_over(d, seed=4)
    pd.testing.assert_frame_equal(d.table, before)  # the original is untouched
    assert len(new) == 8
    assert sorted(new.table.run) == list(range(9, 17))  # run ids continue after the original's
    assert sorted(new.table.standard_order) == list(range(9, 17))
    assert set(new.table.block) == {2} and set(new.table.role) == {"corner"}
    # Each new run mirrors one original run (every sign reversed).
    assert sorted(map(tuple, -d.coded.to_numpy())) == sorted(map(tuple, new.coded.to_numpy()))
    # Its own seeded randomisation: the same seed gives the same order, another seed another order.
    pd.testing.assert_frame_equal(fold_over(d, seed=4).table, new.table)
    orders = {tuple(fold_over(d, seed=s).table.standard_order) for s in range(6)}
    assert len(orders) > 1
    # Not randomised: the mirrors in the original's standard order.
    plain = fold_over(d, randomize=False)
    np.testing.assert_array_equal(plain.coded.to_numpy(), -factorial_part(d))


def test_combine_of_a_full_fold_over_gives_the_known_resolution_iv_design():
    d = fractional_factorial(7, generators=TEXTBOOK_7_4, seed=3)
    assert d.resolution == 3
    both = d.combine(fold_over(d, seed=4))
    pd.testing.assert_frame_equal(both.table.iloc[:8], d.table)  # old runs first, in their original order
    assert both.table.run.tolist() == list(range(1, 17))
    assert len(both) == 16 and both.resolution == 4
    names = both.factor_names
    assert set(_brute_force_words(both.coded.to_numpy(), names)) == TEXTBOOK_7_4_FOLDED_WORDS
    assert {w.lstrip("-") for w in both.defining_relation} == TEXTBOOK_7_4_FOLDED_WORDS
    assert both.word_length_pattern == (0, 7, 0, 0, 0)  # the seven 4-letter words
    assert brute_force_wlp(both.coded.to_numpy())[2] == 0
    # The original's odd-length words are now confounded with the fold-over block.
    original = _brute_force_words(d.coded.to_numpy(), names)
    odd = {w for w in original if len(w) % 2}
    assert len(odd) == 8 and set(both.block_confounded[0].split(" = ")) == {w for w in odd if len(w) == 3}
    assert all(v == [] for key, v in both.aliases(2).items() if len(key) == 1)  # main effects clear of 2fi


def test_fold_on_one_factor_and_centre_points():
    d = fractional_factorial(7, runs=8, randomize=False)
    single = d.combine(fold_over(d, factor="A", seed=1))
    assert single.aliases(2)["A"] == []  # folding on A frees A from two-factor interactions (common practice)
    folded_a = fold_over(d, factor="A", randomize=False).coded.to_numpy()
    np.testing.assert_array_equal(folded_a[:, 0], -factorial_part(d)[:, 0])  # only A's column reversed
    np.testing.assert_array_equal(folded_a[:, 1:], factorial_part(d)[:, 1:])
    with_centre = fold_over(d, center_points=2, seed=1)
    assert len(with_centre) == 10 and (with_centre.table.role == "centre").sum() == 2
    assert sorted(with_centre.table.run) == list(range(9, 19))
    assert (with_centre.coded.to_numpy()[(with_centre.table.role == "centre").to_numpy()] == 0).all()
    assert d.combine(with_centre).resolution == 4  # centre runs do not change the two-level structure
    with pytest.raises(LevelwiseError, match="'factor' parameter must name a factor"):
        fold_over(d, factor="Z")
    with pytest.raises(LevelwiseError, match="corner runs"):
        fold_over(Design(d.factors, np.zeros((2, 7)), ["centre", "centre"]))
    with pytest.raises(LevelwiseError, match="must be a Design"):
        fold_over(d.table)


def test_fold_over_of_a_blocked_design_mirrors_its_blocks():
    d = fractional_factorial(6, runs=16, blocks=2, seed=5)
    new = fold_over(d, seed=6)
    assert set(new.table.block) == {3, 4}  # blocks 1, 2 -> 3, 4
    for b in (1, 2):
        mirrored = -d.coded.to_numpy()[(d.table.block == b).to_numpy()]
        got = new.coded.to_numpy()[(new.table.block == b + 2).to_numpy()]
        assert sorted(map(tuple, mirrored)) == sorted(map(tuple, got))


def test_combine_checks_its_input():
    d = fractional_factorial(4, generators=["D=ABC"], seed=1)
    with pytest.raises(LevelwiseError, match="repeats run id"):
        d.combine(d)
    with pytest.raises(LevelwiseError, match="same factors"):
        d.combine(full_factorial(3, seed=1))
    with pytest.raises(LevelwiseError, match="must be a Design"):
        d.combine(d.table)
    # A combination with runs that are neither corner nor centre runs has no two-level structure.
    axial = Design(d.factors, 2 * np.eye(4), ["axial"] * 4, first_run=9)
    assert d.combine(axial).resolution is None and not d.combine(axial).is_regular


def test_default_names_in_large_fraction():
    d = fractional_factorial(15, runs=16, randomize=False)
    assert d.factor_names == default_names(15) and d.resolution == 3


@pytest.mark.parametrize("seed", range(6))
def test_structure_matches_brute_force_for_random_generators(seed):
    # Random generator sets (possibly of low resolution) against the brute-force subset count.
    rng = np.random.default_rng(seed)
    m = int(rng.integers(3, 6))
    k = m + int(rng.integers(1, min(5, (1 << m) - m - 1) + 1))
    names = default_names(k)
    columns = [c for c in range(1, 1 << m) if bin(c).count("1") >= 2]
    chosen = rng.choice(columns, size=k - m, replace=False)
    gens = [f"{names[m + i]}={'-' if rng.random() < 0.3 else ''}"
            + "".join(names[j] for j in range(m) if int(c) >> j & 1) for i, c in enumerate(chosen)]
    d = fractional_factorial(k, generators=gens, randomize=False)
    wlp = brute_force_wlp(factorial_part(d))
    assert wlp[:2] == (0, 0) and d.word_length_pattern == wlp[2:]
    assert d.resolution == next(i + 1 for i, c in enumerate(wlp) if c)


def test_blocks_reach_highest_orders():
    # 2^7 in 8 blocks: the best block contrasts form the [7,3,4] simplex code, all seven of order 4
    # (from memory: coding theory, the dual of the Hamming code).
    d = full_factorial(7, blocks=8, randomize=False)
    assert len(d.block_confounded) == 7 and {len(e) for e in d.block_confounded} == {4}
    # 2 blocks: the highest-order interaction (common practice).
    assert full_factorial(6, blocks=2, randomize=False).block_confounded == ["ABCDEF"]
    # 2^15 in 4 blocks: three contrasts, each of order >= 10 is possible (weights 10, 10, 10 overlap in 5).
    big = full_factorial(15, blocks=4, randomize=False)
    assert min(len(e) for e in big.block_confounded) >= 10


def test_search_is_bounded_and_keeps_a_valid_design():
    from levelwise.design import minimum_aberration

    # A 2^(17-11) search cut short by a tiny node budget still returns a design, flagged incomplete; the
    # odd-weight incumbent has resolution IV (all words of even length: a counting argument, common practice).
    masks, pattern, complete = minimum_aberration(17, 6, budget=5)
    assert not complete and len(masks) == 11 and len(set(masks)) == 11
    assert pattern[:3] == (0, 0, 0)
    basic = np.array(list(itertools.product((-1, 1), repeat=6)))
    added = [np.prod(basic[:, [j for j in range(6) if mask >> j & 1]], axis=1) for mask in masks]
    assert brute_force_wlp(np.column_stack([basic, *added]))[:3] == (0, 0, 0)
