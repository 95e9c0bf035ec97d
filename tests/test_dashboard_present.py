"""The read-only stakeholder page and the workbench, built headless (no browser, no kernel)."""

from __future__ import annotations

import ipywidgets as ipw
import pytest

from levelwise import LevelwiseError
from levelwise.dashboards import explore, present
from levelwise.dashboards.study_source import DEMO, STUDY_ENV, locate, open_study, shared_model
from levelwise.dashboards.summary import CAUTION, fingerprint
from levelwise.widgets import ReadOnlyError

#: Widget types that edit something: none may appear on the stakeholder page.
EDITORS = (ipw.Text, ipw.Textarea, ipw.FloatText, ipw.IntText, ipw.Checkbox, ipw.FileUpload, ipw.BoundedFloatText)


def walk(widget):
    yield widget
    for child in getattr(widget, "children", ()) or ():
        yield from walk(child)


@pytest.fixture(scope="module")
def page():
    return present.build("demo")


def test_present_is_read_only_in_python(page):
    shared = page.shared
    assert shared.read_only
    fits_before = dict(shared.fits)
    for attempt in (
        lambda: shared.set_model("Impact", "Oven"),
        lambda: shared.exclude(4, "trying"),
        lambda: shared.set_data(shared.data.iloc[:5]),
    ):
        with pytest.raises(ReadOnlyError):
            attempt()
    assert dict(shared.fits) == fits_before
    shared.set_settings(Oven=200.0)  # moving the settings is what a viewer may do
    assert shared.settings["Oven"] == 200.0


def test_present_has_no_editors_and_shows_the_caution(page):
    found = [type(w).__name__ for w in walk(page) if isinstance(w, EDITORS)]
    assert found == []
    buttons = {w.description for w in walk(page) if isinstance(w, ipw.Button)}
    # Exports only read what is shown (a figure drawn in the viewer's own kernel, the shown tables): allowed.
    assert buttons <= {"Add current settings", "Use these settings", "Save figure (PNG, SVG)",
                       "Export table (CSV, XLSX)"}
    text = " ".join(w.value for w in walk(page) if isinstance(w, ipw.HTML))
    assert CAUTION in text
    assert "Invented data" in text and "fold-over (16)" in text and "screen (20)" in text
    assert "2 run(s) recorded an achieved setting" in text
    assert "Best settings found" in text  # the optimum for the study's goals


def test_summary_widgets_ignore_browser_updates(page):
    readout = page.views[0]
    before = readout.fingerprint.value
    readout.fingerprint.set_state({"value": "<b>defaced</b>"})  # what a crafted comm update would call
    readout.summary.set_state({"value": "defaced"})
    assert readout.fingerprint.value == before and "defaced" not in readout.summary.value


def test_fingerprint_follows_data_models_and_exclusions():
    source = shared_model(open_study("demo"), read_only=True)
    base = fingerprint(source.data, source.models, source.exclusions)
    assert base == fingerprint(source.data.copy(), dict(source.models), dict(source.exclusions))
    changed = source.data.copy()
    changed.iloc[0, changed.columns.get_loc("Impact")] += 0.01
    assert fingerprint(changed, source.models, source.exclusions) != base
    assert fingerprint(source.data, {**source.models, "Impact": "Oven"}, source.exclusions) != base
    assert fingerprint(source.data, source.models, {4: "why"}) != base


def test_workbench_is_writable_and_composes_every_view():
    page = explore.build("demo")
    assert not page.shared.read_only
    names = {type(v).__name__ for v in page.views}
    assert {"DesignBuilder", "EffectsView", "FactorSliders", "SurfaceSlice", "ResidualInspector",
            "PredictionsView", "OptimizerView"} <= names
    page.shared.exclude(4, "operator note")
    assert 4 in page.shared.exclusions


def test_study_is_found_by_env_then_file_then_demo(tmp_path, monkeypatch):
    monkeypatch.delenv(STUDY_ENV, raising=False)
    assert locate(here=tmp_path) == DEMO
    (tmp_path / "study.json").write_text("{}")
    assert locate(here=tmp_path) == tmp_path / "study.json"
    monkeypatch.setenv(STUDY_ENV, str(tmp_path / "other.json"))
    assert locate(here=tmp_path) == tmp_path / "other.json"
    with pytest.raises(LevelwiseError, match="does not exist"):
        open_study(None)


def test_present_shows_why_when_the_study_cannot_be_read(tmp_path):
    bad = tmp_path / "study.json"
    bad.write_text('{"format_version": 1, "truncated')
    page = present.build(str(bad))
    text = " ".join(w.value for w in walk(page) if isinstance(w, ipw.HTML))
    assert "cannot show its study" in text and str(bad.name) in text
    assert CAUTION in text
    missing = present.build(str(tmp_path / "none.json"))
    assert "does not exist" in " ".join(w.value for w in walk(missing) if isinstance(w, ipw.HTML))


def test_present_sends_only_the_widgets_it_shows():
    """The read-only page closes the parts of its views it does not show (the optimiser's goal editors and search
    controls, the predictions' editors), so a browser creates only the models it shows; the shown parts still
    work."""
    built = present.build("demo")
    shown = present.widget_closure(built)
    optimizer = next(v for v in built.views if type(v).__name__ == "OptimizerView")
    predictions = next(v for v in built.views if type(v).__name__ == "PredictionsView")
    hidden = [w for row in optimizer.goal_rows.values() for w in row.values() if isinstance(w, ipw.Widget)]
    assert hidden and all(w.comm is None for w in hidden)  # closed: never sent to a browser
    assert optimizer.widget.comm is None and predictions.widget.comm is None  # the views' full editors
    for view in built.views:  # nothing a view built is left open unless the page shows it
        full = getattr(view, "widget", None)
        if isinstance(full, ipw.Widget):
            assert set(present.widget_closure(full)) <= set(shown), type(view).__name__
    assert optimizer.result.comm is not None and optimizer.use_button.comm is not None
    before = predictions.table.value
    predictions.add_button.click()  # "Add current settings" still adds a row to the shown table
    assert predictions.table.value != before
    optimizer.use_button.click()  # "Use these settings" still moves the page
    assert built.shared.settings["Oven"] == pytest.approx(optimizer.optimum.settings["Oven"])
    built.shared.set_settings(Oven=175.0)  # the sliders still move the page
    assert built.shared.settings["Oven"] == 175.0
