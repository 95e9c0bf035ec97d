"""Bad study files and bad data: each gets a clear message naming the field, or works."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from levelwise import Factor, ImportDataError, LevelwiseError, Study, StudyFileError, full_factorial
from levelwise.study import import_table

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min")]


def saved_text(tmp_path) -> str:
    study = Study(FACTORS)
    study.add_stage("screen", full_factorial(FACTORS, randomize=False))
    study.add_response("Impact", "J")
    study.record(1, "Impact", 7.5)
    return study.save(tmp_path / "s.json").read_text(encoding="utf-8")


def test_truncated_and_corrupt_json(tmp_path):
    text = saved_text(tmp_path)
    path = tmp_path / "t.json"
    path.write_text(text[: len(text) // 2], encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"'.*t.json' is not valid JSON \(truncated or corrupt\?\).*line \d+"):
        Study.load(path)
    (tmp_path / "t.json.bak").write_text(text, encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"not valid JSON.*The previous version saved by levelwise is kept in "
                                             r"'.*t.json.bak'"):
        Study.load(path)
    (tmp_path / "t.json.bak").unlink()
    path.write_bytes(b"\x00\xff\xfe garbage")
    with pytest.raises(StudyFileError, match="is not UTF-8 text"):
        Study.load(path)
    path.write_text("", encoding="utf-8")
    with pytest.raises(StudyFileError, match="not valid JSON"):
        Study.load(path)
    with pytest.raises(StudyFileError, match="could not be read"):
        Study.load(tmp_path / "missing.json")


def test_valid_json_that_is_not_a_study(tmp_path):
    path = tmp_path / "x.json"
    for content in ([1, 2, 3], {"name": "something else"}, "text", None):
        path.write_text(json.dumps(content), encoding="utf-8")
        with pytest.raises(StudyFileError, match="is not a levelwise study: it has no 'format_version' field"):
            Study.load(path)
    path.write_text(json.dumps({"format_version": 1, "data": {}}), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"study schema: field '\(top level\)': 'audit' is a required"):
        Study.load(path)


def test_future_format_version(tmp_path):
    document = json.loads(saved_text(tmp_path))
    document["format_version"] = 7
    path = tmp_path / "future.json"
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match="'format_version' of '.*' is 7, written by a newer levelwise; this "
                                             "version reads formats up to 4"):
        Study.load(path)
    document["format_version"] = "1"
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match="must be a non-negative integer. Got '1'"):
        Study.load(path)


def test_schema_errors_name_the_field(tmp_path):
    document = json.loads(saved_text(tmp_path))
    document["data"]["runs"][2]["planned"]["Oven"] = None
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"field 'data.runs\[2\].planned.Oven': None is not of type 'number', "
                                             r"'string'"):
        Study.load(path)
    document["data"]["runs"][2]["planned"]["Oven"] = "hot"  # text is allowed only for a categorical factor
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"bad field 'data.runs\[2\].planned.Oven': .* must be a finite number. "
                                             r"Got 'hot'"):
        Study.load(path, accept_outside_edits=True)


def test_rule_errors_name_the_field(tmp_path):
    document = json.loads(saved_text(tmp_path))
    document["data"]["runs"][1]["run"] = 1
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"bad field 'data.runs\[1\].run': the run id 1 appears twice"):
        Study.load(path, accept_outside_edits=True)
    document = json.loads(saved_text(tmp_path))
    document["data"]["models"] = {"Impact": "Oven + Speed"}
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"bad field 'data.models.Impact'.*'Speed' names an unknown factor"):
        Study.load(path, accept_outside_edits=True)


def test_nan_and_infinity_in_settings(tmp_path):
    text = saved_text(tmp_path)
    path = tmp_path / "nan.json"
    path.write_text(text.replace('"Oven": 170.0', '"Oven": NaN', 1), encoding="utf-8")
    with pytest.raises(StudyFileError, match="NaN is not allowed in a study file"):
        Study.load(path)
    path.write_text(text.replace('"Oven": 170.0', '"Oven": Infinity', 1), encoding="utf-8")
    with pytest.raises(StudyFileError, match="Infinity is not allowed"):
        Study.load(path)
    path.write_text(text.replace('"Oven": 170.0', '"Oven": 1e400', 1), encoding="utf-8")  # parses as inf
    with pytest.raises(StudyFileError, match="not finite"):
        Study.load(path, accept_outside_edits=True)
    study = Study(FACTORS)
    with pytest.raises(LevelwiseError, match=r"planned setting of factor 'Oven' in row 2 of the design must be a "
                                             r"finite number. Got nan"):
        study.add_stage("s", pd.DataFrame({"Oven": [170, np.nan], "Dwell": [8, 16]}))
    study.add_stage("s", pd.DataFrame({"Oven": [170, 210], "Dwell": [8, 16]}))
    with pytest.raises(LevelwiseError, match=r"'achieved setting of 'Oven' of run 1' must be a finite number. Got inf"):
        study.record_achieved(1, "Oven", float("inf"))
    with pytest.raises(ImportDataError, match=r"row 2, column 'Oven \(achieved\)': 'inf' is not a number"):
        import_table(study, b"run,Oven (achieved)\n1,inf\n")


def test_response_column_of_text():
    study = Study(FACTORS)
    study.add_stage("s", full_factorial(FACTORS, randomize=False))
    study.add_response("Impact")
    with pytest.raises(ImportDataError) as excinfo:
        import_table(study, b"run,Impact\n1,high\n2,low\n3,medium\n4,high\n")
    assert [(p.row, p.column) for p in excinfo.value.problems] == [(2, "Impact"), (3, "Impact"), (4, "Impact"),
                                                                    (5, "Impact")]
    with pytest.raises(LevelwiseError, match="'response 'Impact' of run 1' must be a finite number. Got 'high'"):
        study.record(1, "Impact", "high")


def test_zero_runs(tmp_path):
    study = Study(FACTORS)
    assert study.add_stage("empty", pd.DataFrame({"Oven": [], "Dwell": []})) == []
    study.add_response("Impact")
    study.set_model("Impact", "main_effects")
    loaded = Study.load(study.save(tmp_path / "empty.json"))
    assert len(loaded) == 0 and list(loaded.data().columns)[-1] == "Impact"
    with pytest.raises(LevelwiseError, match="'Impact' has no values: every run is missing"):
        loaded.fit("Impact")
    with pytest.raises(LevelwiseError, match=r"The 'run' 1 is not in the study \(runs: none yet\)"):
        loaded.record(1, "Impact", 1.0)


def test_hundred_thousand_runs(tmp_path):
    rng = np.random.default_rng(5)
    n = 100_000
    x = rng.uniform(-1, 1, (n, 2))
    study = Study([Factor("A", -1, 1), Factor("B", -1, 1)])
    study.add_stage("big", pd.DataFrame(x, columns=["A", "B"]))
    study.add_response("y")
    y = 3.0 + 2.0 * x[:, 0] - 1.0 * x[:, 1] + rng.normal(0, 0.1, n)  # invented true model
    report = import_table(study, pd.DataFrame({"run": np.arange(1, n + 1), "y": y}))
    assert report.values_recorded == n
    assert len(study.audit) == 4  # create, add_stage, add_response, one import entry
    study.set_model("y", "A + B")
    loaded = Study.load(study.save(tmp_path / "big.json"))
    assert len(loaded) == n
    fit = loaded.fit("y")
    # Least squares recovers the invented coefficients within a few standard errors (common practice).
    np.testing.assert_allclose(fit.coefficients["estimate"], [3.0, 2.0, -1.0], atol=0.005)
    # A broken run far past the first rows is still found and named by the schema check.
    text = (tmp_path / "big.json").read_text(encoding="utf-8")
    lines = text.splitlines()
    target = next(i for i, line in enumerate(lines) if '"run": 99000,' in line)
    lines[target] = lines[target].replace('"block": 1', '"block": "one"')
    (tmp_path / "big.json").write_text("\n".join(lines), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"field 'data.runs\[98999\].block': 'one' is not of type 'integer'"):
        Study.load(tmp_path / "big.json", accept_outside_edits=True)


def test_unicode_factor_names_and_formula_helpers(tmp_path):
    factors = [Factor("Température du four", 170, 210, "°C"), Factor("時間", 8, 16, "分"), Factor("C", 0, 1),
               Factor("I", 0, 1), Factor("Q", 0, 1)]
    study = Study(factors, title="Ünïcödé ✓")
    study.add_stage("screen", full_factorial(factors, randomize=False))
    study.add_response("Résistance", "J")
    rng = np.random.default_rng(3)
    for run in study.run_ids:
        study.record(run, "Résistance", float(rng.normal(5, 1)))  # invented
    study.set_model("Résistance", "`Température du four` + 時間 + C + I + Q + C:I + I(Q*C)")
    loaded = Study.load(study.save(tmp_path / "ü.json"))
    assert loaded.factor_names == ["Température du four", "時間", "C", "I", "Q"]
    fit = loaded.fit("Résistance")
    assert list(fit.terms) == ["Intercept", "Température du four", "時間", "C", "I", "Q", "C:I", "C:Q"]
    namespace: dict = {}
    exec(compile(loaded.to_code(tmp_path / "ü.json"), "<to_code>", "exec"), namespace)  # noqa: S102
    pd.testing.assert_frame_equal(namespace["fits"]["Résistance"].coefficients, fit.coefficients)


def test_names_that_cannot_be_used():
    with pytest.raises(LevelwiseError, match=r"may not be one of the reserved column names .* Got 'run'"):
        Study([Factor("run", 0, 1)])
    study = Study(FACTORS)
    with pytest.raises(LevelwiseError, match="'Oven' is already used by a response or a factor"):
        study.add_response("Oven")
    with pytest.raises(LevelwiseError, match="lone surrogate"):
        study.add_response("bad\ud800")
    with pytest.raises(LevelwiseError, match="'goal' of response 'y' must be one of"):
        study.add_response("y", goal="biggest")
    with pytest.raises(LevelwiseError, match="'target of response 'y'' must be a finite number"):
        study.add_response("y", goal="target")
    with pytest.raises(LevelwiseError, match="a reason is required|'reason' must be a non-empty string"):
        study.add_stage("s", full_factorial(FACTORS, randomize=False))
        study.exclude(1, "  ")
    with pytest.raises(LevelwiseError, match="'design' has no column for factor\\(s\\) \\['Dwell'\\]"):
        study.add_stage("t", pd.DataFrame({"Oven": [170.0]}))


def test_lone_surrogate_escape_in_file(tmp_path):
    text = saved_text(tmp_path).replace('"screen"', '"scr\\ud800een"')
    path = tmp_path / "s2.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(StudyFileError, match="not valid Unicode \\(a lone surrogate"):
        Study.load(path, accept_outside_edits=True)


def test_categorical_factor_round_trip_and_fit(tmp_path):
    factors = [Factor("Oven", 170, 210, "°C"), Factor("Metal", levels=["steel", "brass"])]
    design = pd.DataFrame({"Oven": [170, 210, 170, 210, 190, 190],
                           "Metal": ["steel", "steel", "brass", "brass", "steel", "brass"]})
    study = Study(factors)
    study.add_stage("screen", design)
    study.add_response("Impact", "J")
    for run, value in zip(study.run_ids, [6.0, 8.1, 7.0, 9.2, 7.4, 8.2]):  # invented
        study.record(run, "Impact", value)
    study.record_achieved(5, "Metal", "brass", reason="wrong panel rack")
    with pytest.raises(LevelwiseError, match=r"must be one of the levels \['steel', 'brass'\] of factor 'Metal'. "
                                             r"Got 'copper'"):
        study.record_achieved(6, "Metal", "copper")
    study.set_model("Impact", "Oven + Metal")
    path = study.save(tmp_path / "cat.json")
    loaded = Study.load(path)
    assert loaded.to_dict() == study.to_dict()
    assert loaded.factors[1].levels == ("steel", "brass")
    assert list(loaded.data()["Metal"]) == ["steel", "steel", "brass", "brass", "brass", "brass"]
    fit = loaded.fit("Impact")
    assert fit.n == 6
    namespace: dict = {}
    exec(compile(loaded.to_code(path), "<to_code>", "exec"), namespace)  # noqa: S102
    pd.testing.assert_frame_equal(namespace["fits"]["Impact"].coefficients, fit.coefficients)
    with pytest.raises(LevelwiseError, match=r"planned setting of factor 'Metal' in row 1 of the design' must be one"):
        study.add_stage("more", pd.DataFrame({"Oven": [170], "Metal": ["iron"]}))
