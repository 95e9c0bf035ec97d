"""Hard-to-change factors in designs without whole plots are refused; too few whole plots are warned (issue 13)."""

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import LevelwiseError, LevelwiseWarning
from levelwise.design._splitplot_checks import whole_plot_df

DATA = Path(__file__).parent / "data" / "splitplot"


def _factors(oven_hard=True):
    return [lw.Factor("Oven", 170, 210, "°C", hard_to_change=oven_hard), lw.Factor("Dwell", 8, 16, "min"),
            lw.Factor("Film", 40, 80, "µm"), lw.Factor("Airflow", 1, 3, "m/s")]


FAMILIES = {
    "central_composite": lambda f: lw.central_composite(f, seed=1),
    "box_behnken": lambda f: lw.box_behnken(f, seed=1),
    "plackett_burman": lambda f: lw.plackett_burman(f, seed=1),
    "definitive_screening": lambda f: lw.definitive_screening(f, seed=1),
    "general_factorial": lambda f: lw.general_factorial(
        [f[0], lw.Factor("Dwell", 8, 16, n_levels=3), *f[2:3]], seed=1),
    "optimal_design without 'whole_plots'": lambda f: lw.optimal_design(f, "main_effects", runs=8, seed=1,
                                                                           progress=False),
}


@pytest.mark.parametrize("name", list(FAMILIES))
def test_designs_without_whole_plots_refuse_hard_to_change_factors(name):
    make = FAMILIES[name]
    with pytest.raises(LevelwiseError) as err:
        make(_factors(oven_hard=True))
    message = str(err.value)
    assert message.startswith(name)
    assert "['Oven']" in message  # names the factor
    for supported in ("full_factorial", "fractional_factorial", "optimal_design(..., whole_plots=N)"):
        assert supported in message  # says which designs support them
    assert "hard_to_change=False" in message
    # The same call without the flag makes the design: the refusal is about the flag only.
    assert len(make(_factors(oven_hard=False))) > 0


def test_a_full_factorial_with_three_levels_and_a_hard_factor_is_refused_not_ignored():
    factors = [lw.Factor("Oven", 170, 210, hard_to_change=True), lw.Factor("Dwell", 8, 16, n_levels=3)]
    with pytest.raises(LevelwiseError, match=r"general_factorial .*\['Oven'\]"):
        lw.full_factorial(factors, seed=1)


def test_whole_plot_df_on_yates_oats():
    """Whole plots = block x variety (18); blocks and variety fixed: 18 - rank([6 blocks, 2 variety]) = 10.

    10 df for the whole-plot residual: tests/data/splitplot/README.md (Yates' oats; Venables & Ripley).
    """
    oats = pd.read_csv(DATA / "oats.csv")
    plots = (oats["block"] + ":" + oats["variety"]).to_numpy()
    variety = pd.get_dummies(oats["variety"], drop_first=True, dtype=float).to_numpy()
    nitrogen = pd.get_dummies(oats["nitrogen"].astype(str), drop_first=True, dtype=float).to_numpy()
    rows = np.column_stack([variety, nitrogen])  # nitrogen varies within every whole plot: not counted
    assert whole_plot_df(rows, plots, oats["block"].to_numpy()) == 10


@pytest.mark.parametrize("replicates,expected_df", [(2, 2), (3, 4), (4, 6)])
def test_whole_plot_df_of_a_two_level_split_plot(replicates, expected_df):
    """One hard two-level factor, whole plots completely randomised: whole-plot error df = a(r - 1) with a = 2.

    The classical split-plot ANOVA with completely randomised whole plots (common practice).
    """
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # enough whole plots: no warning
        d = lw.full_factorial(_factors()[:3], replicates=replicates, seed=2)
    rows = d.coded.to_numpy(dtype=float)
    assert whole_plot_df(rows, d.table["whole_plot"], d.table["block"]) == expected_df


def test_too_few_whole_plots_warn_and_the_design_is_still_made():
    with pytest.warns(LevelwiseWarning) as caught:
        d = lw.full_factorial(_factors()[:3], seed=2)
    message = str(caught[0].message)
    assert "only 2 whole plots" in message and "['Oven']" in message
    assert "leaves 0 degrees of freedom" in message and "Add replicates or whole plots" in message
    assert d.table["whole_plot"].nunique() == 2 and len(d) == 8


def test_two_hard_factors_in_one_replicate_warn_for_the_interaction_model():
    factors = [lw.Factor(n, -1, 1, hard_to_change=n in "AB") for n in "ABC"]
    # 4 whole plots; A, B and AB are whole-plot terms: 4 - rank([1, A, B, AB]) = 0 df (main effects alone: 1).
    with pytest.warns(LevelwiseWarning, match=r"only 4 whole plots.*leaves 0 .*main effects alone leave 1"):
        lw.full_factorial(factors, seed=3)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lw.full_factorial(factors, replicates=2, seed=3)


def test_optimal_split_plot_with_too_few_whole_plots_warns_about_its_model():
    factors = _factors()[:3]
    with pytest.warns(LevelwiseWarning, match=r"only 2 whole plots: the model 'Oven \+ Dwell \+ Film' leaves 0"):
        d = lw.optimal_design(factors, "Oven + Dwell + Film", runs=8, whole_plots=2, seed=1, progress=False)
    assert d.table["whole_plot"].nunique() == 2
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        d = lw.optimal_design(factors, "Oven + Dwell + Film", runs=12, whole_plots=4, seed=1, progress=False)
    assert whole_plot_df(d.coded.to_numpy(dtype=float), d.table["whole_plot"]) >= 1


def test_mixture_process_crossing_refuses_a_hard_to_change_process_factor():
    blends = lw.simplex_centroid(3, randomize=False)
    with pytest.raises(LevelwiseError, match=r"mixture_process .*\['Temp'\]"):
        lw.mixture_process(blends, [lw.Factor("Temp", 150, 190, hard_to_change=True)], seed=1)
    assert len(lw.mixture_process(blends, [lw.Factor("Temp", 150, 190)], seed=1)) == 14
