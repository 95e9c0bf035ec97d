"""Rich notebook output: designs and their evaluation as rounded HTML tables with units; views show themselves.

Check values: the 2^(4-1) fraction with D = ABC has resolution IV and 8 corner runs (NIST/SEMATECH
e-Handbook, section 5.3.3.4.4, the 2^(4-1) design); with two centre points 10 runs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from levelwise import Factor, demo, evaluate, fractional_factorial
from levelwise._html import format_number, html_table


def test_format_number_rounds_to_significant_digits():
    assert format_number(3.14159265) == "3.142"
    assert format_number(12345.678) == "12350"
    assert format_number(0.000123456) == "1.235e-04"
    assert format_number(float("nan")) == ""
    assert format_number(7) == "7"
    assert format_number(0.0) == "0"


def test_html_table_escapes_rounds_and_cuts():
    frame = pd.DataFrame({"Oven": np.linspace(150, 200, 50) + 1e-9, "note": ["<b>x</b>"] * 50})
    text = html_table(frame, units={"Oven": "degC"}, caption="runs", max_rows=10)
    assert "<th>Oven [degC]</th>" in text and "<caption>runs</caption>" in text
    assert "&lt;b&gt;x&lt;/b&gt;" in text and "<b>x</b>" not in text
    assert text.count("<tr>") == 11 and "40 more rows" in text
    assert "150.0000000" not in text and "<td>150</td>" in text


def test_design_html_has_summary_units_and_runs():
    factors = [Factor("Oven", 150, 200, units="degC"), Factor("Dwell", 1, 3, units="min"), Factor("C", 0, 1),
               Factor("D", 0, 1)]
    design = fractional_factorial(factors, generators=["D=Oven:Dwell:C"], center_points=2, randomize=False)
    text = design._repr_html_()
    assert "10 runs" in text and "resolution 4" in text and "D=Oven:Dwell:C" in text
    assert "Oven 150 to 200 degC" in text and "<th>Oven [degC]</th>" in text
    assert text.count("<tr>") == 1 + 10
    ev = evaluate(design, "main_effects")._repr_html_()
    assert "rank 5" in ev and "5 residual degrees of freedom" in ev and "VIF" in ev


def test_a_view_displays_itself():
    from levelwise.widgets import FactorSliders, SharedModel

    shared = SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                         units={"Impact": "J"}, design=demo.demo_design())
    view = FactorSliders(shared)
    bundle = view._repr_mimebundle_()
    assert bundle["application/vnd.jupyter.widget-view+json"]["model_id"] == view.widget.model_id


def test_builder_saves_its_figure_and_exports_its_evaluation_table(tmp_path):
    import io

    from levelwise.widgets import DesignBuilder, SharedModel

    shared = SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                         units={"Impact": "J"}, design=demo.demo_design())
    builder = DesignBuilder(shared)
    builder.family.value = "ccd"
    files = builder.figure_export.render()
    assert files["png"].startswith(b"\x89PNG\r\n\x1a\n")
    svg = files["svg"].decode("utf-8")
    assert "<svg" in svg
    # Axis labels carry units and the caption says what is drawn (matplotlib writes SVG text as paths, with the
    # text in comments unless svg.fonttype is 'none'; the PNG holds no text), so check the figure itself.
    fig = builder.figure()
    labels = [ax.get_xlabel() for ax in fig.axes if ax.get_visible()]
    assert "Oven [°C]" in labels and "Dwell [min]" in labels  # the demo factors carry units
    assert f"{len(builder.design)} runs" in fig._supxlabel.get_text()
    assert "design.png" in builder.figure_export.links.value and "design.svg" in builder.figure_export.links.value
    builder.figure_export.save(tmp_path / "design.svg")
    assert (tmp_path / "design.svg").read_bytes().startswith(b"<?xml")
    csv = builder.evaluation_export.payload("csv").decode("utf-8")
    back = pd.read_csv(io.StringIO(csv), index_col=0)
    ev = evaluate(builder.design, builder.eval_model.value)  # levelwise called directly
    np.testing.assert_allclose(back["VIF"].to_numpy(), ev.vif.to_numpy(), rtol=1e-12)
    xlsx = pd.read_excel(io.BytesIO(builder.evaluation_export.payload("xlsx")), index_col=0)
    np.testing.assert_allclose(xlsx["VIF"].to_numpy(), ev.vif.to_numpy(), rtol=1e-12)
    assert "design-evaluation.csv" in builder.evaluation_export.widget.value
