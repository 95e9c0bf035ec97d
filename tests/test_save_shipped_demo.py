"""On the shipped demo, Save asks for a path and never overwrites the shipped study files.

The demo study is the invented campaign shipped in dashboards/data; the checks are bookkeeping (the bytes of
the shipped file, where the study was written, what the page says).
"""

import hashlib
import shutil

import pytest

from levelwise import LevelwiseError, Study
from levelwise.dashboards import explore
from levelwise.dashboards.study_source import DEMO_FILE
from levelwise.widgets import RunSheetEditor, SharedModel
from levelwise.widgets.run_sheet_editor import SHIPPED_DATA


def digest(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def sheet_of(page) -> RunSheetEditor:
    return next(v for v in page.views if isinstance(v, RunSheetEditor))


def test_the_shipped_data_folder_is_the_one_the_dashboards_read():
    assert DEMO_FILE.resolve().parent == SHIPPED_DATA  # found without importing the dashboards


def test_save_on_the_demo_asks_for_a_path_and_writes_where_told(tmp_path):
    before = digest(DEMO_FILE)
    page = explore.build("demo")
    sheet = sheet_of(page)
    assert sheet.path.value == ""  # nothing to save into until the user says where
    assert "type a path in 'Save to'" in sheet.state.value
    run = page.shared.study.run_ids[0]
    sheet.cells[(run, "Impact")].value = "11.5"  # an edit: there is something to save
    assert "Unsaved changes" in sheet.state.value
    sheet.save_button.click()
    assert "Type where to save the study" in sheet.status.value
    assert "lw-needs-path" in sheet.path._dom_classes
    sheet.path.value = str(DEMO_FILE)  # typed on purpose: still refused
    sheet.save_button.click()
    assert "never overwritten" in sheet.status.value and "type another path" in sheet.status.value
    assert digest(DEMO_FILE) == before
    target = tmp_path / "my_study.json"
    sheet.path.value = str(target)
    sheet.save_button.click()
    assert target.is_file() and Study.load(target).data(apply_exclusions=False).loc[run, "Impact"] == 11.5
    assert "Saved to" in sheet.state.value and "lw-needs-path" not in sheet.path._dom_classes
    assert digest(DEMO_FILE) == before  # the shipped demo is unchanged


def test_an_editor_given_the_shipped_file_still_asks_for_a_path(tmp_path):
    before = digest(DEMO_FILE)
    shared = SharedModel.from_study(Study.load(DEMO_FILE))
    sheet = RunSheetEditor(shared, path=DEMO_FILE)
    assert sheet.path.value == ""
    sheet.path.value = str(SHIPPED_DATA / "other.json")  # anywhere in the shipped folder
    with pytest.raises(LevelwiseError, match="never overwritten"):
        sheet.save()
    assert not (SHIPPED_DATA / "other.json").exists() and digest(DEMO_FILE) == before


def test_a_served_copy_of_the_demo_saves_back_to_its_own_file(tmp_path):
    copy = tmp_path / "study.json"
    shutil.copy(DEMO_FILE, copy)
    page = explore.build(str(copy))
    sheet = sheet_of(page)
    assert sheet.path.value == str(copy)  # a file of the user's own: Save writes back to it
    run = page.shared.study.run_ids[1]
    sheet.cells[(run, "Gloss")].value = "84,5"  # decimal comma
    sheet.save()
    assert Study.load(copy).data(apply_exclusions=False).loc[run, "Gloss"] == 84.5
