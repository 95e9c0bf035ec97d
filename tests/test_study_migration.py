"""Study files of earlier formats load: format 0 -> 1 -> 2 -> 3 -> 4, on every shipped and test study file."""

from __future__ import annotations

import json
from importlib import resources
from pathlib import Path

import jsonschema
import pytest

from levelwise import LevelwiseWarning, OutsideEditError, Study
from levelwise.study import FORMAT_VERSION, content_hash, migrate_v1, migrate_v2

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data"
SHIPPED = ROOT / "dashboards" / "data" / "demo_campaign.json"
SHIPPED_SPLIT_PLOT = ROOT / "dashboards" / "data" / "demo_split_plot.json"
SHIPPED_REFORMULATION = ROOT / "dashboards" / "data" / "demo_reformulation.json"


def study_files() -> list[Path]:
    """Every study file in the repository's test data and shipped data (a JSON object with a format_version)."""
    found = []
    for path in sorted(DATA.glob("*.json")) + [SHIPPED, SHIPPED_SPLIT_PLOT, SHIPPED_REFORMULATION]:
        document = json.loads(path.read_text(encoding="utf-8"))
        if isinstance(document, dict) and "format_version" in document:
            found.append(path)
    return found


def schema() -> dict:
    return json.loads(resources.files("levelwise.study").joinpath("study_schema.json").read_text(encoding="utf-8"))


def test_the_files_checked_are_the_ones_expected():
    names = [p.name for p in study_files()]
    assert names == ["demo_campaign_v1.json", "study_example.json", "study_v0.json", "study_v1.json",
                     "demo_campaign.json", "demo_split_plot.json", "demo_reformulation.json"]
    versions = {p.name: json.loads(p.read_text(encoding="utf-8"))["format_version"] for p in study_files()}
    assert versions == {"demo_campaign_v1.json": 1, "study_example.json": 2, "study_v0.json": 0,
                        "study_v1.json": 1, "demo_campaign.json": 4,
                        "demo_split_plot.json": 4,
                        "demo_reformulation.json": 4}  # the shipped files are in the new format


@pytest.mark.parametrize("path", study_files(), ids=lambda p: p.name)
def test_every_study_file_loads_and_saves_in_the_current_format(path, tmp_path):
    study = Study.load(path)
    assert len(study) > 0 and study.responses
    saved = study.save(tmp_path / path.name)
    document = json.loads(saved.read_text(encoding="utf-8"))
    assert document["format_version"] == FORMAT_VERSION == 4
    jsonschema.validate(document, schema())
    assert document["sha256"] == content_hash(document["data"], document["audit"])
    for run in document["data"]["runs"]:
        assert "role" in run and "standard_order" in run and "point_type" not in run and "std_order" not in run
        assert run["role"] in ("corner", "centre", "axial", "edge_midpoint", "optimal", "",
                               "vertex", "edge_centroid", "overall_centroid")  # a mixture design's roles
    again = Study.load(saved)
    assert again.to_dict() == study.to_dict()


def test_format_1_example_migrates_to_the_runs_of_the_current_example():
    old = Study.load(DATA / "study_v1.json")
    new = Study.load(DATA / "study_example.json")  # the same seeded generator, written in format 2
    assert old.to_dict()["runs"] == new.to_dict()["runs"]
    roles = [run["role"] for run in old.to_dict()["runs"]]
    assert roles.count("corner") == 16 and roles.count("centre") == 6  # 2^4 corners; 3 + 3 centre runs
    assert old.models["Gloss"] == "main_effects"  # was the preset "linear"
    assert old.models["Impact"] == new.models["Impact"]  # a formula is kept as written
    assert [(a.action, a.what) for a in old.audit[-3:]] == [("migrate", "migrated from format 1 to format 2"),
                                                            ("migrate", "migrated from format 2 to format 3"),
                                                            ("migrate", "migrated from format 3 to format 4")]


def test_shipped_demo_of_format_1_migrates_to_the_regenerated_demo():
    old = Study.load(DATA / "demo_campaign_v1.json").to_dict()
    shipped = Study.load(SHIPPED).to_dict()
    # The same seeded script wrote both. The fold-over stage is now randomised on its own (fold_over returns only
    # the new runs), so its run order and the noise drawn for each run differ; the screen and the surface
    # stage (whose noise is drawn after the same number of draws) are the same runs, value for value.
    # The pass/fail responses added later (Panels, Adhesion: issue 15) come from a stream of their own, so the
    # responses the old file has keep their values.
    added = ("Panels", "Adhesion")

    def measured(run):
        return {**run, "responses": {k: v for k, v in run["responses"].items() if k not in added}}

    for stage in ("screen", "surface"):
        assert [r for r in old["runs"] if r["stage"] == stage] == [measured(r) for r in shipped["runs"]
                                                                   if r["stage"] == stage]

    def folded(document):
        return sorted(
            (tuple(sorted(r["planned"].items())), r["role"], r["block"]) for r in document["runs"]
            if r["stage"] == "fold-over"
        )

    assert len(folded(shipped)) == 16 and folded(old) == folded(shipped)  # the same 16 mirrored settings
    assert old["exclusions"] == shipped["exclusions"]
    assert old["models"] == {k: v for k, v in shipped["models"].items() if k not in added}


def test_the_frozen_mapping_of_format_1():
    # The renames agreed for format 2 (common practice for a migration: a frozen copy, checked literally here).
    document = {
        "format_version": 1,
        "data": {
            "runs": [{"run": i + 1, "std_order": i + 1, "point_type": old}
                     for i, old in enumerate(["factorial", "center", "axial", "edge", "optimal", "", "my own"])],
            "responses": [{"name": "y", "low": 1.0, "high": 5.0, "importance": 3, "target": 2.0}],
            "models": {"a": "linear", "b": "interactions", "c": "quadratic", "d": "Oven + linear", "e": " quadratic "},
        },
        "audit": [],
        "sha256": "0" * 64,
    }
    migrated = migrate_v1(document)
    assert migrated["format_version"] == 2
    assert [run["role"] for run in migrated["data"]["runs"]] == [
        "corner", "centre", "axial", "edge_midpoint", "optimal", "", "my own"]
    assert [run["standard_order"] for run in migrated["data"]["runs"]] == list(range(1, 8))
    assert all("std_order" not in run and "point_type" not in run for run in migrated["data"]["runs"])
    assert migrated["data"]["responses"] == [{"name": "y", "lower_limit": 1.0, "upper_limit": 5.0, "weight": 3,
                                              "target": 2.0}]
    assert migrated["data"]["models"] == {"a": "main_effects", "b": "two_factor_interactions",
                                          "c": "full_second_order", "d": "Oven + linear", "e": "full_second_order"}
    assert document["data"]["runs"][0]["point_type"] == "factorial"  # the input is not changed


def test_a_format_1_file_edited_outside_levelwise_is_still_caught(tmp_path):
    text = (DATA / "study_v1.json").read_text(encoding="utf-8")
    first = json.loads(text)["data"]["runs"][0]
    value = first["responses"]["Impact"]
    edited = text.replace(f'"Impact": {value}', f'"Impact": {value + 1}', 1)
    assert edited != text
    path = tmp_path / "edited.json"
    path.write_text(edited, encoding="utf-8")
    with pytest.raises(OutsideEditError, match="edited outside levelwise"):
        Study.load(path)  # the format-1 hash is checked before the migration rewrites it
    study = Study.load(path, accept_outside_edits=True)
    assert study.data(apply_exclusions=False).loc[first["run"], "Impact"] == pytest.approx(value + 1)
    assert [a.action for a in study.audit[-2:]] == ["migrate", "accept_outside_edits"]


def test_format_2_files_migrate_to_format_3_with_their_data_unchanged():
    # Format 3 only adds optional keys (hard_to_change on a factor, whole_plot on a run): absent = format 2.
    for path in study_files():
        raw = json.loads(path.read_text(encoding="utf-8"))
        if raw["format_version"] != 2:
            continue
        study = Study.load(path)
        assert study.to_dict() == raw["data"]  # the data block as written, nothing added
        assert not study.has_whole_plots and study.hard_to_change == []
        assert [(a.action, a.what) for a in study.audit[-2:]] == [("migrate", "migrated from format 2 to format 3"),
                                                                  ("migrate", "migrated from format 3 to format 4")]
        assert len(study.audit) == len(raw["audit"]) + 2
        with pytest.warns(LevelwiseWarning, match="no value for run"):  # this example has unmeasured runs
            assert type(study.fit(next(iter(study.models)))).__name__ == "Fit"  # least squares, as before
    document = {"format_version": 2, "data": {"runs": [{"run": 1}]}, "audit": [], "sha256": "0" * 64}
    migrated = migrate_v2(document)
    assert migrated["format_version"] == 3 and migrated["data"] == {"runs": [{"run": 1}]}
    assert migrated["sha256"] == content_hash(migrated["data"], migrated["audit"]) != "0" * 64
    assert document["format_version"] == 2 and document["audit"] == []  # the input is not changed


def test_the_shipped_split_plot_file_keeps_its_whole_plots():
    study = Study.load(SHIPPED_SPLIT_PLOT)
    document = json.loads(SHIPPED_SPLIT_PLOT.read_text(encoding="utf-8"))
    assert [f.get("hard_to_change", False) for f in document["data"]["factors"]] == [True, False, False]
    assert all(isinstance(run["whole_plot"], int) for run in document["data"]["runs"])
    assert study.hard_to_change == ["Oven"] and study.whole_plots().nunique() == 8
    # A format-3 key the schema does not know is still refused (the schema stays closed).
    document["data"]["runs"][0]["whole_plot"] = 0
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(document, schema())
