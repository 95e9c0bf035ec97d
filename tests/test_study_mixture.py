"""Mixture studies: components (alone or with process factors) held in a Study, its file (format 4) and Study.fit.

Sources: the yarn elongation example (tests/data/yarn_elongation.csv; J. A. Cornell, Experiments with Mixtures, FROM
MEMORY, see tests/data/SOURCES.md) with its printed Scheffé quadratic coefficients 11.7, 9.4, 16.4, 19.0, 11.4,
-9.6 (FROM MEMORY); statsmodels OLS without an intercept on hand-written Scheffé columns for the special cubic and
the crossed mixture-process model. Invented responses are used only where statsmodels is the reference.
"""

from __future__ import annotations

import itertools
import json
from importlib import resources
from pathlib import Path

import jsonschema
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import levelwise as lw
from levelwise import LevelwiseError, StudyFileError
from levelwise.study import FORMAT_VERSION, Study, content_hash

DATA = Path(__file__).parent / "data"


def yarn_study() -> Study:
    yarn = pd.read_csv(DATA / "yarn_elongation.csv")
    study = Study(components=[lw.Component(n) for n in ("x1", "x2", "x3")], title="yarn")
    ids = study.add_stage("lattice", yarn[["x1", "x2", "x3"]])
    study.add_response("elongation", units="kg")
    for run, value in zip(ids, yarn["elongation"]):
        study.record(run, "elongation", float(value))
    study.set_model("elongation", "scheffe_quadratic")
    return study


def schema() -> dict:
    return json.loads(resources.files("levelwise.study").joinpath("study_schema.json").read_text(encoding="utf-8"))


def test_a_study_of_components_alone_fits_the_published_yarn_coefficients():
    study = yarn_study()
    assert study.is_mixture and study.factor_names == [] and study.component_names == ["x1", "x2", "x3"]
    assert study.setting_names == ["x1", "x2", "x3"] and list(study.planned().columns[-3:]) == ["x1", "x2", "x3"]
    fit = study.fit("elongation")
    assert isinstance(fit, lw.MixtureFit)
    # Published Scheffé quadratic (FROM MEMORY, see the module docstring).
    assert fit.coefficients["estimate"].to_numpy() == pytest.approx([11.7, 9.4, 16.4, 19.0, 11.4, -9.6], abs=1e-9)
    assert list(fit.runs) == study.run_ids  # runs named by run id
    # The one prediction engine, with the blend check naming the components.
    with pytest.raises(LevelwiseError, match=r"x1.*x2.*x3.*must sum to the total"):
        fit.predict({"x1": 0.5, "x2": 0.5, "x3": 0.5})


def test_the_study_file_records_the_components_and_round_trips(tmp_path):
    study = yarn_study()
    study.exclude(study.run_ids[3], "thread snapped")
    saved = study.save(tmp_path / "yarn.json")
    document = json.loads(saved.read_text(encoding="utf-8"))
    assert document["format_version"] == FORMAT_VERSION == 4
    jsonschema.validate(document, schema())
    assert document["sha256"] == content_hash(document["data"], document["audit"])
    assert document["data"]["mixture"] == {
        "total": 1.0, "pseudo": False, "constraints": [],
        "components": [{"name": n, "low": 0.0, "high": None, "units": ""} for n in ("x1", "x2", "x3")]}
    assert document["data"]["factors"] == []
    again = Study.load(saved)
    assert again.to_dict() == study.to_dict() and again.component_names == ["x1", "x2", "x3"]
    assert np.allclose(again.fit("elongation").beta, study.fit("elongation").beta, rtol=0, atol=1e-12)
    assert study.run_ids[3] not in list(again.fit("elongation").runs)


def test_to_code_rebuilds_the_mixture_fit(tmp_path):
    study = yarn_study()
    study.exclude(study.run_ids[0], "bad spool")
    path = study.save(tmp_path / "yarn.json")
    namespace: dict = {}
    exec(study.to_code(path), namespace)  # noqa: S102 - our own generated code
    rebuilt = namespace["fits"]["elongation"]
    assert np.allclose(rebuilt.beta, study.fit("elongation").beta, rtol=1e-12)


def special_cubic(x):
    q = x.shape[1]
    cols = [x[:, i] for i in range(q)]
    cols += [x[:, i] * x[:, j] for i, j in itertools.combinations(range(q), 2)]
    cols += [x[:, i] * x[:, j] * x[:, k] for i, j, k in itertools.combinations(range(q), 3)]
    return np.column_stack(cols)


def test_bounded_components_in_percent_with_pseudo_components_and_a_special_cubic():
    comps = [lw.Component("Resin", 50, 75, "%"), lw.Component("Hardener", 5, 15, "%"),
             lw.Component("Filler", 10, 35, "%")]
    study = Study(components=comps, total=100, pseudo=True)
    design = lw.extreme_vertices(lw.Mixture(comps, total=100), centroids=(1,), randomize=False)
    ids = study.add_stage("vertices", design)
    study.add_response("y")
    rng = np.random.default_rng(5)
    table = study.data()
    x = table[["Resin", "Hardener", "Filler"]].to_numpy() / 100
    y = 10 + 5 * x[:, 0] + 20 * x[:, 0] * x[:, 1] + rng.normal(0, 0.2, len(x))  # invented response
    for run, value in zip(ids, y):
        study.record(run, "y", float(value))
    fit = study.fit("y", "scheffe_special_cubic")
    # Pseudo-components z = (x - L) / (T - sum L) (McLean & Anderson 1966), then statsmodels OLS, no intercept.
    z = (table[["Resin", "Hardener", "Filler"]].to_numpy() - [50, 5, 10]) / (100 - 65)
    ref = sm.OLS(y, special_cubic(z)).fit()
    assert fit.beta == pytest.approx(ref.params, abs=1e-8)
    assert fit.coefficients["std_error"].to_numpy() == pytest.approx(ref.bse, abs=1e-8)
    reloaded = Study.from_json(study.to_json())
    assert reloaded.pseudo and reloaded.mixture.total == 100.0
    assert reloaded.fit("y", "scheffe_special_cubic").beta == pytest.approx(fit.beta, abs=1e-12)


def test_components_with_a_process_factor_and_a_crossed_model():
    comps = [lw.Component(n) for n in "ABC"]
    temp = lw.Factor("Temp", 20, 40, "°C")
    lattice = lw.simplex_lattice(comps, 2, randomize=False)
    design = lw.mixture_process(lattice, [temp])
    study = Study([temp], components=comps)
    ids = study.add_stage("mix-process", design)
    assert study.setting_names == ["A", "B", "C", "Temp"]
    study.add_response("y")
    data = study.data()
    x = data[["A", "B", "C"]].to_numpy()
    t = (data["Temp"].to_numpy() - 30) / 10
    y = 3 * x[:, 0] + 5 * x[:, 1] + 2 * x[:, 2] + 4 * x[:, 0] * x[:, 1] + 1.5 * x[:, 0] * t  # invented
    y = y + np.random.default_rng(1).normal(0, 0.1, len(y))
    for run, value in zip(ids, y):
        study.record(run, "y", float(value))
    study.set_model("y", "scheffe_linear * main_effects")
    fit = study.fit("y")
    # Crossed model: every linear blending term times 1 and times Temp (coded), statsmodels OLS, no intercept.
    X = np.column_stack([x, x * t[:, None]])
    ref = sm.OLS(y, X).fit()
    order = fit.spec.exponents  # rows over A, B, C, Temp
    by_row = {tuple(row): b for row, b in zip(order.tolist(), fit.beta)}
    expected = {(1, 0, 0, 0): ref.params[0], (0, 1, 0, 0): ref.params[1], (0, 0, 1, 0): ref.params[2],
                (1, 0, 0, 1): ref.params[3], (0, 1, 0, 1): ref.params[4], (0, 0, 1, 1): ref.params[5]}
    assert set(by_row) == set(expected)
    for key, value in expected.items():
        assert by_row[key] == pytest.approx(value, abs=1e-8)
    assert fit.spec.formula == "scheffe_linear * main_effects"
    assert Study.from_json(study.to_json()).models == {"y": "scheffe_linear * main_effects"}


def test_bad_blends_and_bad_models_are_refused_naming_the_components():
    comps = [lw.Component("Resin", 50, 75), lw.Component("Hardener", 5, 15), lw.Component("Filler", 10, 35)]
    study = Study(components=comps, total=100)
    bad_sum = pd.DataFrame({"Resin": [60.0, 60.0], "Hardener": [10.0, 10.0], "Filler": [30.0, 25.0]})
    with pytest.raises(LevelwiseError, match=r"row 2 does not sum to the mixture total 100.*Resin 60 \+ Hardener "
                                             r"10 \+ Filler 25 = 95"):
        study.add_stage("bad", bad_sum)
    out_of_bounds = pd.DataFrame({"Resin": [80.0], "Hardener": [5.0], "Filler": [15.0]})
    with pytest.raises(LevelwiseError, match=r"breaks the component bounds: Resin = 80 \(allowed 50..75\)"):
        study.add_stage("bad", out_of_bounds)
    with pytest.raises(LevelwiseError, match=r"no column for factor\(s\) or component\(s\) \['Filler'\]"):
        study.add_stage("bad", out_of_bounds[["Resin", "Hardener"]])
    assert len(study) == 0 and study.stages == ()  # nothing was added
    with pytest.raises(LevelwiseError, match="lower bounds .* sum to 110, more than the mixture total 100"):
        Study(components=[lw.Component("A", 60), lw.Component("B", 50)], total=100)
    with pytest.raises(LevelwiseError, match="used by both a component and a process factor"):
        Study([lw.Factor("A", 0, 1)], components=["A", "B"])
    study.add_response("y")
    with pytest.raises(LevelwiseError, match="Nope"):
        study.set_model("y", "Resin + Nope")


def test_a_bad_mixture_block_in_a_file_is_named(tmp_path):
    document = json.loads(yarn_study().to_json())
    document["data"]["runs"][0]["planned"]["x1"] = 0.9  # the blend no longer sums to 1
    document["sha256"] = content_hash(document["data"], document["audit"])
    with pytest.raises(StudyFileError, match=r"data.runs.*planned blend in row of run 1 does not sum"):
        Study.from_json(json.dumps(document))
    document = json.loads(yarn_study().to_json())
    document["data"]["mixture"]["components"][0]["low"] = 0.8
    document["data"]["mixture"]["components"][1]["low"] = 0.5
    document["sha256"] = content_hash(document["data"], document["audit"])
    with pytest.raises(StudyFileError, match=r"data.mixture.*lower bounds .* sum to 1.3"):
        Study.from_json(json.dumps(document))


def test_format_3_files_migrate_to_format_4_with_their_data_unchanged():
    from levelwise.study import migrate_v3

    shipped = json.loads((Path(__file__).parents[1] / "dashboards" / "data" / "demo_campaign.json").read_text())
    document = dict(shipped, format_version=3)
    document["audit"] = list(shipped["audit"])
    document["sha256"] = content_hash(document["data"], document["audit"])
    migrated = migrate_v3(document)
    assert migrated["format_version"] == 4 and migrated["data"] == document["data"]  # only optional keys added
    assert migrated["audit"][-1]["what"] == "migrated from format 3 to format 4"
    assert document["format_version"] == 3 and len(document["audit"]) == len(shipped["audit"])  # input unchanged
    study = Study.from_json(json.dumps(document))
    assert not study.is_mixture and study.to_dict() == shipped["data"]
    assert [a.what for a in study.audit[-1:]] == ["migrated from format 3 to format 4"]
