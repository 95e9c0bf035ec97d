"""The design table's columns and run roles: every role a design family writes is a documented plain name, and
the names of older levelwise versions translate through one table (levelwise.design.ROLE_RENAMES)."""

import numpy as np
import pandas as pd
import pytest

from levelwise import (
    Design,
    LevelwiseError,
    box_behnken,
    central_composite,
    fold_over,
    fractional_factorial,
    full_factorial,
    optimal_design,
    plackett_burman,
    read_run_sheet,
    write_run_sheet,
)
from levelwise.design import COLUMN_RENAMES, META_COLUMNS, ROLE_RENAMES, ROLES

#: The role values older levelwise versions wrote (column point_type), read off the previous code of every
#: design family: full and fractional factorials, Plackett-Burman, fold-over, central composite, Box-Behnken,
#: optimal designs with and without fixed runs.
OLD_ROLE_VALUES = {"factorial", "center", "axial", "edge", "optimal", "fixed"}


def _designs():
    screen = fractional_factorial(5, runs=8, center_points=2, seed=1)
    base = full_factorial(2, center_points=1, seed=2)
    return {
        "full factorial": (full_factorial(3, center_points=2, blocks=2, seed=1), {"corner", "centre"}),
        "fractional factorial": (screen, {"corner", "centre"}),
        "Plackett-Burman": (plackett_burman(7, center_points=1, seed=1), {"corner", "centre"}),
        "fold-over": (fold_over(screen, center_points=1, seed=2), {"corner", "centre"}),
        "central composite": (central_composite(3, seed=1), {"corner", "axial", "centre"}),
        "Box-Behnken": (box_behnken(3, seed=1), {"edge_midpoint", "centre"}),
        "optimal": (optimal_design(2, "A + B + A:B", runs=6, seed=1, starts=2), {"optimal"}),
        "optimal, augmenting": (optimal_design(2, "A + B + A:B", runs=3, fixed_runs=base, seed=1, starts=2),
                                {"optimal"}),
    }


@pytest.mark.parametrize("family", list(_designs()))
def test_every_family_writes_documented_roles_and_the_agreed_columns(family):
    design, expected = _designs()[family]
    assert list(design.table.columns[:4]) == ["run", "standard_order", "block", "role"] == list(META_COLUMNS)
    assert set(design.table.role) == expected
    assert expected <= set(ROLES)


def test_roles_match_the_settings_they_name():
    ccd = central_composite(3, center_points=3, randomize=False)
    coded, role = ccd.coded.to_numpy(), ccd.table.role.to_numpy()
    assert np.all(np.abs(coded[role == "corner"]) == 1.0)
    assert np.all(coded[role == "centre"] == 0.0)
    axial = coded[role == "axial"]
    assert np.all((axial != 0).sum(axis=1) == 1)  # one factor off centre
    bb = box_behnken(3, randomize=False)
    edge = bb.coded.to_numpy()[(bb.table.role == "edge_midpoint").to_numpy()]
    assert np.all((edge == 0).sum(axis=1) == 1)  # the middle of an edge of the cube: one factor at its centre
    pb = plackett_burman(11, randomize=False)
    assert np.all(np.abs(pb.coded.to_numpy()) == 1.0) and set(pb.table.role) == {"corner"}


def test_the_rename_table_covers_every_old_value_and_lands_on_plain_names():
    assert set(ROLE_RENAMES) == OLD_ROLE_VALUES
    assert ROLE_RENAMES == {"factorial": "corner", "center": "centre", "axial": "axial", "edge": "edge_midpoint",
                            "optimal": "optimal", "fixed": "earlier_run"}
    for new in ROLE_RENAMES.values():
        assert new.replace("_", "").isalpha() and new.islower()
    assert COLUMN_RENAMES == {"std_order": "standard_order", "point_type": "role"}


def test_design_keywords_and_bad_roles():
    d = Design(2, [[-1, -1], [1, 1], [0, 0]], ["corner", "corner", "centre"], standard_order=[3, 1, 2],
               randomize=False, first_run=7)
    assert d.table.run.tolist() == [7, 8, 9] and d.table.standard_order.tolist() == [3, 1, 2]
    with pytest.raises(LevelwiseError, match="one role per run"):
        Design(2, [[-1, -1], [1, 1]], ["corner"])
    with pytest.raises(LevelwiseError, match="non-empty string"):
        Design(2, [[-1, -1], [1, 1]], ["corner", ""])
    with pytest.raises(LevelwiseError, match="'first_run' parameter must be an integer >= 1"):
        Design(2, [[-1, -1]], ["corner"], first_run=0)
    with pytest.raises(LevelwiseError, match="'standard_order' parameter must give one value per run"):
        Design(2, [[-1, -1], [1, 1]], ["corner"] * 2, standard_order=[1])


def test_a_run_sheet_of_an_older_version_reads_with_todays_names(tmp_path):
    d = full_factorial(2, center_points=1, seed=1)
    path = tmp_path / "plan.csv"
    write_run_sheet(d, path)
    sheet = pd.read_csv(path)
    # As an older levelwise wrote it: std_order and point_type, "factorial" and "center".
    old = sheet.rename(columns={"standard_order": "std_order", "role": "point_type"})
    old["point_type"] = old["point_type"].map({"corner": "factorial", "centre": "center"})
    old["y"] = [1.0, 2.0, 3.0, 4.0, 5.0]
    filled = read_run_sheet(old, d)
    assert list(filled.table.columns[:4]) == ["run", "standard_order", "block", "role"]
    assert filled.table.role.tolist() == d.table.role.tolist()
    assert filled.table.standard_order.tolist() == d.table.standard_order.tolist()
