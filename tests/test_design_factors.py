"""Factors: categorical levels, validation, default names."""

import pytest

from levelwise import Factor, LevelwiseError, full_factorial
from levelwise.design import as_factors, default_names


def test_continuous_factor_unchanged():
    f = Factor("Oven", 160, 200, units="°C")
    assert not f.is_categorical and f.levels == ()
    assert f.to_coded(200) == 1.0 and f.to_natural(-1) == 160.0  # -1/+1 at low/high (common practice)


def test_categorical_factor():
    f = Factor("Metal", levels=["steel", "brass"])
    assert f.is_categorical and f.levels == ("steel", "brass")
    assert f.to_natural(-1) == "steel" and f.to_coded("brass") == 1.0
    three = Factor("Supplier", levels=["a", "b", "c"])  # level positions on [-1, +1] (issue 14)
    assert three.to_coded("a") == -1.0 and three.to_coded("b") == 0.0 and three.to_natural(1) == "c"


def test_categorical_in_two_level_design():
    d = full_factorial([Factor("Oven", 160, 200), Factor("Metal", levels=["steel", "brass"])], randomize=False)
    assert sorted(d.table["Metal"].tolist()) == ["brass", "brass", "steel", "steel"]
    assert set(d.coded["Metal"]) == {-1.0, 1.0}
    # Centre runs with a categorical factor: that many at each of its levels (issue 14).
    d = full_factorial([Factor("Oven", 160, 200), Factor("Metal", levels=["steel", "brass"])], center_points=2)
    centre = d.table[d.table["role"] == "centre"]
    assert sorted(centre["Metal"]) == ["brass", "brass", "steel", "steel"] and set(centre["Oven"]) == {180.0}


def test_factor_validation():
    with pytest.raises(LevelwiseError, match="at least 2 distinct levels"):
        Factor("Metal", levels=["steel"])
    with pytest.raises(LevelwiseError, match="at least 2 distinct levels"):
        Factor("Metal", levels=["steel", "steel"])
    with pytest.raises(LevelwiseError, match="either 'low' and 'high'.*or 'levels'"):
        Factor("Metal", 0, 1, levels=["a", "b"])
    with pytest.raises(LevelwiseError, match="needs 'low' and 'high'"):
        Factor("Oven")
    with pytest.raises(LevelwiseError, match="appears more than once"):
        as_factors([Factor("A", 0, 1), Factor("A", levels=["x", "y"])])


def test_default_names_skip_i():
    assert default_names(10) == list("ABCDEFGHJK")  # I skipped: it reads as the identity (common practice)
    assert [f.name for f in as_factors(9)][-1] == "J"
