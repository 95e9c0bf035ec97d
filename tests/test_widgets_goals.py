"""Goals from the study drive the optimiser and the desirability slice; edits go back to the study.

The demo study is invented (dashboards/data/demo_campaign.json); the checks are bookkeeping: which
goal kind and target the views hold, and the limits set from the recorded values (the observed
minimum and maximum, computed here with numpy, not by the code under test).
"""

import numpy as np
import pytest

from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import OptimizerView, SharedModel, SurfaceSlice


@pytest.fixture
def shared():
    return SharedModel.from_study(demo_study())


def observed(shared, response):
    values = shared.data[response].to_numpy(dtype=float)
    values = values[np.isfinite(values)]
    return values.min(), values.max()


def test_stored_goals_show_in_the_optimiser_with_limits_from_the_data(shared):
    view = OptimizerView(shared)
    kinds = {r: row["kind"].value for r, row in view.goal_rows.items()}
    assert kinds == {"Impact": "maximize", "Gloss": "target", "Yellowness": "minimize",
                     "Adhesion": "maximize"}  # the demo file's goals
    # The pass/fail response's goal is stored on the probability scale (0.90, 0.98) and edited in %.
    assert (view.goal_rows["Adhesion"]["lower_limit"].value, view.goal_rows["Adhesion"]["target"].value) == (90, 98)
    lo, hi = observed(shared, "Impact")
    assert view.goal_rows["Impact"]["lower_limit"].value == lo
    assert view.goal_rows["Impact"]["target"].value == hi  # maximise: the largest value seen scores 1
    lo, hi = observed(shared, "Yellowness")
    assert view.goal_rows["Yellowness"]["target"].value == lo
    assert view.goal_rows["Yellowness"]["upper_limit"].value == hi
    assert view.goal_rows["Gloss"]["target"].value == 85.0
    assert "smallest" in view.defaults_note.value  # the rule is stated on screen


def test_desirability_slice_works_from_the_stored_goals_at_once(shared):
    view = SurfaceSlice(shared)
    view.quantity.value = "desirability"
    assert "needs goals" not in view.status.value
    grid = view._quantity_grid(shared.fit, view.x_factor.value, view.y_factor.value)[1]
    assert np.nanmax(grid) > 0 and np.nanmin(grid) < 1  # not all ones: the limits span the data


def test_goal_edits_are_written_to_the_study_with_an_audit_entry(shared):
    view = OptimizerView(shared)
    before = len(shared.study.audit)
    view.goal_rows["Impact"]["kind"].value = "minimize"
    assert shared.study.responses["Impact"].goal == "minimize"
    assert shared.study.audit[-1].action == "set_goal" and len(shared.study.audit) == before + 1
    lo, hi = observed(shared, "Impact")
    assert view.goal_rows["Impact"]["target"].value == lo  # a new kind starts from the data's limits
    view.set_goal("Gloss", "target", target=80.0)
    assert shared.study.responses["Gloss"].target == 80.0


def test_read_only_model_keeps_the_study_goals_unchanged():
    shared = SharedModel.from_study(demo_study(), read_only=True)
    view = OptimizerView(shared)
    view.goal_rows["Impact"]["kind"].value = "none"
    assert shared.study.responses["Impact"].goal == "maximize"
    assert "Impact" not in shared.goals
