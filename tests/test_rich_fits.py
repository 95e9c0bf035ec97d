"""Rich notebook output of fits, studies, ANOVA and coefficient tables: rounded, with units (issue 16).

Reference values: the least-squares coefficients are compared with statsmodels OLS on the same coded columns,
rounded to four significant digits as shown; the split-plot fit uses the oats data vendored in
tests/data/splitplot (Yates 1935, see tests/data/SOURCES.md); the GLM data are the seeded invented counts of
tests/test_fit_glm.py.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf

import levelwise as lw
from levelwise import Factor, Study
from levelwise._html import format_number
from levelwise._rich import ResultTable


def two_by_two_study() -> Study:
    study = Study([Factor("Oven", 150, 200, units="°C"), Factor("Dwell", 1, 3, units="min")], title="Cure <test>")
    design = lw.full_factorial(study.factors, center_points=2, randomize=False)
    study.add_stage("screen", design)
    study.add_response("Impact", units="J", goal="maximize")
    for run, value in zip(study.run_ids, [6.913, 9.6271, 8.8013, 10.1178, 9.0123, 9.1451]):
        study.record(run, "Impact", value)
    study.set_model("Impact", "Oven + Dwell")
    return study


def cells(text: str) -> list[str]:
    return re.findall(r"<t[dh]>([^<]*)</t[dh]>", text)


def test_fit_html_rounds_to_four_digits_with_units_and_matches_statsmodels():
    study = two_by_two_study()
    fit = study.fit("Impact")
    data = study.data()
    coded = pd.DataFrame({"a": (data["Oven"] - 175) / 25, "b": (data["Dwell"] - 2) / 1, "y": data["Impact"]})
    reference = smf.ols("y ~ a + b", coded).fit()  # statsmodels OLS, the reference library
    text = fit._repr_html_()
    shown = cells(text)
    for term, ref in (("Intercept", "Intercept"), ("Oven", "a"), ("Dwell", "b")):
        assert (f"<tr><th>{term}</th><td>{format_number(reference.params[ref], 4)}</td>"
                f"<td>{format_number(reference.bse[ref], 4)}</td>") in text
    assert f"s = {format_number(np.sqrt(reference.scale), 4)} J" in text
    assert f"R² = {format_number(reference.rsquared, 4)}" in text
    assert "estimate [J]" in text and "sum_sq [J²]" in text  # units in the headers
    assert "Oven 150 to 200 °C" in text and "Dwell 1 to 3 min" in text
    assert "least-squares fit of 6 runs" in text
    # No unrounded number anywhere: every numeric cell has at most 4 significant digits.
    for value in shown:
        digits = re.sub(r"e[+-]\d+$", "", value).replace("-", "").replace(".", "").lstrip("0")
        if re.fullmatch(r"\d+", digits or "x"):
            assert len(digits) <= 4, value


def test_anova_and_coefficient_tables_show_themselves_and_stay_dataframes():
    fit = two_by_two_study().fit("Impact")
    for table in (fit.anova, fit.coefficients):
        assert isinstance(table, pd.DataFrame) and isinstance(table, ResultTable)
        assert type(table.copy()) is pd.DataFrame and type(table.iloc[:1]) is pd.DataFrame  # derived: plain
        text = table._repr_html_()
        assert "<caption>" in text and "0.0000" not in text
    anova_text = fit.anova._repr_html_()
    assert "Analysis of variance of Impact" in anova_text and "mean_sq [J²]" in anova_text
    p = float(fit.anova.loc["Oven", "p_value"])
    assert f"<td>{format_number(p, 3)}</td>" in anova_text  # p-values to three significant digits
    coefficient_text = fit.coefficients._repr_html_()
    assert "coded units" in coefficient_text and "ci_low [J]" in coefficient_text and "<th>t</th>" in coefficient_text


def test_a_fit_made_without_a_study_has_no_response_units():
    study = two_by_two_study()
    fit = lw.fit(study.data(), "Impact", "Oven + Dwell", factors=study.factors)
    text = fit._repr_html_()
    assert "estimate [" not in text and "estimate" in text


def test_study_html_lists_factors_responses_goals_and_stages_escaped():
    study = two_by_two_study()
    text = study._repr_html_()
    assert "Cure &lt;test&gt;" in text and "<test>" not in text
    assert "6 runs in stages screen (6 runs)" in text
    assert "<td>Oven</td><td>150 to 200</td><td>°C</td>" in text
    assert "<td>Impact</td><td>J</td><td>maximize</td><td></td><td>6</td><td>Oven + Dwell</td>" in text


def test_split_plot_and_glm_fits_have_rich_output():
    from pathlib import Path

    oats = pd.read_csv(Path(__file__).parent / "data" / "splitplot" / "oats.csv")
    oats["plot"] = oats["block"] + ":" + oats["variety"]
    oats["nitrogen"] = oats["nitrogen"].astype(str)
    mixed = lw.fit(oats, "yield", "block + variety*nitrogen", whole_plot="plot")
    text = mixed._repr_html_()
    assert "split-plot fit (REML) of 72 runs" in text and "whole-plot" in text and "Analysis of variance" in text
    assert isinstance(mixed.anova, ResultTable) and isinstance(mixed.coefficients, ResultTable)

    factors = [Factor("Oven", 160, 200), Factor("Dwell", 5, 15)]
    design = lw.full_factorial(factors, replicates=3, center_points=0, seed=1)
    t = design.table.copy()
    rng = np.random.default_rng(1)
    t["tested"] = 20
    t["passed"] = rng.binomial(20, 0.6, len(t))
    glm = lw.fit(t, "passed", "Oven + Dwell", factors=factors, family="binomial", trials="tested")
    text = glm._repr_html_()
    assert "generalised linear fit of 12 runs" in text and "link scale" in text and "odds_ratio" in text
    assert isinstance(glm.coefficients, ResultTable) and isinstance(glm.anova, ResultTable)
