"""The design builder's split-plot controls (issue 13), headless: a hard-to-change toggle per factor, whole plots for
optimal designs, the whole plots in the preview, the refusal of families without whole plots and the
too-few-whole-plots warning shown in the view, and "Create study" keeping the whole plots."""

from __future__ import annotations

import html

import pytest

from levelwise import demo
from levelwise.widgets import DesignBuilder, SharedModel


def make_shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                       units={"Impact": "J"}, design=demo.demo_design())


def three_factor_builder():
    builder = DesignBuilder(make_shared())
    while len(builder.factor_rows) > 3:
        builder.remove_factor()
    return builder


def test_every_factor_row_has_a_hard_to_change_toggle_read_into_the_factors():
    builder = three_factor_builder()
    assert all("hard" in row for row in builder.factor_rows)
    assert all("lw-hard-to-change" in row["hard"]._dom_classes for row in builder.factor_rows)
    assert [f.hard_to_change for f in builder.factors()] == [False, False, False]
    builder.factor_rows[0]["hard"].value = True
    assert [f.hard_to_change for f in builder.factors()] == [True, False, False]


def test_a_study_with_a_hard_factor_opens_with_its_toggle_on():
    builder = DesignBuilder(SharedModel.from_study(demo.split_plot_study()))
    assert [row["hard"].value for row in builder.factor_rows] == [True, False, False]  # Oven, Dwell, Film


def test_full_factorial_with_a_hard_factor_previews_whole_plots():
    builder = three_factor_builder()
    builder.options["center_points"].value = 0
    builder.options["replicates"].value = 2
    builder.factor_rows[0]["hard"].value = True
    builder.family.value = "full"
    design = builder.preview()
    name = builder.factors()[0].name
    assert design is not None and design.table["whole_plot"].nunique() == 4  # 2 oven settings x 2 replicates
    assert (design.table.groupby("whole_plot")[name].nunique() == 1).all()
    assert "4 whole plots" in builder.structure.value and f"hard to change: {html.escape(name)}" in \
        builder.structure.value
    assert "whole_plot" in builder.run_sheet.value
    assert "lw-design-warning" not in builder.status.value


def test_too_few_whole_plots_show_the_warning_in_the_view():
    builder = three_factor_builder()
    builder.options["center_points"].value = 0
    builder.options["replicates"].value = 1
    builder.factor_rows[0]["hard"].value = True
    builder.family.value = "full"
    design = builder.preview()
    assert design is not None and design.table["whole_plot"].nunique() == 2
    assert "lw-design-warning" in builder.status.value
    assert "only 2 whole plots" in builder.status.value


@pytest.mark.parametrize("family, name", [("ccd", "central_composite"), ("box_behnken", "box_behnken"),
                                          ("plackett_burman", "plackett_burman"),
                                          ("definitive_screening", "definitive_screening")])
def test_families_without_whole_plots_refuse_in_the_status_line(family, name):
    builder = three_factor_builder()
    builder.factor_rows[0]["hard"].value = True
    builder.family.value = family
    assert builder.preview() is None
    status = builder.status.value
    factor = builder.factors()[0].name
    assert name in status and html.escape(f"['{factor}']") in status and "full_factorial" in status


def test_optimal_split_plot_design_and_create_study_keep_the_whole_plots():
    builder = three_factor_builder()
    builder.factor_rows[0]["hard"].value = True
    builder.family.value = "optimal"
    assert builder.options["whole_plots"] in builder.option_box.children
    assert builder.options["variance_ratio"] in builder.option_box.children
    builder.options["model"].value = "main_effects"
    builder.options["runs"].value = 12
    builder.options["starts"].value = 2
    builder.options["whole_plots"].value = 4
    design = builder.search()
    name = builder.factors()[0].name
    assert design is not None and design.table["whole_plot"].nunique() == 4
    assert (design.table.groupby("whole_plot")[name].nunique() == 1).all()
    assert "4 whole plots" in builder.structure.value
    builder.responses.value = "Impact (J)"
    builder.create_study()
    study = builder.shared.study
    assert study.has_whole_plots and study.hard_to_change == [name]
    assert study.whole_plots().nunique() == 4


def test_optimal_without_whole_plots_but_a_hard_factor_is_refused_with_the_reason():
    builder = three_factor_builder()
    builder.factor_rows[0]["hard"].value = True
    builder.family.value = "optimal"
    builder.options["model"].value = "main_effects"
    builder.options["starts"].value = 2
    design = builder.search()  # the search fails: the builder keeps the design it showed before
    assert design is None or "optimal" not in str(design.kind)
    assert "optimal_design without" in builder.status.value and "whole_plots=N" in builder.status.value
    assert "hard_to_change=False" in builder.status.value
