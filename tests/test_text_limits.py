"""Length limits on names, units, notes and reasons (issue 17, item 4): the API, a study file, an import.

The limits are chosen here (common practice: a name fits a label, units fit beside it) and stated in one place,
``levelwise._limits.TEXT_LIMITS``.
"""

from __future__ import annotations

import json

import pytest

from levelwise import Factor, LevelwiseError, Study, StudyFileError, full_factorial, import_table
from levelwise._limits import TEXT_LIMITS
from levelwise.study import export_run_sheet

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min")]


def test_the_limits_are_the_stated_ones():
    assert TEXT_LIMITS == {"name": 80, "units": 60, "title": 200, "notes": 2000, "reason": 2000}


def small_study() -> Study:
    study = Study(FACTORS, title="limits (invented)")
    study.add_stage("screen", full_factorial(FACTORS, randomize=False))
    study.add_response("Yield", units="%")
    return study


@pytest.mark.parametrize(
    ("call", "field", "limit"),
    [
        (lambda s: Factor("n" * 81, 0, 1), "name", 80),
        (lambda s: Factor("ok", 0, 1, units="u" * 61), "units of factor 'ok'", 60),
        (lambda s: Study([Factor("ok", 0, 1)], title="t" * 201), "title", 200),
        (lambda s: s.add_response("r" * 81), "response name", 80),
        (lambda s: s.add_response("r", units="u" * 61), "units of response 'r'", 60),
        (lambda s: s.set_notes("x" * 2001), "notes", 2000),
        (lambda s: s.set_title("t" * 201), "title", 200),
        (lambda s: s.exclude(1, "w" * 2001), "reason", 2000),
        (lambda s: s.record(1, "Yield", 3.0, reason="r" * 2001), "reason", 2000),
        (lambda s: s.add_stage("s" * 81, full_factorial(FACTORS), renumber=True), "stage name", 80),
        (lambda s: s.add_stage("s2", full_factorial(FACTORS), renumber=True, description="d" * 2001),
         "description", 2000),
        (lambda s: Factor("cat", levels=["a", "b" * 81]), None, 80),
    ],
)
def test_the_api_refuses_text_over_its_limit_naming_field_limit_and_length(call, field, limit):
    study = small_study()
    before = study.to_json()
    with pytest.raises(LevelwiseError) as info:
        call(study)
    message = str(info.value)
    assert f"at most {limit} characters" in message and f"Got {limit + 1} characters" in message
    if field is not None:
        assert f"'{field}'" in message
    assert study.to_json() == before  # nothing changed


def test_text_at_the_limit_is_accepted():
    study = Study([Factor("n" * 80, 0, 1, units="u" * 60), Factor("cat", levels=["a", "b" * 80])],
                  title="t" * 200, notes="x" * 2000)
    study.add_response("r" * 80, units="u" * 60)
    study.add_stage("s" * 80, full_factorial(study.factors, randomize=False), description="d" * 2000)
    study.exclude(1, "w" * 2000)


def edited_file(tmp_path, change):
    path = small_study().save(tmp_path / "study.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    change(document["data"])
    path.write_text(json.dumps(document), encoding="utf-8")
    return path


@pytest.mark.parametrize(
    ("change", "field", "limit", "got"),
    [
        (lambda d: d["factors"][0].update(name="F" * 5000), "data.factors[0]", 80, 5000),
        (lambda d: d["factors"][1].update(units="u" * 65), "data.factors[1]", 60, 65),
        (lambda d: d["responses"][0].update(name="R" * 90), "data.responses[0]", 80, 90),
        (lambda d: d.update(title="T" * 300), "data.title", 200, 300),
        (lambda d: d.update(notes="N" * 2500), "data.notes", 2000, 2500),
        (lambda d: d["stages"][0].update(description="D" * 2001), "data.stages[0].description", 2000, 2001),
    ],
)
def test_load_refuses_a_file_with_too_long_text(tmp_path, change, field, limit, got):
    path = edited_file(tmp_path, change)
    with pytest.raises(StudyFileError) as info:
        Study.load(path, accept_outside_edits=True)
    message = str(info.value)
    assert f"bad field '{field}'" in message
    assert f"at most {limit} characters" in message and f"Got {got} characters" in message


def test_load_refuses_a_too_long_exclusion_reason(tmp_path):
    study = small_study()
    study.exclude(2, "short")
    path = study.save(tmp_path / "study.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    document["data"]["exclusions"][0]["reason"] = "x" * 2001
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(StudyFileError, match=r"bad field 'data.exclusions\[0\].reason'.*at most 2000 characters"):
        Study.load(path, accept_outside_edits=True)


def mapping(responses):
    return {"run": "run", "factors": {"Oven": "Oven [°C]", "Dwell": "Dwell [min]"}, "achieved": {},
            "responses": {"Yield": "Yield [%]", **responses}}


def test_import_refuses_a_too_long_response_name_and_units(tmp_path):
    study = small_study()
    path = export_run_sheet(study, tmp_path / "runs.csv")
    text = path.read_bytes().decode("utf-8")
    long_name = "L" * 81
    header, *rows = text.split("\r\n")
    path.write_bytes("\r\n".join([header + f",{long_name} [g]", *(r + ",1.5" if r else r for r in rows)]).encode())
    before = study.to_json()
    with pytest.raises(LevelwiseError, match=r"'response name' may be at most 80 characters long. Got 81 characters"):
        import_table(study, path, mapping=mapping({long_name: f"{long_name} [g]"}))
    assert study.to_json() == before
    path.write_bytes("\r\n".join([header + ",Mass [" + "g" * 61 + "]",
                                  *(r + ",1.5" if r else r for r in rows)]).encode())
    with pytest.raises(LevelwiseError, match=r"'units of response 'Mass'' may be at most 60 characters"):
        import_table(study, path, mapping=mapping({"Mass": "Mass [" + "g" * 61 + "]"}))
    assert study.to_json() == before
