"""Split-plot designs: hard-to-change factors, whole plots and the restricted randomisation (issue 13)."""

import numpy as np
import pytest

import levelwise as lw
from levelwise import LevelwiseError, LevelwiseWarning

FEW = "only 2 whole plots"  # the too-few-whole-plots warning (levelwise.design._splitplot_checks)


def _factors(hard=("Oven",)):
    return [
        lw.Factor("Oven", 160, 200, hard_to_change="Oven" in hard),
        lw.Factor("Film", 40, 80, hard_to_change="Film" in hard),
        lw.Factor("Dwell", 5, 15),
        lw.Factor("Metal", levels=["steel", "brass"], hard_to_change="Metal" in hard),
    ]


def _check_restricted(design, hard):
    table = design.table
    wp = table["whole_plot"].to_numpy()
    # Whole plots contiguous in run order and numbered 1, 2, ... as they come.
    changes = np.flatnonzero(np.diff(wp) != 0)
    starts = np.concatenate([[0], changes + 1])
    assert list(wp[starts]) == list(range(1, len(starts) + 1))
    assert len(set(wp)) == len(starts)  # no whole plot comes back later
    # No hard-to-change factor changes inside a whole plot.
    for name in hard:
        assert (table.groupby("whole_plot")[name].nunique() == 1).all()
    return starts


def test_factor_hard_to_change_flag():
    assert lw.Factor("A", 0, 1).hard_to_change is False
    assert lw.Factor("A", 0, 1, hard_to_change=True).hard_to_change is True
    assert lw.Factor("M", levels=["a", "b"], hard_to_change=True).hard_to_change is True
    with pytest.raises(LevelwiseError, match="hard_to_change"):
        lw.Factor("A", 0, 1, hard_to_change="yes")


def test_full_factorial_whole_plots_are_hard_settings_times_replicates():
    d = lw.full_factorial(_factors(("Oven", "Metal")), replicates=2, seed=3)
    # 2 hard factors -> 4 settings, times 2 replicates = 8 whole plots of 4 runs.
    assert len(d) == 32
    assert d.table["whole_plot"].nunique() == 8
    assert (d.table.groupby("whole_plot").size() == 4).all()
    assert d.metadata["hard_to_change"] == ["Oven", "Metal"]
    assert d.metadata["whole_plots"] == 8
    # Each whole plot holds every setting of the easy factors once.
    for _, runs in d.table.groupby("whole_plot"):
        assert len(runs[["Film", "Dwell"]].drop_duplicates()) == 4
    _check_restricted(d, ["Oven", "Metal"])
    # The design itself is unchanged: the same runs as without the flag.
    plain = lw.full_factorial(_factors(()), replicates=2, randomize=False)
    key = ["Oven", "Film", "Dwell", "Metal"]
    assert sorted(map(tuple, d.table[key].astype(str).to_numpy())) == sorted(
        map(tuple, plain.table[key].astype(str).to_numpy()))


def test_restricted_randomisation_on_many_seeds():
    orders_of_plots, orders_within = set(), set()
    for seed in range(200):
        d = lw.full_factorial(_factors(("Oven",)), replicates=2, seed=seed)
        starts = _check_restricted(d, ["Oven"])
        assert len(starts) == 4  # 2 oven settings x 2 replicates
        oven = d.table["Oven"].to_numpy()[starts]
        orders_of_plots.add(tuple(oven))
        orders_within.add(tuple(d.table["standard_order" if "standard_order" in d.table else "std_order"][:8]))
    # The randomisation really moves whole plots and runs: several whole-plot orders, many run orders.
    assert len(orders_of_plots) >= 4
    assert len(orders_within) > 50


def test_same_seed_same_order_and_unrandomised_standard_order():
    with pytest.warns(LevelwiseWarning, match=FEW):
        a = lw.full_factorial(_factors(("Oven",)), seed=11)
    with pytest.warns(LevelwiseWarning, match=FEW):
        b = lw.full_factorial(_factors(("Oven",)), seed=11)
    assert a.table.equals(b.table)
    with pytest.warns(LevelwiseWarning, match=FEW):
        plain = lw.full_factorial(_factors(("Oven",)), randomize=False)
    _check_restricted(plain, ["Oven"])
    assert plain.table["Oven"].tolist() == [160.0] * 8 + [200.0] * 8


def test_blocks_keep_whole_plots_inside_blocks():
    d = lw.full_factorial(_factors(("Oven",)), blocks=2, seed=5)
    _check_restricted(d, ["Oven"])
    assert (d.table.groupby("whole_plot")["block"].nunique() == 1).all()
    assert list(d.table["block"]) == sorted(d.table["block"])  # blocks in sequence


def test_centre_points_form_their_own_whole_plot():
    factors = [lw.Factor("Oven", 160, 200, hard_to_change=True), lw.Factor("Dwell", 5, 15),
               lw.Factor("Film", 40, 80)]
    d = lw.full_factorial(factors, center_points=3, seed=2)
    _check_restricted(d, ["Oven"])
    centre = d.table[d.table["Oven"] == 180.0]
    assert len(centre) == 3 and centre["whole_plot"].nunique() == 1
    assert d.table["whole_plot"].nunique() == 3


def test_fractional_factorial_split_plot_keeps_alias_structure():
    factors = [lw.Factor(n, -1, 1, hard_to_change=n in ("A", "B")) for n in "ABCDE"]
    with pytest.warns(LevelwiseWarning, match="only 4 whole plots.*leaves 0 .*main effects alone leave 1"):
        d = lw.fractional_factorial(factors, generators=["E=ABCD"], seed=4)
    plain = lw.fractional_factorial([lw.Factor(n, -1, 1) for n in "ABCDE"], generators=["E=ABCD"])
    assert len(d) == 16 and d.resolution == 5
    assert d.aliases(2) == plain.aliases(2)
    assert d.table["whole_plot"].nunique() == 4
    _check_restricted(d, ["A", "B"])
    # Effects constant within whole plots (tested on the whole-plot stratum): A, B and AB only here.
    assert d.metadata["whole_plot_effects"] == ["A", "B", "AB"]
    with pytest.warns(LevelwiseWarning, match="whole plots"):
        searched = lw.fractional_factorial(factors, runs=8, seed=1)
    assert searched.resolution == 3
    _check_restricted(searched, ["A", "B"])


def test_run_sheet_shows_whole_plots():
    d = lw.full_factorial(_factors(("Oven",)), replicates=2, seed=1)
    sheet = d.to_run_sheet()
    assert "whole_plot" in sheet.columns
    assert sheet["whole_plot"].tolist() == d.table["whole_plot"].tolist()


def test_every_factor_hard_is_refused():
    with pytest.raises(LevelwiseError, match="easy factor"):
        lw.full_factorial([lw.Factor("A", 0, 1, hard_to_change=True), lw.Factor("B", 0, 1, hard_to_change=True)])


# -- optimal split-plot designs (Goos & Vandebroek 2001; Jones & Goos 2007) -----------------------------------
def _information(table, names, rows_of, eta):
    x = table[names].to_numpy(dtype=float)
    F = rows_of(x)
    wp = table["whole_plot"].to_numpy()
    V = np.eye(len(x)) + eta * (wp[:, None] == wp[None, :])
    return F.T @ np.linalg.solve(V, F)


def _two_factor_rows(x):
    a, b, c = x.T
    return np.column_stack([np.ones(len(x)), a, b, c, a * b, a * c, b * c])


def test_optimal_split_plot_structure_and_criterion():
    fs = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1), lw.Factor("C", -1, 1)]
    d = lw.optimal_design(fs, "(A+B+C)**2", runs=16, whole_plots=4, seed=1)
    _check_restricted(d, ["A"])
    assert d.table["whole_plot"].nunique() == 4 and (d.table.groupby("whole_plot").size() == 4).all()
    M = _information(d.table, ["A", "B", "C"], _two_factor_rows, 1.0)
    assert d.metadata["log_det"] == pytest.approx(np.linalg.slogdet(M)[1], rel=1e-10)
    # At least as good as the 2^3 split-plot factorial in 2 replicates (same runs and whole plots).
    ff = lw.full_factorial(fs, replicates=2, randomize=False)
    assert d.metadata["log_det"] >= np.linalg.slogdet(
        _information(ff.table, ["A", "B", "C"], _two_factor_rows, 1.0))[1] - 1e-9


def test_optimal_split_plot_without_whole_plot_variance_is_the_ordinary_optimum():
    fs = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1), lw.Factor("C", -1, 1)]
    d = lw.optimal_design(fs, "(A+B+C)**2", runs=16, whole_plots=4, variance_ratio=0.0, seed=2)
    # eta = 0: M = X'X; an orthogonal +-1 design of 16 runs and 7 columns has det = 16^7 (the maximum).
    assert d.metadata["log_det"] == pytest.approx(7 * np.log(16.0), rel=1e-12)


def test_optimal_split_plot_i_criterion_and_quadratic_levels():
    fs = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1)]
    d = lw.optimal_design(fs, "A + B + A:B + I(A**2) + I(B**2)", runs=18, whole_plots=6, criterion="I", seed=3,
                          starts=4)
    _check_restricted(d, ["A"])
    assert set(d.table["A"]) <= {-1.0, 0.0, 1.0} and d.table["A"].nunique() == 3

    def rows(x):
        a, b = x.T
        return np.column_stack([np.ones(len(x)), a, b, a * b, a * a, b * b])

    M = _information(d.table, ["A", "B"], rows, 1.0)
    # Moment matrix over the square [-1, 1]^2 (mean of x^i y^j: 1/(i+1) * 1/(j+1) for even powers, else 0).
    powers = np.array([[0, 0], [1, 0], [0, 1], [1, 1], [2, 0], [0, 2]])
    total = powers[:, None, :] + powers[None, :, :]
    Wm = np.where(total % 2 == 0, 1.0 / (total + 1.0), 0.0).prod(axis=2)
    assert d.metadata["average_prediction_variance"] == pytest.approx(np.trace(np.linalg.solve(M, Wm)), rel=1e-10)


def test_optimal_split_plot_bad_input():
    fs = [lw.Factor("A", -1, 1, hard_to_change=True), lw.Factor("B", -1, 1)]
    with pytest.raises(LevelwiseError, match="whole_plots"):
        lw.optimal_design(fs, "A + B", runs=4, whole_plots=6)
    with pytest.raises(LevelwiseError, match="variance_ratio"):
        lw.optimal_design(fs, "A + B", runs=8, whole_plots=4, variance_ratio=-1.0)
    with pytest.raises(LevelwiseError, match="hard_to_change"):
        lw.optimal_design([lw.Factor("A", -1, 1), lw.Factor("B", -1, 1)], "A + B", runs=8, whole_plots=4)


# -- seams: the run sheet read back and combined stages keep the whole plots ---------------------------------
def _filled_sheet(design, tmp_path, ext):
    """Write the design's run sheet, fill a response (invented numbers: 10 + run id / 10) and return its path."""
    import pandas as pd

    from levelwise._cells import write_xlsx

    path = lw.write_run_sheet(design, tmp_path / f"sheet.{ext}", responses=["y"])
    if ext == "csv":
        sheet = pd.read_csv(path)
        sheet["y"] = 10 + sheet["run"] / 10
        sheet.to_csv(path, index=False)
    else:
        sheet = pd.read_excel(path, sheet_name="runs")
        sheet["y"] = 10 + sheet["run"] / 10
        write_xlsx({"runs": sheet, "design": pd.read_excel(path, sheet_name="design")}, path)
    return path


@pytest.mark.parametrize("ext", ["csv", "xlsx"])
def test_a_split_plot_run_sheet_read_back_keeps_its_whole_plots(tmp_path, ext):
    import warnings

    factors = [lw.Factor("Oven", 160, 200, hard_to_change=True), lw.Factor("Film", 40, 80),
               lw.Factor("Dwell", 5, 15)]
    d = lw.full_factorial(factors, replicates=3, seed=4)
    path = _filled_sheet(d, tmp_path, ext)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no "column not used" warning for whole_plot
        filled = lw.read_run_sheet(path, design=d if ext == "csv" else None)  # XLSX: factors from its sheet
    by_run = dict(zip(d.table["run"], d.table["whole_plot"]))
    for frame in (filled.table, filled.data):
        assert list(frame.columns[:5]) == ["run", "standard_order", "block", "whole_plot", "role"]
        assert [by_run[r] for r in frame["run"]] == frame["whole_plot"].tolist()
    study = filled.study
    assert study.has_whole_plots and study.hard_to_change == ["Oven"]
    assert study.whole_plots().to_dict() == {int(k): int(v) for k, v in by_run.items()}
    assert isinstance(study.fit("y", "Oven + Film + Dwell"), lw.model.MixedFit)


def test_design_combine_keeps_whole_plots():
    factors = [lw.Factor("Oven", 160, 200, hard_to_change=True), lw.Factor("Film", 40, 80),
               lw.Factor("Dwell", 5, 15)]
    first = lw.full_factorial(factors, replicates=2, seed=1)  # 4 whole plots, runs 1..16
    second = lw.Design(factors, first.coded.to_numpy() * -1, first.table["role"], first.table["block"] + 1,
                       seed=2, first_run=17)  # 16 mirrored runs randomised freely: no whole plots (each run reset)
    both = first.combine(second)
    plots = both.table["whole_plot"].to_numpy()
    assert list(both.table.columns[:4]) == ["run", "standard_order", "block", "whole_plot"]
    np.testing.assert_array_equal(plots[:16], first.table["whole_plot"].to_numpy())  # kept as they were
    np.testing.assert_array_equal(plots[16:], np.arange(5, 21))  # one whole plot per run, after the first's
    assert both.metadata["whole_plots"] == 20 and both.metadata["hard_to_change"] == ["Oven"]
    # Two split-plot stages: the second's numbers continue after the first's (they would repeat 1..4).
    later = lw.Design(factors, second.coded.to_numpy(), second.table["role"], second.table["block"],
                      randomize=False, first_run=17)
    later.table.insert(3, "whole_plot", np.repeat([1, 2, 3, 4], 4))
    again = first.combine(later)
    np.testing.assert_array_equal(again.table["whole_plot"].to_numpy()[16:], np.repeat([5, 6, 7, 8], 4))
    # Neither stage with whole plots: no column, as before.
    plain = lw.full_factorial(3, seed=1)
    assert "whole_plot" not in plain.combine(lw.fold_over(plain, seed=2)).table.columns


@pytest.mark.parametrize("factor", [None, "Oven", "Dwell"])
def test_fold_over_of_a_split_plot_design_mirrors_each_whole_plot(factor):
    factors = [lw.Factor("Oven", 160, 200, hard_to_change=True), lw.Factor("Film", 40, 80),
               lw.Factor("Dwell", 5, 15)]
    first = lw.full_factorial(factors, replicates=2, seed=1)
    new = lw.fold_over(first, factor=factor, center_points=2, seed=3)
    assert new.table["run"].tolist() == list(range(17, 35)) and set(new.table["block"]) == {2}
    _check_restricted(new, ["Oven"])  # whole plots contiguous, numbered in run order, Oven constant in each
    flip = {None: [-1, -1, -1], "Oven": [-1, 1, 1], "Dwell": [1, 1, -1]}[factor]
    corners = new.table["role"] == "corner"
    # Each original whole plot's runs, mirrored, are one new whole plot (4 runs); the centre runs one more.
    mirrored = {}
    for plot, rows in first.coded.groupby(first.table["whole_plot"]):
        mirrored[plot] = sorted(map(tuple, (rows.to_numpy() * flip).tolist()))
    got = sorted(sorted(map(tuple, rows.to_numpy().tolist()))
                 for _, rows in new.coded[corners.to_numpy()].groupby(new.table.loc[corners, "whole_plot"]))
    assert got == sorted(mirrored.values())
    assert new.table.loc[~corners, "whole_plot"].nunique() == 1 and new.metadata["whole_plots"] == 5
    both = first.combine(new)
    assert both.table["whole_plot"].tolist()[16:] == (new.table["whole_plot"] + 4).tolist()
