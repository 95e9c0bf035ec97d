"""The study file: round trip, audit log, backup, outside edits, migration, schema, to_code."""

from __future__ import annotations

import importlib.util
import json
import shutil

import jsonschema
import numpy as np
import pandas as pd
import pytest

from levelwise import Factor, LevelwiseError, LevelwiseWarning, OutsideEditError, Study, full_factorial
from levelwise.study import FORMAT_VERSION, content_hash

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min"), Factor("Film", 50, 90, "µm")]


def example_module(data_dir):
    spec = importlib.util.spec_from_file_location("make_example_study", data_dir / "make_example_study.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def small_study() -> Study:
    study = Study(FACTORS, title="Cure trial (invented)", notes="first notes")
    study.add_stage("screen", full_factorial(FACTORS, center_points=2, seed=3), description="2^3 + 2 centre")
    study.add_response("Impact", units="J", goal="maximize")
    study.add_response("Gloss", units="GU", goal="target", target=85.0)
    for run in study.run_ids:
        study.record(run, "Impact", 8.0 + 0.25 * run)  # invented
    study.record(3, "Gloss", 84.5)  # invented
    study.record_achieved(2, "Oven", 171.25, reason="controller log")
    study.exclude(4, "panel dropped", response="Impact")
    study.exclude(7, "wrong powder batch")
    study.set_model("Impact", "Oven + Dwell + Film")
    study.add_stage("fold-over", full_factorial(FACTORS, seed=4).table.assign(block=2), renumber=True)
    return study


def test_round_trip_keeps_every_field(tmp_path):
    study = small_study()
    path = study.save(tmp_path / "trial.json")
    loaded = Study.load(path)
    assert loaded.to_dict() == study.to_dict()
    assert loaded.audit == study.audit
    # Field by field, so a failure says which part was lost.
    assert loaded.title == "Cure trial (invented)" and loaded.notes == "first notes"
    assert loaded.factors == tuple(FACTORS)
    assert [s.name for s in loaded.stages] == ["screen", "fold-over"]
    assert loaded.stages[0].description == "2^3 + 2 centre"
    assert loaded.responses["Gloss"].target == 85.0 and loaded.responses["Impact"].units == "J"
    assert loaded.models == {"Impact": "Oven + Dwell + Film"}
    pd.testing.assert_frame_equal(loaded.exclusions, study.exclusions)
    pd.testing.assert_frame_equal(loaded.planned(), study.planned())
    pd.testing.assert_frame_equal(loaded.achieved(), study.achieved())
    pd.testing.assert_frame_equal(loaded.data(apply_exclusions=False), study.data(apply_exclusions=False))
    table = loaded.data(apply_exclusions=False)
    assert table.loc[2, "Oven"] == 171.25  # achieved replaces planned
    assert set(table.loc[table.stage == "fold-over", "block"]) == {2}
    assert loaded.achieved().loc[2, "Oven"] == 171.25 and np.isnan(loaded.achieved().loc[3, "Oven"])


def test_file_is_diff_friendly(tmp_path):
    study = small_study()
    text = study.save(tmp_path / "trial.json").read_text(encoding="utf-8")
    lines = text.splitlines()
    run_lines = [line for line in lines if line.lstrip().startswith('{"achieved"')]
    assert len(run_lines) == len(study)  # one run per line
    assert '"format_version": 4' in text and "°C" in text  # readable, not \u escapes
    document = json.loads(text)
    assert list(document) == sorted(document)  # keys sorted


def test_save_edit_save_keeps_backup_and_appends_audit(tmp_path):
    study = small_study()
    path = tmp_path / "trial.json"
    study.save(path)
    first = path.read_bytes()
    assert not (tmp_path / "trial.json.bak").exists()
    before = len(study.audit)
    study.record(5, "Gloss", 86.0, reason="late measurement")
    study.include(4, reason="the drop did not touch the test area")
    study.save(path)
    assert (tmp_path / "trial.json.bak").read_bytes() == first  # one generation kept
    loaded = Study.load(path)
    audit = loaded.audit
    assert len(audit) == before + 2
    assert audit[:before] == Study.load(tmp_path / "trial.json.bak").audit  # append-only: the old entries stay
    assert audit[-2].action == "record" and audit[-2].reason == "late measurement"
    assert "Gloss = 86.0 (was not recorded)" in audit[-2].what
    assert audit[-1].action == "include" and "run 4" in audit[-1].what
    assert all(entry.when.endswith("Z") for entry in audit)
    study.set_notes("third version")
    study.save(path)
    assert Study.load(tmp_path / "trial.json.bak").audit == audit  # .bak is now the second version
    assert sorted(p.name for p in tmp_path.iterdir()) == ["trial.json", "trial.json.bak"]  # no temp files left


def test_every_change_is_audited():
    study = Study(FACTORS)
    actions = [study.audit[-1].action]
    study.add_stage("s", full_factorial(FACTORS, randomize=False))
    study.add_response("y")
    study.record(1, "y", 1.0)
    study.record(1, "y", 2.0, overwrite=True, reason="typo")
    study.record_achieved(1, "Oven", 171.0)
    study.exclude(1, "bad")
    study.include(1)
    study.set_model("y", "main_effects")
    study.set_notes("n")
    study.set_title("t")
    study.set_goal("y", "minimize")
    actions += [entry.action for entry in study.audit[1:]]
    assert actions == ["create", "add_stage", "add_response", "record", "record", "record_achieved", "exclude",
                       "include", "set_model", "notes", "title", "set_goal"]
    assert "y = 2.0 (was 1.0)" in study.audit[4].what and study.audit[4].reason == "typo"


def test_returned_frames_are_copies():
    study = small_study()
    data = study.data()
    data.loc[:, "Impact"] = -1.0
    data.loc[1, "Oven"] = 0.0
    planned = study.planned()
    planned.loc[1, "Oven"] = 0.0
    exclusions = study.exclusions
    exclusions.loc[0, "reason"] = "changed"
    study.models["Impact"] = "Oven"
    assert study.data().loc[1, "Impact"] == 8.25
    assert study.planned().loc[1, "Oven"] != 0.0
    assert study.exclusions.loc[0, "reason"] == "panel dropped"
    assert study.models == {"Impact": "Oven + Dwell + Film"}
    copy = study.to_dict()
    copy["runs"][0]["planned"]["Oven"] = -5.0
    assert study.to_dict()["runs"][0]["planned"]["Oven"] != -5.0


def test_copy_is_independent_and_revision_counts_changes():
    study = small_study()
    twin = study.copy()
    assert twin.to_dict() == study.to_dict() and twin.audit == study.audit
    revision = study.revision
    twin.record(2, "Gloss", 80.0)
    assert twin.revision == revision + 1 and study.revision == revision
    assert np.isnan(study.data(apply_exclusions=False).loc[2, "Gloss"])


def test_recorded_value_needs_overwrite():
    study = small_study()
    with pytest.raises(LevelwiseError, match=r"response 'Impact' of run 1 is already recorded as 8.25; pass "
                                             r"overwrite=True"):
        study.record(1, "Impact", 9.0)
    study.record(1, "Impact", 8.25)  # the same value again is not a conflict
    study.record(1, "Impact", None, overwrite=True, reason="retest pending")
    assert np.isnan(study.data().loc[1, "Impact"])


def test_exclusions_apply_to_data_and_fits():
    study = small_study()
    data = study.data()
    assert 7 not in data.index  # excluded from every response
    assert np.isnan(data.loc[4, "Impact"])  # excluded from Impact only
    table = study.table()
    assert len(table) == len(study) and table.loc[4, "Impact"] == 9.0  # nothing dropped or blanked
    assert table.loc[4, "excluded"] == "Impact: panel dropped" and table.loc[7, "excluded"] == "all: wrong powder batch"
    assert table.loc[1, "excluded"] == ""
    with pytest.warns(LevelwiseWarning, match=r"'Impact' has no value for run\(s\) \[11, 12, "):
        fit = study.fit("Impact")  # runs 11.. (the second stage) are not measured yet
    assert sorted(fit.runs) == [r for r in range(1, 11) if r not in (4, 7)]
    with pytest.warns(LevelwiseWarning):
        assert set(study.fits()) == {"Impact"}
    with pytest.raises(LevelwiseError, match="'Gloss' has no model yet"):
        study.fit("Gloss")


def test_outside_edit_is_detected_and_can_be_accepted(tmp_path):
    path = small_study().save(tmp_path / "trial.json")
    text = path.read_text(encoding="utf-8").replace('"Impact": 8.5', '"Impact": 9.5', 1)
    assert '"Impact": 9.5' in text
    path.write_text(text, encoding="utf-8")
    with pytest.raises(OutsideEditError, match="edited outside levelwise.*accept_outside_edits=True"):
        Study.load(path)
    study = Study.load(path, accept_outside_edits=True)
    assert study.data().loc[2, "Impact"] == 9.5
    assert study.audit[-1].action == "accept_outside_edits"
    study.save(path)
    Study.load(path)  # saved again by levelwise: the hash matches


def test_format_0_file_is_migrated(data_dir, tmp_path):
    study = Study.load(data_dir / "study_v0.json")
    assert study.factor_names == ["Oven", "Dwell"] and study.factors[0].units == "°C"
    assert study.responses["Impact"].units == "J"
    assert study.models == {"Impact": "Oven + Dwell"}
    data = study.data(apply_exclusions=False)
    assert list(data["Impact"]) == [6.9, 9.6, 8.8, 10.1, 9.0, 15.2]  # the values in the file
    assert list(study.exclusions.run) == [6] and "no reason was recorded" in study.exclusions.reason[0]
    assert study.audit[0].action == "migrate"
    # A 2^2 with two centre points, run 6 excluded: the fit uses runs 1-5.
    fit = study.fit("Impact")
    assert list(fit.runs) == [1, 2, 3, 4, 5]
    # Effects by hand from the file's values (common practice: half the difference of the means, coded units):
    # Oven: ((9.6 + 10.1) - (6.9 + 8.8)) / 4 = 1.0; Dwell: ((8.8 + 10.1) - (6.9 + 9.6)) / 4 = 0.6.
    assert fit.coefficients.loc["Oven", "estimate"] == pytest.approx(1.0)
    assert fit.coefficients.loc["Dwell", "estimate"] == pytest.approx(0.6)
    # Saved again, it is a current-format file that validates and loads with its hash.
    saved = study.save(tmp_path / "migrated.json")
    document = json.loads(saved.read_text(encoding="utf-8"))
    assert document["format_version"] == FORMAT_VERSION == 4
    Study.load(saved)


def test_every_shipped_example_validates_against_the_schema(data_dir):
    from importlib import resources

    schema = json.loads(resources.files("levelwise.study").joinpath("study_schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    examples = sorted(data_dir.glob("study_*.json"))
    assert [p.name for p in examples] == ["study_example.json", "study_v0.json", "study_v1.json"]
    for path in examples:
        document = json.loads(path.read_text(encoding="utf-8"))
        if document["format_version"] < FORMAT_VERSION:
            continue  # older formats: migrated below and in tests/test_study_migration.py
        jsonschema.validate(document, schema)
        assert document["sha256"] == content_hash(document["data"], document["audit"])
    migrated = Study.load(data_dir / "study_v0.json")
    jsonschema.validate(json.loads(migrated.to_json()), schema)
    # The schema can fail: a run without planned settings is refused.
    bad = json.loads((data_dir / "study_example.json").read_text(encoding="utf-8"))
    del bad["data"]["runs"][0]["planned"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)


def test_shipped_example_matches_its_generator(data_dir):
    shipped = Study.load(data_dir / "study_example.json")
    rebuilt = example_module(data_dir).build()
    assert shipped.to_dict()["runs"] == rebuilt.to_dict()["runs"]
    assert shipped.models == rebuilt.models and len(shipped.stages) == 2


def test_to_code_rebuilds_the_fits(data_dir, tmp_path):
    path = tmp_path / "example.json"
    shutil.copy(data_dir / "study_example.json", path)
    study = Study.load(path)
    study.exclude(9, "sample mislabelled")
    study.save(path)
    code = study.to_code(path)
    namespace: dict = {}
    exec(compile(code, "<to_code>", "exec"), namespace)  # noqa: S102 - the point of the test
    fits = namespace["fits"]
    with pytest.warns(LevelwiseWarning, match=r"'Gloss' has no value for run\(s\) \[20, 21, 22\]"):
        expected = Study.load(path).fits()  # the centre-check stage measured Impact only
    assert set(fits) == set(expected) == {"Impact", "Gloss"}
    for response in fits:
        pd.testing.assert_frame_equal(fits[response].coefficients, expected[response].coefficients)
        assert list(fits[response].runs) == list(expected[response].runs)
    assert 9 not in fits["Gloss"].runs and 5 not in fits["Impact"].runs and 5 in fits["Gloss"].runs


def test_add_stage_keeps_the_run_ids_of_an_augmentation_and_refuses_repeated_ones():
    study = Study(FACTORS)
    screen = full_factorial(FACTORS, seed=5)  # 8 runs, ids 1..8
    assert study.add_stage("screen", screen) == list(screen.table["run"])
    # The new runs of an augmentation (as fold_over returns them): ids continue after the original ones.
    mirrored = screen.table.copy()
    for f in FACTORS:
        mirrored[f.name] = f.low + f.high - mirrored[f.name]
    mirrored["run"] = mirrored["run"] + 8
    mirrored["block"] = 2
    assert study.add_stage("fold-over", mirrored.iloc[::-1]) == list(range(16, 8, -1))
    assert len(study) == 16  # only the new runs were added
    # A design that repeats the original runs (the old runs and the new ones together) is refused.
    both = pd.concat([screen.table, mirrored.assign(run=mirrored["run"] + 8)])
    with pytest.raises(LevelwiseError, match=r"repeats run id\(s\) \[1, 2, 3, 4, 5, 6, 7, 8\] already in the "
                                             r"study.*add only the new runs.*renumber=True"):
        study.add_stage("again", both)
    assert len(study) == 16 and [s.name for s in study.stages] == ["screen", "fold-over"]  # nothing changed
    # An independent design numbered from 1 is added after the study's runs when asked to.
    assert study.add_stage("confirm", screen, renumber=True) == list(range(17, 25))
    with pytest.raises(LevelwiseError, match=r"names run id\(s\) \[3\] more than once"):
        study.add_stage("twice", screen.table.assign(run=[1, 2, 3, 3, 30, 31, 32, 33]))


def test_exclusions_table_keeps_none_for_every_response():
    study = small_study()  # run 4 excluded from Impact only, run 7 from every response
    rows = study.exclusions[["run", "response"]].values.tolist()
    assert rows == [[4, "Impact"], [7, None]]
    assert study.exclusions["response"].iloc[1] is None  # not NaN: "every response" stays distinguishable


def test_a_fold_over_stage_adds_only_the_new_runs():
    from levelwise import fold_over, fractional_factorial

    factors = [Factor(name, -1, 1) for name in "ABCDEFG"]
    study = Study(factors)
    screen = fractional_factorial(factors, runs=8, seed=1)
    study.add_stage("screen", screen)
    new = fold_over(screen, seed=2)
    ids = study.add_stage("fold-over", new)
    assert ids == list(new.table["run"]) and sorted(ids) == list(range(9, 17))  # ids continue after 1..8
    assert len(study) == 16
    planned = study.planned()
    assert set(planned.loc[ids, "block"]) == {2}
    with pytest.raises(LevelwiseError, match=r"repeats run id\(s\) \[1, 2, 3, 4, 5, 6, 7, 8, 9, 10, '...'\]"):
        study.add_stage("both", screen.combine(new))  # the old runs again: refused, nothing added
    assert len(study) == 16
