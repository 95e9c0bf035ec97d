"""The mixture views and their exports use the ordinary slice view's colour map and wording (issue 12): the ternary
slice and the surface slice share the cividis stops of ``levelwise.widgets.style.CIVIDIS`` in the notebook, in a
saved figure and in the published pages (export_common.js), and the mixture pages name the bands as the ordinary
page does. The colour stops are the cividis map's, common practice for an ordered quantity seen by readers with
colour-vision deficiency; what is checked here is that every place uses the same ones."""

import re
from pathlib import Path

import numpy as np
import pytest
from test_widgets_mixture import demo_study as mixture_study

from levelwise.dashboards.study_source import demo_study
from levelwise.widgets import SharedModel, SurfaceSlice, TernarySlice
from levelwise.widgets.cox_traces import CoxTraces
from levelwise.widgets.style import CIVIDIS

ASSETS = Path(__file__).resolve().parents[1] / "dashboards" / "assets"


def rgb(hex_colour):
    return [int(hex_colour[k:k + 2], 16) for k in (1, 3, 5)]


@pytest.fixture(scope="module")
def views():
    surface = SurfaceSlice(SharedModel.from_study(demo_study()))
    ternary = TernarySlice(SharedModel.from_study(mixture_study()))
    ternary.flush()
    yield surface, ternary
    surface.close()
    ternary.close()


def test_the_published_pages_use_the_views_colour_stops():
    common = (ASSETS / "export_common.js").read_text(encoding="utf-8")
    ramp = re.search(r"const RAMP = (\[\[.*?\]\]);", common).group(1)
    stops = [[int(v) for v in stop.split(",")] for stop in re.findall(r"\[([\d\s,]+)\]", ramp)]
    assert stops == [rgb(c) for c in CIVIDIS]
    # both pages colour their slice with that one ramp (export_common.js's colour), none with a map of its own
    for page in ("export_page.js", "export_mixture.js"):
        text = (ASSETS / page).read_text(encoding="utf-8")
        assert "colour((v - lo) / ((hi - lo) || 1))" in text and "RAMP" not in text


def test_both_slice_views_and_their_saved_figures_use_the_same_colour_map(views):
    for view in views:
        assert view.sc.colors == CIVIDIS and view.label_scale.colors == CIVIDIS
        fig = view.exports.figure()
        mesh = next(c for ax in fig.axes for c in ax.collections if type(c).__name__ == "QuadMesh")
        cmap = mesh.get_cmap()
        # the map runs through the stops, evenly spread, as bqplot's ColorScale spreads them
        for k, stop in enumerate(CIVIDIS):
            shown = np.round(np.array(cmap(k / (len(CIVIDIS) - 1))[:3]) * 255)
            assert shown == pytest.approx(rgb(stop), abs=1.0)


def test_the_mixture_views_name_quantities_and_bands_as_the_ordinary_views(views):
    surface, ternary = views
    assert list(ternary.quantity.options) == list(surface.quantity.options)[:3]  # mean, CI and PI half-widths
    page = (ASSETS / "export_page.html").read_text(encoding="utf-8")
    mixture_page = (ASSETS / "export_mixture.html").read_text(encoding="utf-8")
    for words in ("Dark band, solid edge: 95% confidence interval for the mean.",
                  "Light band, dashed edge: 95% prediction"):
        assert words in " ".join(page.split()) and words in " ".join(mixture_page.split())
    traces = CoxTraces(ternary.shared)
    caption = " ".join(traces.caption.value.split())
    assert "Dark band, solid edge: 95% confidence interval for the mean" in caption
    assert "light band, dashed edge: 95% prediction interval for a single new run" in caption
    traces.close()
