"""Count responses in a study (issue 15): family, link and trials/exposure recorded in the file (format 4),
Study.fit dispatching to the GLM, Study.from_table and `levelwise import` declaring a count family, and bad counts
refused naming the run and the column."""

from __future__ import annotations

import copy
import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import levelwise as lw
from levelwise import LevelwiseError, Study, StudyFileError
from levelwise.dashboards import cli
from levelwise.model import GlmFit
from levelwise.study import FORMAT_VERSION, content_hash, migrate_v3

FACTORS = [lw.Factor("Oven", 160, 200, "degC"), lw.Factor("Dwell", 5, 15, "min")]


def _passes(seed=3):
    """A replicated 2^2 (invented, seeded): passes out of 20 panels and defects per panel area."""
    design = lw.full_factorial(FACTORS, replicates=3, center_points=2, seed=seed)
    t = design.table.copy()
    rng = np.random.default_rng(seed)
    a, b = (t["Oven"] - 180) / 20, (t["Dwell"] - 10) / 5
    eta = 1.0 + 0.8 * a - 0.5 * b + 0.3 * a * b
    t["tested"] = 20
    t["passed"] = rng.binomial(20, 1 / (1 + np.exp(-eta)))
    t["area"] = rng.uniform(0.5, 2.0, len(t)).round(3)
    t["defects"] = rng.poisson(t["area"] * np.exp(0.5 - 0.4 * a + 0.2 * b))
    return t, a, b


def _study(t):
    s = Study(FACTORS, title="counts (invented)")
    s.add_stage("screen", t[["run", "Oven", "Dwell"]])
    s.add_response("tested", units="panels")
    s.add_response("passed", units="panels", goal="maximize", family="binomial", trials="tested")
    s.add_response("area", units="m2")
    s.add_response("defects", family="poisson", exposure="area")
    for _, row in t.iterrows():
        for name in ("tested", "passed", "area", "defects"):
            s.record(int(row["run"]), name, float(row[name]))
    s.set_model("passed", "Oven * Dwell")
    s.set_model("defects", "Oven + Dwell")
    return s


def test_study_records_the_family_and_fits_the_glm(tmp_path):
    t, a, b = _passes()
    s = _study(t)
    r = s.responses["passed"]
    assert (r.family, r.link, r.trials, r.exposure) == ("binomial", "logit", "tested", None)
    assert s.responses["defects"].family == "poisson" and s.responses["defects"].exposure == "area"
    assert s.responses["tested"].family is None
    f = s.fit("passed")
    assert isinstance(f, GlmFit) and f.family == "binomial" and list(f.runs) == list(t["run"])
    # statsmodels GLM, binomial with (passes, failures), on the coded columns computed here: 1e-8.
    x = np.column_stack([np.ones(len(t)), a, b, a * b])
    ref = sm.GLM(np.column_stack([t["passed"], 20 - t["passed"]]), x, family=sm.families.Binomial()).fit()
    np.testing.assert_allclose(f.beta, ref.params, rtol=1e-8)
    g = s.fit("defects")
    ref = sm.GLM(t["defects"].to_numpy(), x[:, :3], family=sm.families.Poisson(), exposure=t["area"]).fit()
    np.testing.assert_allclose(g.beta, ref.params, rtol=1e-8)
    # The file keeps the keys (format 4) and the loaded study fits the same model.
    path = s.save(tmp_path / "counts.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    assert document["format_version"] == FORMAT_VERSION == 4
    entries = {r["name"]: r for r in document["data"]["responses"]}
    assert entries["passed"] == {"name": "passed", "units": "panels", "goal": "maximize", "target": None,
                                 "family": "binomial", "link": "logit", "trials": "tested"}
    assert entries["tested"] == {"name": "tested", "units": "panels", "goal": "none", "target": None}
    loaded = Study.load(path)
    assert loaded.to_dict() == s.to_dict()
    np.testing.assert_allclose(loaded.fit("passed").beta, f.beta, rtol=1e-12)
    # to_code rebuilds the GLM fits.
    namespace: dict = {}
    exec(compile(loaded.to_code(path), "<to_code>", "exec"), namespace)  # noqa: S102 - the point of the test
    assert isinstance(namespace["fits"]["passed"], GlmFit)
    np.testing.assert_allclose(namespace["fits"]["passed"].beta, f.beta, rtol=1e-12)
    np.testing.assert_allclose(namespace["fits"]["defects"].beta, g.beta, rtol=1e-12)
    # set_goal keeps the family; a probit link is recorded and used.
    s.set_goal("passed", "target", 18)
    assert s.responses["passed"].family == "binomial"
    s.add_response("passed_probit", family="binomial", trials="tested", link="probit")
    for _, row in t.iterrows():
        s.record(int(row["run"]), "passed_probit", float(row["passed"]))
    assert s.fit("passed_probit", "Oven * Dwell").link == "probit"


def test_exclusions_leave_the_glm_fit():
    t, _, _ = _passes()
    s = _study(t)
    run = int(t["run"].iloc[2])
    s.exclude(run, "panel rack dropped", response="passed")
    f = s.fit("passed")
    assert run not in list(f.runs) and len(f.runs) == len(t) - 1


@pytest.mark.parametrize("response,value,message", [
    ("passed", -1.0, "Run {run}: the response 'passed' (passes out of the trials in 'tested') must be a whole "
                     "number >= 0. Got -1.0 instead."),
    ("passed", 2.5, "Run {run}: the response 'passed' (passes out of the trials in 'tested') must be a whole "
                    "number >= 0. Got 2.5 instead."),
    ("passed", 21.0, "Run {run}: the response 'passed' holds 21 passes, more than the 20 trials recorded in "
                     "'tested' for that run."),
    ("tested", 0.0, "Run {run}: the response 'tested' holds the number of trials of 'passed': a whole number >= 1. "
                    "Got 0.0 instead (zero trials)."),
    ("tested", 2.0, "Run {run}: the response 'tested' holds 2 trials, fewer than the"),
    ("defects", 1.5, "Run {run}: the response 'defects' (a count) must be a whole number >= 0. Got 1.5 instead."),
    ("area", 0.0, "Run {run}: the response 'area' holds the exposure of 'defects': a positive number. Got 0.0"),
])
def test_bad_counts_are_refused_naming_run_and_column(response, value, message):
    t, _, _ = _passes()
    s = _study(t)
    run = int(t["run"].iloc[4])
    if response == "tested":  # make sure the run has more than 2 passes recorded
        s.record(run, "passed", 5.0, overwrite=True)
    before = s.to_dict()
    with pytest.raises(LevelwiseError) as caught:
        s.record(run, response, value, overwrite=True)
    assert message.format(run=run) in str(caught.value)
    assert s.to_dict() == before  # nothing changed, nothing lost
    # An import of many values is checked the same way, against the trials in the same import.
    with pytest.raises(LevelwiseError, match=f"Run {run}: "):
        s._record_many([("responses", run, response, value)], overwrite=True, reason=None, source="test")
    s._record_many([("responses", run, "tested", 30.0), ("responses", run, "passed", 25.0)], overwrite=True,
                   reason=None, source="test")  # passes above the old trials, within the new ones: accepted
    assert s.data().loc[run, "passed"] == 25.0


def test_bad_declarations_name_the_field():
    s = Study(FACTORS)
    s.add_response("tested")
    with pytest.raises(LevelwiseError, match="The 'family' of response 'p' must be one of"):
        s.add_response("p", family="gamma", trials="tested")
    with pytest.raises(LevelwiseError, match="binomial response 'p' needs 'trials'"):
        s.add_response("p", family="binomial")
    with pytest.raises(LevelwiseError, match=r"'trials' of response 'p' must name another response of the study "
                                             r"\['tested'\].*Got 'panels' instead"):
        s.add_response("p", family="binomial", trials="panels")
    with pytest.raises(LevelwiseError, match="'link' of the poisson response 'p' must be one of \\['log'\\]"):
        s.add_response("p", family="poisson", link="logit")
    with pytest.raises(LevelwiseError, match="'trials' of response 'p' needs a count family"):
        s.add_response("p", trials="tested")
    assert list(s.responses) == ["tested"]  # nothing added by a refused declaration
    s.add_stage("runs", lw.full_factorial(FACTORS, seed=1))
    s.record(1, "tested", 0.0)
    with pytest.raises(LevelwiseError, match="Run 1: the response 'tested' holds the number of trials"):
        s.add_response("p", family="binomial", trials="tested")  # the values already recorded are checked


def _document(tmp_path):
    t, _, _ = _passes()
    return json.loads(_study(t).save(tmp_path / "s.json").read_text(encoding="utf-8"))


def _write(tmp_path, document, name="bad.json"):
    document["sha256"] = content_hash(document["data"], document["audit"])
    path = tmp_path / name
    path.write_text(json.dumps(document), encoding="utf-8")
    return path


def test_a_file_with_bad_counts_or_keys_is_refused_naming_the_field(tmp_path):
    document = _document(tmp_path)
    bad = copy.deepcopy(document)
    bad["data"]["runs"][3]["responses"]["passed"] = 25
    run = bad["data"]["runs"][3]["run"]
    with pytest.raises(StudyFileError, match=rf"bad field 'data.runs\[3\].responses': Run {run}: the response "
                                             r"'passed' holds 25 passes, more than the 20 trials"):
        Study.load(_write(tmp_path, bad))
    bad = copy.deepcopy(document)
    bad["data"]["responses"][1]["family"] = "gamma"  # the schema allows binomial and poisson only
    with pytest.raises(StudyFileError, match="family"):
        Study.load(_write(tmp_path, bad))
    bad = copy.deepcopy(document)
    bad["data"]["responses"][1]["trials"] = "nothing"
    with pytest.raises(StudyFileError, match=r"bad field 'data.responses\[1\]'.*'trials' of response 'passed' must "
                                             "name another response"):
        Study.load(_write(tmp_path, bad))


def test_format_3_migrates_to_format_4_adding_nothing(tmp_path):
    document = _document(tmp_path)
    for entry in document["data"]["responses"]:  # a format-3 file: no count keys
        for key in ("family", "link", "trials", "exposure"):
            entry.pop(key, None)
    document["format_version"] = 3
    study = Study.load(_write(tmp_path, document, "v3.json"))
    assert study.to_dict() == document["data"]  # the data block as written, nothing added
    assert [(a.action, a.what) for a in study.audit[-1:]] == [("migrate", "migrated from format 3 to format 4")]
    assert all(r.family is None for r in study.responses.values())
    migrated = migrate_v3(document)
    assert migrated["format_version"] == 4 and migrated["data"] == document["data"]
    assert document["format_version"] == 3  # the input is not changed


def test_from_table_declares_count_families_and_names_bad_rows():
    t, a, b = _passes()
    table = t[["run", "Oven", "Dwell", "passed", "tested", "defects", "area"]]
    s = Study.from_table(table, factors=["Oven", "Dwell"], responses=["passed", "defects"],
                         counts={"passed": {"family": "binomial", "trials": "tested"},
                                 "defects": {"family": "poisson", "exposure": "area"}})
    assert s.responses["passed"].trials == "tested" and s.responses["defects"].exposure == "area"
    assert set(s.responses) == {"passed", "tested", "defects", "area"}  # trials and exposure columns added
    s.set_model("passed", "Oven * Dwell")
    x = np.column_stack([np.ones(len(t)), a, b, a * b])
    ref = sm.GLM(np.column_stack([t["passed"], 20 - t["passed"]]), x, family=sm.families.Binomial()).fit()
    np.testing.assert_allclose(s.fit("passed").beta, ref.params, rtol=1e-8)
    bad = table.copy().astype(object)
    bad.loc[2, "passed"] = 23  # spreadsheet row 4 (header = row 1)
    bad.loc[5, "tested"] = 0  # row 7
    bad.loc[6, "defects"] = -2  # row 8
    with pytest.raises(lw.ImportDataError) as caught:
        Study.from_table(bad, factors=["Oven", "Dwell"], responses=["passed", "defects"],
                         counts={"passed": {"family": "binomial", "trials": "tested"},
                                 "defects": {"family": "poisson", "exposure": "area"}})
    found = [str(p) for p in caught.value.problems]
    assert "error: row 4, column 'passed': 23 passes is more than the 20 trials in column 'tested'" in found
    assert "error: row 7, column 'tested': the number of trials of 'passed' must be a whole number >= 1; got 0" \
        in found
    assert "error: row 8, column 'defects': a count must be a whole number >= 0; got -2" in found


def test_levelwise_import_declares_a_binomial_response(tmp_path, capsys):
    t, _, _ = _passes()
    source = tmp_path / "plant.csv"
    t[["run", "Oven", "Dwell", "passed", "tested"]].to_csv(source, index=False)
    out = tmp_path / "study.json"
    code = cli.main(["import", str(source), "-o", str(out), "--factor", "Oven", "--factor", "Dwell",
                     "--binomial", "passed=tested", "--link", "passed=probit"])
    assert code == 0, capsys.readouterr().err
    study = Study.load(out)
    r = study.responses["passed"]
    assert (r.family, r.link, r.trials) == ("binomial", "probit", "tested")
    assert study.data()["passed"].tolist() == t["passed"].astype(float).tolist()
    assert cli.main(["import", str(source), "-o", str(out), "--force", "--factor", "Oven", "--factor", "Dwell",
                     "--binomial", "passed"]) == 2
    assert "--binomial takes RESPONSE=TRIALS_COLUMN; got 'passed'" in capsys.readouterr().err
    pd.testing.assert_frame_equal(study.data(), Study.load(out).data())  # the refused command wrote nothing
