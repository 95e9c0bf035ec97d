"""The study file on disk: leftovers of an interrupted save, the file's mode, symlinks, and two processes saving.

Issue 18 (files) and issue 17 (two processes saving the same study at once: a revision check on save).
"""

from __future__ import annotations

import multiprocessing
import os
import stat
import sys

import pytest

from levelwise import Factor, Study, StudyConflictError, StudyFileError

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min")]


def small_study(notes: str = "") -> Study:
    return Study(FACTORS, title="file handling (invented)", notes=notes)


def leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def plant_leftovers(path):
    """The files a save killed mid-way leaves: the new text's temp file and a backup's temp file."""
    a = path.parent / f".{path.name}.k3j9x2.tmp"
    b = path.parent / f".{path.name}.bak.q8w1z0.tmp"
    a.write_text('{"format_version": 2, "da')  # half-written
    b.write_text("")
    return {a.name, b.name}


def test_a_load_removes_the_temp_files_of_an_interrupted_save(tmp_path):
    path = small_study().save(tmp_path / "study.json")
    other = tmp_path / ".other.json.abc.tmp"  # another study's temp file is not touched
    other.write_text("x")
    planted = plant_leftovers(path)
    assert planted <= set(leftovers(tmp_path))
    Study.load(path)
    assert leftovers(tmp_path) == [other.name]


def test_a_save_removes_the_temp_files_of_an_interrupted_save(tmp_path):
    study = small_study()
    path = study.save(tmp_path / "study.json")
    plant_leftovers(path)
    study.set_notes("second save")
    study.save(path)
    assert leftovers(tmp_path) == []
    assert Study.load(path).notes == "second save"


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
def test_save_keeps_the_mode_of_an_existing_file(tmp_path):
    study = small_study()
    path = study.save(tmp_path / "study.json")
    os.chmod(path, 0o640)
    study.set_notes("changed")
    study.save(path)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o640
    os.chmod(path, 0o604)
    study.save(path)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o604


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
@pytest.mark.parametrize("mask", [0o022, 0o027, 0o077])
def test_a_new_file_gets_the_mode_the_umask_allows(tmp_path, mask):
    old = os.umask(mask)
    try:
        path = small_study().save(tmp_path / f"study-{mask:o}.json")
        reference = tmp_path / f"plain-{mask:o}.txt"
        with open(reference, "w") as handle:  # what any program creating a file gets under this umask
            handle.write("x")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o666 & ~mask
    assert stat.S_IMODE(os.stat(path).st_mode) == stat.S_IMODE(os.stat(reference).st_mode)


@pytest.mark.skipif(os.name != "posix", reason="symbolic links")
def test_save_writes_through_a_symlink_to_its_target(tmp_path):
    real = tmp_path / "store" / "study.json"
    real.parent.mkdir()
    study = small_study()
    study.save(real)
    link = tmp_path / "link.json"
    link.symlink_to(real)
    loaded = Study.load(link)
    loaded.set_notes("written through the link")
    loaded.save(link)
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert Study.load(real).notes == "written through the link"
    assert (real.parent / "study.json.bak").exists()  # the backup sits beside the target
    # A leftover beside the target (where the save writes its temp files) is removed through the link too.
    plant_leftovers(real)
    Study.load(link)
    assert leftovers(real.parent) == []


def test_a_second_save_over_a_changed_file_is_a_conflict(tmp_path):
    path = small_study().save(tmp_path / "study.json")
    first, second = Study.load(path), Study.load(path)
    first.set_notes("first's change")
    first.save(path)
    second.set_notes("second's change")
    with pytest.raises(StudyConflictError, match=r"'.*study.json' was changed by another process.*Load the file again"):
        second.save(path)
    assert Study.load(path).notes == "first's change"
    assert isinstance(StudyConflictError("x"), StudyFileError)
    # The way out the message names: load again and repeat the change; or overwrite on purpose.
    again = Study.load(path)
    again.set_notes("second's change, after reading the first's")
    again.save(path)
    second.save(path, overwrite=True)
    assert Study.load(path).notes == "second's change"


def test_a_study_saving_its_own_file_twice_is_no_conflict(tmp_path):
    study = small_study()
    path = study.save(tmp_path / "study.json")
    for n in range(3):
        study.set_notes(f"save {n}")
        study.save(path)
    assert Study.load(path).notes == "save 2"


def _load_change_save(path, notes, loaded, go, results):
    study = Study.load(path)
    loaded.set()
    go.wait(30)
    study.set_notes(notes)
    try:
        study.save(path)
        results.put((notes, "saved"))
    except StudyConflictError as exc:
        results.put((notes, f"conflict: {exc}"))


@pytest.mark.skipif(sys.platform != "linux", reason="two processes started with fork")
def test_two_processes_saving_the_same_study_at_once(tmp_path):
    path = small_study().save(tmp_path / "study.json")
    ctx = multiprocessing.get_context("fork")
    for attempt in range(5):  # both released together, five times; exactly one save may win each time
        results = ctx.Queue()
        go = ctx.Event()
        loaded = [ctx.Event(), ctx.Event()]
        procs = [ctx.Process(target=_load_change_save, args=(path, f"{who} {attempt}", loaded[i], go, results))
                 for i, who in enumerate(("A", "B"))]
        for p in procs:
            p.start()
        for event in loaded:
            assert event.wait(30)
        go.set()
        outcome = dict(results.get(timeout=30) for _ in procs)
        for p in procs:
            p.join(30)
            assert p.exitcode == 0
        saved = [notes for notes, what in outcome.items() if what == "saved"]
        conflicts = [what for what in outcome.values() if what.startswith("conflict")]
        assert len(saved) == 1 and len(conflicts) == 1, outcome
        assert "changed by another process" in conflicts[0]
        # The winner's change is on disk; the loser wrote nothing.
        assert Study.load(path).notes == saved[0]
