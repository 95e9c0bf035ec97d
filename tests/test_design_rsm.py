"""Screening and response-surface designs: Plackett-Burman, central composite, Box-Behnken."""

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from levelwise import LevelwiseError, box_behnken, central_composite, parse_model, plackett_burman
from levelwise.design import BB_GROUPS, plackett_burman_matrix
from levelwise.model import monomials

DATA = Path(__file__).parent / "data"


def model_matrix(spec, coded):
    """Model matrix of *spec* at coded settings (the formula's exponent rows evaluated)."""
    return monomials(np.asarray(coded, dtype=float), spec.exponents)


@pytest.mark.parametrize("runs", [12, 20, 24])
def test_plackett_burman_orthogonal(runs):
    # Plackett & Burman (1946): the N-run design has orthogonal columns, X'X = N I (intercept included).
    X = np.column_stack([np.ones(runs), plackett_burman_matrix(runs)])
    np.testing.assert_array_equal(X.T @ X, runs * np.eye(runs))
    d = plackett_burman(runs - 1, randomize=False)
    assert len(d) == runs and set(np.unique(d.coded.to_numpy())) == {-1.0, 1.0}


def test_plackett_burman_picks_runs_and_rejects_too_many():
    assert len(plackett_burman(11)) == 12 and len(plackett_burman(12)) == 20 and len(plackett_burman(20)) == 24
    with pytest.raises(LevelwiseError, match="up to 23 factors"):
        plackett_burman(24)
    with pytest.raises(LevelwiseError, match=r"'runs' parameter \(12\) is too small for 13 factors"):
        plackett_burman(13, runs=12)


def test_rotatable_alpha_table():
    # Source: tests/data/ccd_rotatable_alpha.csv, alpha = F^(1/4) (Box & Hunter 1957).
    table = pd.read_csv(DATA / "ccd_rotatable_alpha.csv")
    for row in table.itertuples():
        k = int(row.factors_k)
        p = 0 if "-" not in row.cube_portion else int(row.cube_portion.split("-")[1].rstrip(")"))
        d = central_composite(k, center_points=0, fraction=p, randomize=False)
        assert d.metadata["cube_points"] == row.cube_points_F
        assert len(d) == row.runs_without_center_points
        assert d.metadata["alpha"] == pytest.approx(row.alpha_rotatable, abs=5e-7)
        axial = d.coded.to_numpy()[(d.table.role == "axial").to_numpy()]
        assert len(axial) == row.axial_points
        assert np.abs(axial).max() == pytest.approx(row.alpha_rotatable, abs=5e-7)
        if p:
            assert d.metadata["cube_resolution"] >= 5


def test_rotatable_property():
    # Rotatability (Box & Hunter 1957): the prediction variance depends only on the distance from the centre.
    d = central_composite(3, center_points=6, randomize=False)
    spec = parse_model("full_second_order", d.factor_names)
    X = model_matrix(spec, d.coded.to_numpy())
    inv = np.linalg.inv(X.T @ X)
    rng = np.random.default_rng(1)
    for radius in (0.5, 1.0, 1.5):
        u = rng.normal(size=(20, 3))
        pts = radius * u / np.linalg.norm(u, axis=1, keepdims=True)
        v = np.einsum("ij,jk,ik->i", model_matrix(spec, pts), inv, model_matrix(spec, pts))
        assert np.ptp(v) < 1e-10


def test_orthogonal_alpha_makes_quadratic_columns_orthogonal():
    # Orthogonal CCD (from memory: alpha^4 = F (sqrt(N) - sqrt(F))^2 / 4); the property checked directly.
    for k, n0 in [(2, 5), (3, 6), (4, 4)]:
        d = central_composite(k, alpha="orthogonal", center_points=n0, randomize=False)
        sq = d.coded.to_numpy() ** 2
        sq = sq - sq.mean(axis=0)
        cross = sq.T @ sq
        assert np.abs(cross - np.diag(np.diag(cross))).max() < 1e-9


def test_ccd_kinds():
    face = central_composite(3, kind="face", randomize=False)
    assert np.abs(face.coded.to_numpy()).max() == 1.0
    ins = central_composite(3, kind="inscribed", randomize=False)
    assert np.abs(ins.coded.to_numpy()).max() == pytest.approx(1.0)
    assert len(central_composite(3, randomize=False)) == 8 + 6 + 4  # default 4 centre runs
    assert central_composite(2, alpha=1.5, randomize=False).metadata["alpha"] == 1.5
    with pytest.raises(LevelwiseError, match="'alpha' parameter must be"):
        central_composite(3, alpha="steep")
    with pytest.raises(LevelwiseError, match="'kind' parameter must be"):
        central_composite(3, kind="spherical")
    with pytest.raises(LevelwiseError, match="resolution V"):
        central_composite(6, fraction=2)


def test_box_behnken_run_counts():
    # 12, 24, 40, 48, 56 runs without centre points for k = 3..7 (from memory; confirmed here by construction).
    for k, runs in zip(range(3, 8), (12, 24, 40, 48, 56)):
        d = box_behnken(k, center_points=0, randomize=False)
        assert len(d) == runs
        coded = d.coded.to_numpy()
        assert not np.any(np.all(np.abs(coded) == 1, axis=1))  # no corner runs
        X = model_matrix(parse_model("full_second_order", d.factor_names), np.vstack([coded, np.zeros((3, k))]))
        assert np.linalg.matrix_rank(X) == X.shape[1]  # full quadratic model estimable with centre runs


def test_box_behnken_groups_cover_every_pair():
    for k, groups in BB_GROUPS.items():
        pairs = [pair for g in groups for pair in itertools.combinations(sorted(g), 2)]
        assert set(pairs) == set(itertools.combinations(range(k), 2))
    fano = [pair for g in BB_GROUPS[7] for pair in itertools.combinations(sorted(g), 2)]
    assert len(fano) == len(set(fano)) == 21  # k = 7: a balanced design, every pair exactly once


def test_box_behnken_bad_k():
    with pytest.raises(LevelwiseError, match="box_behnken handles 3 to 7 factors. Got 2"):
        box_behnken(2)
    with pytest.raises(LevelwiseError, match="continuous"):
        from levelwise import Factor

        box_behnken([Factor("A", 0, 1), Factor("B", 0, 1), Factor("M", levels=["x", "y"])])
