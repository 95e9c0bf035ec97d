"""Desirability optimisation over a mixture region (levelwise.optimize on mixture fits).

Checks: the maximum of the yarn elongation Scheffé quadratic (coefficients FROM MEMORY, tests/data/SOURCES.md)
found by calculus on the edge x2 = 0 (hand computed below), and brute-force grids over the region (the {3, 150}
simplex lattice) as an independent search. Derringer & Suich (1980) desirabilities as in levelwise.optimize.
"""

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import LevelwiseError

DATA = Path(__file__).parent / "data" / "yarn_elongation.csv"
NAMES = ["x1", "x2", "x3"]


def lattice(m):
    return np.array([c for c in itertools.product(range(m + 1), repeat=3) if sum(c) == m], dtype=float) / m


@pytest.fixture(scope="module")
def yarn_fit():
    return lw.fit_mixture(pd.read_csv(DATA), "elongation", "scheffe_quadratic", NAMES)


def test_maximum_of_the_yarn_model(yarn_fit):
    # On x2 = 0: y = 11.7 x + 16.4 (1 - x) + 11.4 x (1 - x) = 16.4 + 6.7 x - 11.4 x^2, largest at x = 6.7 / 22.8
    # with y = 16.4 + 6.7^2 / 45.6 (hand computed from the published coefficients).
    best = lw.optimize({"elongation": yarn_fit}, {"elongation": lw.maximize(10, 20)}, seed=1)
    x = 6.7 / 22.8
    assert [best.settings[n] for n in NAMES] == pytest.approx([x, 0.0, 1 - x], abs=1e-5)
    assert best.predictions.loc["elongation", "mean"] == pytest.approx(16.4 + 6.7**2 / 45.6, abs=1e-8)
    grid = pd.DataFrame(lattice(150), columns=NAMES)
    assert yarn_fit.predict(grid)["mean"].max() <= best.predictions.loc["elongation", "mean"] + 1e-9


def test_constrained_target_and_grid(yarn_fit):
    goals = {"elongation": lw.target(12, 15, 18)}
    best = lw.optimize({"elongation": yarn_fit}, goals, constraints=["x3 <= 0.5", "x1 >= 0.2"], seed=2)
    s = best.settings
    assert sum(s.values()) == pytest.approx(1.0, abs=1e-12)
    assert s["x3"] <= 0.5 + 1e-9 and s["x1"] >= 0.2 - 1e-9
    grid = lattice(150)
    grid = grid[(grid[:, 2] <= 0.5) & (grid[:, 0] >= 0.2)]
    d = goals["elongation"](yarn_fit.predict(pd.DataFrame(grid, columns=NAMES))["mean"].to_numpy())
    assert best.overall >= d.max() - 1e-9
    assert best.overall == pytest.approx(1.0, abs=1e-6)  # 15 is reachable inside the region


def test_two_responses_with_a_process_factor():
    mix = lw.simplex_lattice([lw.Component("A", 0.2), lw.Component("B"), lw.Component("C")], 2, randomize=False)
    d = lw.mixture_process(mix, [lw.Factor("Temp", 150, 190)], randomize=False)
    data = d.table[["A", "B", "C", "Temp"]].copy()
    rng = np.random.default_rng(4)
    data["y1"] = 5 * data["A"] + 3 * data["B"] * data["C"] + data["Temp"] / 50 + rng.normal(0, 0.1, len(data))
    data["y2"] = 2 * data["C"] - data["Temp"] / 100 + rng.normal(0, 0.1, len(data))
    kw = dict(components=mix.mixture, process=[lw.Factor("Temp", 150, 190)])
    fits = {"y1": lw.fit_mixture(data, "y1", ("scheffe_quadratic", "main_effects"), **kw),
            "y2": lw.fit_mixture(data, "y2", ("scheffe_linear", "main_effects"), **kw)}
    goals = {"y1": lw.maximize(3, 6), "y2": lw.maximize(-1.5, 0)}
    best = lw.optimize(fits, goals, seed=3)
    s = best.settings
    assert s["A"] + s["B"] + s["C"] == pytest.approx(1.0, abs=1e-12) and s["A"] >= 0.2 - 1e-9
    assert 150 - 1e-9 <= s["Temp"] <= 190 + 1e-9
    # brute force over blends x temperatures
    blends = mix.mixture.from_pseudo(lattice(60))
    rows = pd.DataFrame([[*b, t] for b in blends for t in np.linspace(150, 190, 21)], columns=["A", "B", "C", "Temp"])
    dd = np.column_stack([goals[r](fits[r].predict(rows)["mean"].to_numpy()) for r in ("y1", "y2")])
    overall = np.sqrt(dd[:, 0] * dd[:, 1])
    assert best.overall >= overall.max() - 1e-6


def test_mixture_optimize_bad_input(yarn_fit):
    with pytest.raises(LevelwiseError, match="no fit"):
        lw.optimize({"elongation": yarn_fit}, {"other": lw.maximize(1, 2)})
    with pytest.raises(LevelwiseError, match="process factor"):
        lw.optimize({"elongation": yarn_fit}, {"elongation": lw.maximize(1, 2)}, region={"x1": (0, 0.5)})
