"""The invented reformulation stage of the demo (levelwise._mixture_demo): seeded, labelled invented, inside its
region, and the mixture pipeline recovers the stage's own invented truth within its standard errors."""

import numpy as np
import pandas as pd
import pytest

import levelwise as lw
from levelwise import _mixture_demo as demo


def test_reformulation_stage_is_seeded_and_labelled_invented():
    d1, data1 = demo.reformulation_stage()
    d2, data2 = demo.reformulation_stage()
    pd.testing.assert_frame_equal(data1, data2)
    assert data1.attrs["invented"] and "invented" in data1.attrs["title"]
    assert d1.metadata["invented"] and "invented" in demo.__doc__.lower()
    names = [c.name for c in demo.COMPONENTS]
    lw.Mixture(demo.COMPONENTS, total=100).check_blends(data1[names].to_numpy())
    _, other = demo.reformulation_stage(seed=1)
    assert not np.allclose(other["Impact"], data1["Impact"])


def test_fits_recover_the_invented_truth():
    _, data = demo.reformulation_stage()
    for response, truth in demo.TRUE_MODELS.items():
        f = lw.fit_mixture(data, response, "scheffe_quadratic", lw.Mixture(demo.COMPONENTS, total=100))
        table = f.coefficients_proportions
        for term in table.index:
            true = truth.get(term, 0.0)
            assert abs(table.loc[term, "estimate"] - true) < 5 * table.loc[term, "std_error"] + 1e-9, (response, term)


def test_the_shipped_reformulation_study_is_what_the_seeded_script_writes(tmp_path):
    from pathlib import Path

    from levelwise.study import Study

    shipped = Path(__file__).resolve().parents[1] / "dashboards" / "data" / "demo_reformulation.json"
    demo.write(tmp_path / "again.json")
    assert (tmp_path / "again.json").read_bytes() == shipped.read_bytes()  # byte for byte
    study = Study.load(shipped)
    assert "invented" in study.title.lower() and study.notes.startswith("INVENTED data")
    assert study.component_names == ["Resin", "Hardener", "Filler", "Pigment"] and study.mixture.total == 100.0
    assert study.models == {"Impact": "scheffe_quadratic", "Gloss": "scheffe_quadratic"}
    _, data = demo.reformulation_stage()
    table = study.data()
    assert table[["Resin", "Hardener", "Filler", "Pigment", "Impact", "Gloss"]].to_numpy() == \
        pytest.approx(data[["Resin", "Hardener", "Filler", "Pigment", "Impact", "Gloss"]].to_numpy(), abs=0)
