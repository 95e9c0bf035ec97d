"""Long text in the views (issue 17, item 4): labels cut with an ellipsis and the full text in a tooltip;
titles wrapped; neither widens the page."""

from __future__ import annotations

import re

import pandas as pd
import pytest

pytest.importorskip("ipywidgets")


def test_a_long_factor_name_is_a_one_line_label_with_the_full_name_as_tooltip():
    from levelwise import Factor
    from levelwise.widgets import SharedModel
    from levelwise.widgets.factor_sliders import FactorSliders
    from levelwise.widgets.style import plain_text

    name = "Oven temperature measured at the \"far\" corner of the chamber, <front> & back " + "x" * 3
    assert len(name) == 80  # the longest name allowed
    factors = [Factor(name, 0.0, 1.0), Factor("B", 0.0, 1.0)]
    data = pd.DataFrame({name: [0, 1, 0, 1, 0.5], "B": [0, 0, 1, 1, 0.5], "y": [1.0, 2.0, 3.0, 4.5, 2.6]})
    shared = SharedModel(factors, data, "y", model=f"`{name}` + B")
    label = FactorSliders(shared).sliders[name].description
    title = re.search(r'title="([^"]*)"', label).group(1)
    style = re.search(r'style="([^"]*)"', label).group(1)
    assert title == name.replace("&", "&amp;").replace('"', "&quot;").replace("<", "&lt;").replace(">", "&gt;")
    for rule in ("max-width:100%", "overflow:hidden", "text-overflow:ellipsis", "white-space:nowrap"):
        assert rule in style
    assert plain_text(label) == name


def test_titles_wrap_and_stay_inert():
    from levelwise.widgets.style import wrapped_html

    block = wrapped_html("T" * 200 + "<script>$x$", "h2")
    assert block.startswith('<h2 class="mathjax_ignore" style="') and block.endswith("</h2>")
    assert "overflow-wrap:anywhere" in block and "max-width:100%" in block
    assert "<script>" not in block and "&lt;script&gt;" in block
