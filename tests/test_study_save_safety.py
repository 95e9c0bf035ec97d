"""A save never loses the previous file: killed mid-write, disk full, permission denied."""

from __future__ import annotations

import errno
import hashlib
import os
import random
import signal
import sys
import time

import pytest

from levelwise import Factor, Study, StudyFileError, full_factorial

FACTORS = [Factor("Oven", 170, 210, "°C"), Factor("Dwell", 8, 16, "min"), Factor("Film", 50, 90, "µm"),
           Factor("Catalyst", 0.5, 1.5, "%")]


def study_with_runs() -> Study:
    study = Study(FACTORS, title="save safety (invented)")
    study.add_stage("screen", full_factorial(FACTORS, center_points=4, replicates=4, seed=1))  # 68 runs
    study.add_response("Impact", units="J")
    for run in study.run_ids:
        study.record(run, "Impact", 5.0 + run / 7.0)  # invented
    return study


def sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


@pytest.mark.skipif(not hasattr(os, "fork"), reason="the kill test forks a child process (POSIX only)")
def test_save_killed_at_random_moments_never_leaves_a_broken_file(tmp_path):
    study = study_with_runs()
    path = tmp_path / "study.json"
    log = tmp_path / "versions.log"
    study.save(path)
    saved = {sha(path.read_bytes())}
    rng = random.Random(20261201)
    # Kill within a few save-durations of the child starting, measured here, so that on a slow or
    # loaded machine the kills still land inside saves rather than all before the first one.
    started = time.perf_counter()
    for _ in range(3):
        sha(study.to_json().encode("utf-8"))
        study.save(path)
    cycle = (time.perf_counter() - started) / 3
    saved.add(sha(path.read_bytes()))
    kills = interrupted_writes = 0
    for attempt in range(1000):
        if kills >= 220 and interrupted_writes > 0:
            break
        ready_r, ready_w = os.pipe()
        pid = os.fork()
        if pid == 0:  # the child: save as fast as it can until it is killed
            try:
                os.close(ready_r)
                # A process of its own: it loads the file as the previous child left it (saving the
                # parent's copy over it would be refused as a conflict, which is right).
                study = Study.load(path)
                log_fd = os.open(log, os.O_WRONLY | os.O_APPEND | os.O_CREAT)
                os.write(ready_w, b"!")
                n = 0
                while True:
                    n += 1
                    study.set_notes(f"attempt {attempt}, save {n}")
                    # The exact bytes the save will write, logged before the save starts.
                    os.write(log_fd, (sha(study.to_json().encode("utf-8")) + "\n").encode())
                    study.save(path)
            finally:
                os._exit(3)
        os.close(ready_w)
        assert os.read(ready_r, 1) == b"!"
        os.close(ready_r)
        time.sleep(rng.uniform(0.0, 3.0 * cycle + 0.002))
        os.kill(pid, signal.SIGKILL)
        _, status = os.waitpid(pid, 0)
        assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
        kills += 1
        saved.update(log.read_text().split())
        leftovers = [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
        interrupted_writes += bool(leftovers)
        raw = path.read_bytes()
        assert sha(raw) in saved, f"after kill {kills} the file is not one of the saved versions"
        loaded = Study.load(path)
        assert loaded.notes == "" or loaded.notes.startswith("attempt ")
        assert len(loaded) == len(study)
        bak = tmp_path / "study.json.bak"
        if bak.exists():
            assert sha(bak.read_bytes()) in saved
        # The load removed the temporary files the killed save left behind.
        assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    assert kills >= 200
    # Some kills must have landed inside a save (a temp file left behind), or the test proved little.
    assert interrupted_writes > 0


def test_permission_denied_on_rename_keeps_the_old_file(tmp_path, monkeypatch):
    study = study_with_runs()
    path = study.save(tmp_path / "study.json")
    before = path.read_bytes()
    study.set_notes("changed")

    def refuse(*args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(StudyFileError, match=r"could not be saved to '.*study.json': Permission denied. The previous"):
        study.save(path)
    monkeypatch.undo()
    assert path.read_bytes() == before
    Study.load(path)
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_read_only_folder_keeps_the_old_file(tmp_path, monkeypatch):
    # Root ignores chmod, so a read-only folder is simulated where it bites: creating the temporary file.
    study = study_with_runs()
    path = study.save(tmp_path / "study.json")
    before = path.read_bytes()

    def refuse(*args, **kwargs):
        raise PermissionError(errno.EROFS, "Read-only file system")

    monkeypatch.setattr("tempfile.mkstemp", refuse)
    study.set_notes("changed")
    with pytest.raises(StudyFileError, match="Read-only file system"):
        study.save(path)
    monkeypatch.undo()
    assert path.read_bytes() == before


def test_disk_full_during_fsync_keeps_the_old_file(tmp_path, monkeypatch):
    study = study_with_runs()
    path = study.save(tmp_path / "study.json")
    before = path.read_bytes()
    study.set_notes("changed")

    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "fsync", full)
    with pytest.raises(StudyFileError, match="the disk is full"):
        study.save(path)
    monkeypatch.undo()
    assert path.read_bytes() == before
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


@pytest.mark.skipif(sys.platform != "linux", reason="RLIMIT_FSIZE behaviour checked on Linux")
def test_size_limited_write_keeps_the_old_file(tmp_path):
    import resource

    study = study_with_runs()
    path = study.save(tmp_path / "study.json")
    before = path.read_bytes()
    # The new file is about three times as large: 132 more runs (notes are limited to 2,000 characters).
    study.add_stage("more", full_factorial(FACTORS, center_points=4, replicates=8, seed=2), renumber=True)
    pid = os.fork()
    if pid == 0:
        code = 1
        try:
            signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # get EFBIG from write() instead of a signal
            resource.setrlimit(resource.RLIMIT_FSIZE, (len(before) + 1000, len(before) + 1000))
            try:
                study.save(path)
                code = 2  # the save succeeded: the limit did not bite
            except StudyFileError as exc:
                code = 0 if "File too large" in str(exc) else 4
        finally:
            os._exit(code)
    _, status = os.waitpid(pid, 0)
    assert os.WEXITSTATUS(status) == 0
    assert path.read_bytes() == before
    Study.load(path)
