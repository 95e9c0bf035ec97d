"""Inputs never mislead: number fields read text on the kernel, hints are true, a typo is reported once.

The demo study is the invented, seeded scenario of kernel_core/demo.py.
"""

from __future__ import annotations

import pytest

from levelwise import LevelwiseError, demo, fractional_factorial, parse_model
from levelwise.widgets import (
    DesignBuilder,
    EffectsView,
    FactorSliders,
    OptimizerView,
    PredictionsView,
    ResidualInspector,
    SharedModel,
    SurfaceSlice,
)
from levelwise.widgets._number import NumberField, parse_number
from levelwise.widgets.design_builder import generator_example


def make_shared():
    return SharedModel(demo.FACTORS, demo.demo_data(), responses=["Impact"], models={"Impact": demo.MODEL},
                       units={"Impact": "J"}, design=demo.demo_design())


@pytest.mark.parametrize("text, number", [("1.5", 1.5), ("1,5", 1.5), (" -0,25 ", -0.25), ("12", 12.0),
                                          ("2e3", 2000.0), ("0,5", 0.5), ("0,125", 0.125), ("\u22123", -3.0)])
def test_decimal_point_or_comma(text, number):
    assert parse_number(text) == number


@pytest.mark.parametrize("text, words", [("2x0", "not a number"), ("1,500", "could be 1.500"),
                                         ("1.234,5", "mixes separators"), ("1_0", "not a number"),
                                         ("inf", "not a number"), ("", "empty"), ("1,2,3", "mixes separators")])
def test_ambiguous_or_bad_text_is_refused(text, words):
    with pytest.raises(LevelwiseError, match=words):
        parse_number(text, field="Low")


def test_number_field_keeps_last_good_value_and_says_why():
    field = NumberField(2.0, description="Low")
    field.text.value = "1,5"
    assert field.value == 1.5 and field.error == ""
    field.text.value = "2x0"
    assert field.value == 1.5  # never reinterpreted as 20
    assert "Low" in field.error and "'2x0'" in field.error and "lw-error" in field.message.value
    field.text.value = "3"
    assert field.value == 3.0 and field.message.value == ""
    field.value = 4.25
    assert field.text.value == "4.25"
    whole = NumberField(3, integer=True, minimum=0, description="Runs")
    whole.text.value = "2,5"
    assert whole.value == 3 and "whole number" in whole.error
    whole.text.value = "-1"
    assert whole.value == 3 and "at least 0" in whole.error


def test_builder_factor_limits_take_a_decimal_comma():
    builder = DesignBuilder(make_shared())
    builder.family.value = "full"
    builder.factor_rows[0]["high"].text.value = "1,5"
    builder.factor_rows[0]["low"].text.value = "0,5"
    assert builder.factors()[0].low == 0.5 and builder.factors()[0].high == 1.5
    builder.factor_rows[0]["high"].text.value = "2x0"
    assert builder.factors()[0].high == 1.5


def test_runs_zero_means_what_the_hint_says_for_optimal_designs():
    builder = DesignBuilder(make_shared())
    builder.family.value = "optimal"
    builder.options["model"].value = "full_second_order"
    builder.options["runs"].value = 0
    builder.options["starts"].value = 2
    assert "as many runs as the model has terms" in builder.hint.value
    design = builder.search()
    terms = len(parse_model("full_second_order", [f.name for f in demo.FACTORS]).terms)
    assert design is not None and len(design) == terms == 15


def test_runs_zero_for_fractions_is_the_half_fraction():
    builder = DesignBuilder(make_shared())
    builder.options["center_points"].value = 0
    builder.family.value = "fractional"
    builder.options["runs"].value = 0
    assert "half fraction" in builder.hint.value
    assert len(builder.design) == 2 ** (len(demo.FACTORS) - 1)


def test_generator_hint_uses_the_factor_names_and_works():
    names = [f.name for f in demo.FACTORS]
    example = generator_example(names)
    assert example == "Catalyst=Oven:Dwell:Film"
    fractional_factorial(demo.FACTORS, generators=[example])  # the hint is a valid generator
    builder = DesignBuilder(make_shared())
    builder.family.value = "fractional"
    assert example in builder.options["generators"].placeholder
    assert generator_example(list("ABCDE")) == "E=ABCD"
    fractional_factorial(5, generators=[generator_example(list("ABCDE"))])
    assert generator_example(["A", "B"]) == ""


def test_one_model_typo_gives_one_message():
    shared = make_shared()
    views = [FactorSliders(shared), SurfaceSlice(shared, shape=(20, 20)), ResidualInspector(shared),
             EffectsView(shared), PredictionsView(shared), OptimizerView(shared, starts=2), DesignBuilder(shared)]
    effects = views[3]
    effects.model_text.value = "Oven + Dwel + Film"
    shown = [v for v in views if "Dwel" in v.status.value]
    assert shown == [effects]
    assert effects.status.value.count("names an unknown factor") == 1
