"""The workbench in sections in the order of the job, opening on the analysis, and following a new study.

Bookkeeping checks on the invented demo study and an invented 2^2 table (no published value applies).
"""

import warnings

import pandas as pd

import levelwise as lw
from levelwise.dashboards import explore


def test_sections_in_order_and_the_page_opens_on_the_analysis():
    page = explore.build("demo")
    titles = [s.titles[0] for s in page.sections]
    assert titles == ["1 · Plan the runs", "2 · Record the results", "3 · Fit the model", "4 · Explore and predict",
                      "5 · Share"]
    opened = {s.titles[0][0]: s.selected_index == 0 for s in page.sections}
    assert opened == {"1": False, "2": False, "3": True, "4": True, "5": True}


def test_a_new_study_switches_every_view_and_the_title_at_once():
    page = explore.build("demo")
    table = pd.DataFrame({"run": [1, 2, 3, 4, 5], "A": [0, 1, 0, 1, 0.5], "B": [0, 0, 1, 1, 0.5],
                          "y [g]": [1.0, 2.1, 2.9, 4.2, 2.4]})  # invented
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        study = lw.Study.from_table(table, factors=["A", "B"], responses=["y"], title="Bench table")
    page.shared.use_study(study)
    assert "Bench table" in page.children[0].value
    for view in page.views:
        assert view.shared.study is study
    errors = [type(v).__name__ for v in page.views if "error" in v.status.value.lower()]
    assert errors == []
    sheet = next(v for v in page.views if type(v).__name__ == "RunSheetEditor")
    assert {c for _, c in sheet.cells} == {"y"}
    assert not any("Impact" in getattr(c, "value", "") for c in sheet.grid.children)
