"""Goal fields edited in the optimiser are written to the study and come back from its file (format 4).

The demo study is invented (dashboards/data/demo_campaign.json); the goal values are invented too. The checks
are bookkeeping: which fields the study stores after an edit, the audit entries, and what a new workbench on
the saved file shows in its goal editors.
"""

import numpy as np

from levelwise import Study
from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import OptimizerView, SharedModel


def test_goal_fields_round_trip_from_the_optimiser_through_the_file(tmp_path):
    shared = SharedModel.from_study(demo_study())
    view = OptimizerView(shared)
    gloss_before = shared.study.responses["Gloss"]
    view.set_goal("Impact", "maximize", lower_limit=8.0, target=12.0, s=2.0, weight=3.0)
    impact = shared.study.responses["Impact"]
    assert (impact.goal, impact.lower_limit, impact.target, impact.s, impact.weight) == (
        "maximize", 8.0, 12.0, 2.0, 3.0)
    assert impact.upper_limit is None and impact.t is None  # a maximise goal has neither
    assert shared.study.responses["Gloss"] == gloss_before  # editing one response stores nothing for the others
    assert shared.study.audit[-1].action == "set_goal" and "lower limit 8" in shared.study.audit[-1].what

    view.goal_rows["Impact"]["s"].value = 0.5  # an edit in the view goes to the study with its audit entry
    count = len(shared.study.audit)
    assert shared.study.responses["Impact"].s == 0.5 and shared.study.audit[-1].action == "set_goal"
    view.goal_rows["Impact"]["s"].value = 0.5  # the same value again: nothing new
    assert len(shared.study.audit) == count

    path = shared.study.save(tmp_path / "goals.json")
    again = SharedModel.from_study(Study.load(path))
    reopened = OptimizerView(again)
    row = reopened.goal_rows["Impact"]
    shown = {key: row[key].value for key in ("lower_limit", "target", "s", "weight")}
    assert row["kind"].value == "maximize"
    assert shown == {"lower_limit": 8.0, "target": 12.0, "s": 0.5, "weight": 3.0}  # stored, not from the data
    assert reopened.goals()["Impact"] == {"goal": "maximize", "lower_limit": 8.0, "target": 12.0, "s": 0.5,
                                          "weight": 3.0}
    # A response whose goal stores no limits still starts from its recorded values (observed here with numpy).
    values = again.data["Yellowness"].to_numpy(dtype=float)
    values = values[np.isfinite(values)]
    assert reopened.goal_rows["Yellowness"]["target"].value == values.min()
    assert reopened.goal_rows["Yellowness"]["upper_limit"].value == values.max()


def test_a_refused_goal_edit_is_shown_and_the_study_keeps_its_goal():
    shared = SharedModel.from_study(demo_study())
    view = OptimizerView(shared)
    view.set_goal("Impact", "maximize", lower_limit=8.0, target=12.0)
    view.goal_rows["Impact"]["lower_limit"].value = 15.0  # above the target
    assert "needs lower_limit &lt; target. Got lower_limit=15, target=12" in view.status.value
    assert shared.study.responses["Impact"].lower_limit == 8.0
