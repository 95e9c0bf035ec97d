"""Progress and Stop for the desirability optimiser's starts: in Python (callback, text line, Ctrl-C) and in
the optimiser view (worker thread, progress bar, Stop keeps the best so far).

The fits are those of the invented, seeded demo scenario (kernel_core/demo.py). The checks are bookkeeping
(how many starts ran, which result is kept, on which thread the widgets change); the desirability function is
Derringer & Suich (1980), as in test_analysis_optimize.py.
"""

from __future__ import annotations

import asyncio
import io
import threading
import time

import numpy as np
import pytest

from levelwise import demo, optimize
from levelwise._progress import SearchStoppedWarning
from levelwise.widgets import OptimizerView, SharedModel

GOALS = {"Impact": {"goal": "maximize", "lower_limit": 6.0, "target": 12.0}}


def make_shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                       units={"Impact": "J"}, design=demo.demo_design())


@pytest.fixture(scope="module")
def fits():
    return dict(make_shared().fits)


def test_callback_sees_every_start_and_stopping_keeps_the_best_so_far(fits):
    seen = []

    def progress(fraction, message):
        seen.append((fraction, message))
        return len(seen) < 4  # stop when the fourth start is about to run

    stopped = optimize(fits, GOALS, starts=10, seed=3, progress=progress)
    assert stopped.search_complete is False and stopped.stopped == "cancelled"
    assert len(stopped.starts) == 3  # three local searches ran
    assert stopped.overall == pytest.approx(stopped.starts["overall_D"].max())  # the best of them is kept
    assert [m.split(",")[0] for _, m in seen] == ["start 1 of 11", "start 2 of 11", "start 3 of 11",
                                                  "start 4 of 11"]  # 10 starts plus the region's centre
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0

    full_seen = []
    full = optimize(fits, GOALS, starts=10, seed=3, progress=lambda f, m: full_seen.append(f) is None)
    assert full.search_complete is True and full.stopped is None and len(full.starts) == 11
    assert full_seen[-1] == 1.0
    assert full.overall >= stopped.overall  # more starts never do worse from the same screened points


def test_stopped_before_any_start_returns_the_best_screened_point(fits):
    result = optimize(fits, GOALS, starts=5, seed=3, progress=lambda f, m: False)
    assert result.stopped == "cancelled" and len(result.starts) == 1
    assert 0.0 <= result.overall <= 1.0 and set(result.settings) == {f.name for f in demo.FACTORS}


def test_text_line_outside_jupyter(fits, monkeypatch):
    stream = io.StringIO()
    monkeypatch.setattr("sys.stderr", stream)
    optimize(fits, GOALS, starts=3, seed=1, progress=True)
    text = stream.getvalue()
    assert "Optimisation starts:   0.0% (start 1 of 4" in text
    assert text.rstrip().endswith("Optimisation starts: done")
    stream.truncate(0)
    optimize(fits, GOALS, starts=3, seed=1, progress=False)
    assert stream.getvalue() == ""


def test_ctrl_c_keeps_the_best_so_far_with_a_warning(fits):
    calls = []

    def progress(fraction, message):
        calls.append(fraction)
        if len(calls) == 3:
            raise KeyboardInterrupt
        return True

    with pytest.warns(SearchStoppedWarning, match="interrupted"):
        result = optimize(fits, GOALS, starts=8, seed=2, progress=progress)
    assert result.stopped == "interrupted" and result.search_complete is False and len(result.starts) == 2


def test_the_view_runs_the_starts_in_the_background_and_stop_keeps_the_best():
    changes = []

    async def scenario():
        shared = make_shared()
        view = OptimizerView(shared, starts=400, seed=5)  # enough starts to last well over a second here
        view.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0)
        main = threading.current_thread()
        view.task.progress.observe(lambda c: changes.append(threading.current_thread() is main), names="value")
        assert view.run() is None and view.task.running  # returned at once: the search runs on a worker thread
        assert view.task.thread is not None and view.task.thread is not main
        deadline = time.monotonic() + 60
        while view.task.progress.value <= 0.0:
            assert time.monotonic() < deadline, "no progress shown"
            await asyncio.sleep(0.02)  # the page stays live: the loop runs while the starts go on
        assert view.task.stop_button.layout.display == ""  # Stop is shown while the search runs
        view.task.stop()
        while view.task.running:
            assert time.monotonic() < deadline, "the search did not stop"
            await asyncio.sleep(0.02)
        optimum = view.optimum
        assert optimum is not None and optimum.stopped == "cancelled" and len(optimum.starts) < 401
        assert optimum.overall == pytest.approx(optimum.starts["overall_D"].max())
        assert "lw-search-incomplete" in view.status.value and "best settings found so far" in view.status.value
        assert "Overall desirability" in view.result.value and view.use_button.disabled is False
        assert view.task.stop_button.layout.display == "none"

    asyncio.run(scenario())
    assert changes and all(changes)  # every widget change was made on the kernel's main thread


def test_without_a_loop_the_view_runs_at_once_and_shows_the_result():
    shared = make_shared()
    view = OptimizerView(shared, starts=4, seed=1)
    view.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0)
    optimum = view.run()
    assert optimum is view.optimum and optimum.search_complete is True
    assert view.task.progress.value == 1.0 and view.task.stop_button.layout.display == "none"
    assert np.isfinite(optimum.overall) and "Overall desirability" in view.result.value


def test_categorical_levels_share_one_progress_and_stop_keeps_the_levels_searched():
    import test_categorical_search as cat  # the seeded invented data of the categorical search tests

    import levelwise as lw

    data = cat._data(1)
    fits = {"y1": lw.fit(data, "y1", cat.MODEL1, factors=cat.FACTORS)}
    goals = {"y1": lw.maximize(40, 70)}
    seen = []
    full = lw.optimize(fits, goals, seed=0, starts=3, progress=lambda f, m: seen.append((f, m)) is None)
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0  # one bar over every level combination
    assert all(m.startswith("Supplier = ") for _, m in seen)
    assert full.search_complete is True and len(full.by_level) == len(cat.LEVELS)
    count = []

    def stop_in_second(fraction, message):
        count.append(message)
        return not message.startswith(f"Supplier = {cat.LEVELS[1]}")

    stopped = lw.optimize(fits, goals, seed=0, starts=3, progress=stop_in_second)
    assert stopped.stopped == "cancelled" and stopped.search_complete is False
    assert list(stopped.by_level["Supplier"]) != [] and len(stopped.by_level) == 2  # the first level, and the
    # second one stopped before its first local search (its best screened point kept)
    assert stopped.overall == pytest.approx(stopped.by_level["overall_D"].max())


def test_mixture_optimisation_reports_progress_and_stops_with_the_best_so_far():
    from pathlib import Path

    import pandas as pd

    import levelwise as lw

    data = pd.read_csv(Path(__file__).parent / "data" / "yarn_elongation.csv")  # see tests/data/SOURCES.md
    fit = lw.fit_mixture(data, "elongation", "scheffe_quadratic", ["x1", "x2", "x3"])
    goals = {"elongation": lw.maximize(10, 20)}
    seen = []
    stopped = lw.optimize({"elongation": fit}, goals, seed=1, starts=6,
                          progress=lambda f, m: seen.append(m) or len(seen) < 3)
    assert stopped.stopped == "cancelled" and len(stopped.starts) == 2
    assert seen[0].startswith("start 1 of 6")
    assert stopped.overall == pytest.approx(stopped.starts["overall_D"].max())
    full = lw.optimize({"elongation": fit}, goals, seed=1, starts=6, progress=False)
    assert full.search_complete is True and len(full.starts) == 6 and full.overall >= stopped.overall
