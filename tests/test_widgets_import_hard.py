"""The upload's mapping step sets a factor hard to change (headless).

The table is invented: a 2^2 twice over in eight whole plots (Temp held within each whole plot) with a made-up response.
The checks are bookkeeping: which factors the new study marks hard to change, the whole plots it keeps, and the
refusal naming the whole plot when the ticked factor changes inside one.
"""

import io

import numpy as np
import pandas as pd

from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import SharedModel, TableImport


def split_plot_csv(break_plot: bool = False) -> bytes:
    # 8 whole plots of two runs: Temp is held within each whole plot, Time changes inside it.
    plots = np.repeat(np.arange(1, 9), 2)
    temps = np.where(plots % 2 == 1, 150, 190)
    times = np.tile([10, 30], 8)
    rng = np.random.default_rng(7)
    yields = 40 + (temps - 170) / 20 + 0.5 * (times - 20) / 10 + np.repeat(rng.normal(0, 0.5, 8), 2) \
        + rng.normal(0, 0.2, 16)
    if break_plot:
        temps[1] = 190  # Temp changes inside whole plot 1
    frame = pd.DataFrame({"run": range(1, 17), "whole_plot": plots, "Temp [°C]": temps, "Time [min]": times,
                          "Yield [%]": np.round(yields, 2)})
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False)
    return buffer.getvalue().encode()


def test_hard_to_change_is_set_in_the_mapping_step():
    shared = SharedModel.from_study(demo_study())
    view = TableImport(shared)
    view.load(split_plot_csv(), "oven.csv")
    assert set(view.rows["Temp [°C]"]) >= {"role", "low", "high", "levels", "units", "hard"}
    assert view.rows["Temp [°C]"]["hard"].value is False  # nothing is ticked by guesswork
    assert "lw-map-hard" in view.rows["Temp [°C]"]["hard"]._dom_classes
    view.rows["Temp [°C]"]["hard"].value = True
    study = view.make_study()
    assert shared.study is study
    assert study.hard_to_change == ["Temp"]
    assert [f.hard_to_change for f in study.factors] == [True, False]
    assert list(study.whole_plots()) == list(np.repeat(np.arange(1, 9), 2))  # the table's whole plots are kept
    assert "hard to change: Temp" in view.report.value


def test_without_the_tick_no_factor_is_hard_to_change():
    shared = SharedModel.from_study(demo_study())
    view = TableImport(shared)
    view.load(split_plot_csv(), "oven.csv")
    study = view.make_study()
    assert study.hard_to_change == [] and "hard to change" not in view.report.value


def test_a_hard_to_change_factor_that_moves_inside_a_whole_plot_is_refused_and_nothing_changes():
    before = demo_study()
    shared = SharedModel.from_study(before)
    view = TableImport(shared)
    view.load(split_plot_csv(break_plot=True), "oven.csv")
    view.rows["Temp [°C]"]["hard"].value = True
    assert view.make_study() is None
    assert shared.study is before  # the workbench keeps its study
    assert "Nothing was imported" in view.report.value and "Temp" in view.report.value
    assert "whole plot" in view.report.value


def test_too_few_whole_plots_for_reml_is_named_and_the_workbench_keeps_working():
    # Four whole plots of two runs, no whole-plot noise: statsmodels' REML meets a singular matrix. The fit says
    # so in words, and the workbench falls back to least squares with the study's warning instead of crashing.
    import pytest

    import levelwise as lw

    frame = pd.DataFrame({"run": range(1, 9), "whole_plot": [1, 1, 2, 2, 3, 3, 4, 4],
                          "Temp [°C]": [150, 150, 190, 190, 150, 150, 190, 190],
                          "Time [min]": [10, 30] * 4, "Yield [%]": [43.0, 43.1, 43.6, 43.7, 43.4, 43.5, 44.0, 44.1]})
    factors = [lw.Factor("Temp", 150, 190, hard_to_change=True), lw.Factor("Time", 10, 30)]
    table = frame.rename(columns={"Temp [°C]": "Temp", "Time [min]": "Time", "Yield [%]": "Yield"})
    with pytest.raises(lw.LevelwiseError, match="REML.*could not be made with 4 whole plots"):
        lw.fit(table, "Yield", "Temp + Time", factors=factors, whole_plot="whole_plot")
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False)
    shared = SharedModel.from_study(demo_study())
    view = TableImport(shared)
    view.load(buffer.getvalue().encode(), "small.csv")
    view.rows["Temp [°C]"]["hard"].value = True
    with pytest.warns(lw.LevelwiseWarning, match="split-plot fit could not be made"):
        study = view.make_study()
    assert shared.study is study and study.hard_to_change == ["Temp"]
    assert shared.fit is not None and type(shared.fit).__name__ == "Fit"  # least squares, with the warning
    assert "Internal error" not in view.status.value
