"""Goal fields in the study file (format 4): stored, validated, logged, read back, migrated from format 3.

The goal fields are those of the Derringer-Suich desirability function (Derringer & Suich 1980, J. Quality
Technology 12: lower limit L, target T, upper limit U, exponents s and t; the relative weight of a response in
the weighted geometric mean D). The ordering rules (L < T for maximise, T < U for minimise, L < T < U for a
target) are those of the published function; values in these tests are invented.
"""

from __future__ import annotations

import json

import pytest

from levelwise import Factor, LevelwiseError, Study
from levelwise.study import FORMAT_VERSION, content_hash
from levelwise.study._migrations import migrate_v3


def small_study() -> Study:
    study = Study([Factor("Oven", 150, 200, units="degC"), Factor("Dwell", 1, 3, units="min")], title="goals")
    study.add_response("Impact", units="J", goal="maximize")
    study.add_response("Gloss", units="GU", goal="target", target=85.0)
    study.add_response("Haze", units="%")
    return study


def test_goal_fields_round_trip_through_the_file(tmp_path):
    study = small_study()
    study.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0, s=2.0, weight=3.0)
    study.set_goal("Gloss", "target", 85.0, lower_limit=80.0, upper_limit=92.0, s=0.5, t=1.5, weight=1.0)
    study.set_goal("Haze", "minimize", target=1.0, upper_limit=4.0, t=1.0, weight=0.5)
    path = study.save(tmp_path / "goals.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    assert document["format_version"] == FORMAT_VERSION == 4
    written = {r["name"]: r for r in document["data"]["responses"]}
    assert written["Impact"] == {"name": "Impact", "units": "J", "goal": "maximize", "target": 12.0,
                                 "lower_limit": 6.0, "s": 2.0, "weight": 3.0}
    assert written["Haze"] == {"name": "Haze", "units": "%", "goal": "minimize", "target": 1.0, "upper_limit": 4.0,
                               "t": 1.0, "weight": 0.5}
    back = Study.load(path)
    gloss = back.responses["Gloss"]
    assert (gloss.goal, gloss.lower_limit, gloss.target, gloss.upper_limit, gloss.s, gloss.t, gloss.weight) == (
        "target", 80.0, 85.0, 92.0, 0.5, 1.5, 1.0)
    impact = back.responses["Impact"]
    assert (impact.lower_limit, impact.target, impact.upper_limit, impact.s, impact.t, impact.weight) == (
        6.0, 12.0, None, 2.0, None, 3.0)
    assert back.to_dict() == study.to_dict()
    # Every change is in the audit log with the fields set.
    whats = [a.what for a in back.audit if a.action == "set_goal"]
    assert whats[0] == "goal of 'Impact' set to maximize (lower limit 6, target 12, s 2, weight 3)"
    assert len(whats) == 3


def test_setting_the_same_goal_again_logs_nothing():
    study = small_study()
    study.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0)
    before = len(study.audit)
    study.set_goal("Impact", "maximize", lower_limit=6.0, target=12.0)
    assert len(study.audit) == before


@pytest.mark.parametrize(("kind", "fields", "words"), [
    ("maximize", {"upper_limit": 4.0}, "'upper_limit' of response 'Impact' is not used by a 'maximize' goal"),
    ("maximize", {"t": 2.0}, "'t' of response 'Impact' is not used by a 'maximize' goal"),
    ("minimize", {"lower_limit": 1.0}, "'lower_limit' of response 'Impact' is not used by a 'minimize' goal"),
    ("none", {"weight": 1.0}, "is not used by a 'none' goal (it uses nothing)"),
    ("maximize", {"lower_limit": 12.0, "target": 6.0}, "needs lower_limit < target. Got lower_limit=12, target=6"),
    ("target", {"lower_limit": 1.0, "target": 5.0, "upper_limit": 5.0}, "needs lower_limit < target < upper_limit"),
    ("maximize", {"s": 0.0}, "'s of response 'Impact'' must be a number > 0. Got 0.0"),
    ("maximize", {"weight": -1.0}, "'weight of response 'Impact'' must be a number > 0"),
    ("maximize", {"lower_limit": float("nan")}, "'lower_limit of response 'Impact'' must be a finite number"),
    ("maximize", {"lower_limit": "5"}, "'lower_limit of response 'Impact'' must be a finite number"),
])
def test_bad_goal_fields_are_refused_naming_the_field(kind, fields, words):
    study = small_study()
    before = study.to_dict()
    fields = dict(fields)
    target = fields.pop("target", None)
    with pytest.raises(LevelwiseError) as excinfo:
        study.set_goal("Impact", kind, target, **fields)
    assert words in str(excinfo.value)
    assert study.to_dict() == before  # nothing changed


def test_a_hand_written_bad_goal_field_is_named_on_load(tmp_path):
    study = small_study()
    path = study.save(tmp_path / "goals.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    document["data"]["responses"][0]["s"] = -1
    document["sha256"] = content_hash(document["data"], document["audit"])
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(LevelwiseError, match=r"field 'data\.responses\[0\]\.s': -1 is less than or equal to"):
        Study.load(path)
    document["data"]["responses"][0]["s"] = 1.0
    document["data"]["responses"][0]["upper_limit"] = 3.0  # a maximise goal has no upper limit
    document["sha256"] = content_hash(document["data"], document["audit"])
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(LevelwiseError, match=r"data\.responses\[0\].*'upper_limit' of response 'Impact' is not used"):
        Study.load(path)


def test_format_3_files_migrate_to_format_4_with_their_data_unchanged():
    document = {"format_version": 3, "data": {"responses": [{"name": "y", "units": "", "goal": "maximize",
                                                             "target": None}]}, "audit": [], "sha256": "0" * 64}
    migrated = migrate_v3(document)
    assert migrated["format_version"] == 4 and migrated["data"] == document["data"]
    assert migrated["audit"][-1]["what"] == "migrated from format 3 to format 4"
    assert migrated["sha256"] == content_hash(migrated["data"], migrated["audit"]) != "0" * 64
    assert document["format_version"] == 3 and document["audit"] == []  # the input is not changed
