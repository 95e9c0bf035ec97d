"""The study file on disk: its JSON text, its SHA-256, the schema check and the write that never loses a file.

The layout (see ``study_schema.json`` beside this module):

* ``format_version`` -- an integer; older versions are migrated on load (``_migrations``), newer ones refused;
* ``data`` -- the study itself, keys sorted, one run per line so that a diff shows the runs that changed;
* ``audit`` -- the append-only log of changes (what, when, and the reason where one applies);
* ``sha256`` -- the SHA-256 of the canonical form of ``data`` and ``audit`` together.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import stat
import tempfile
from importlib import resources
from pathlib import Path

from .._errors import StudyConflictError, StudyFileError

#: The format this version of levelwise writes.
FORMAT_VERSION = 4

_MAX_INT = 2**53 - 1  # integers exact in every JSON reader; the schema caps run ids, blocks and orders here


# ----- JSON text -------------------------------------------------------------------------------
def _compact(value) -> str:
    return json.dumps(value, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(", ", ": "))


def _pretty(value, level: int = 0) -> str:
    """Indented JSON with sorted keys; a list of objects is written one object per line."""
    pad, end = "  " * (level + 1), "  " * level
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f"{pad}{json.dumps(k, ensure_ascii=False)}: {_pretty(value[k], level + 1)}" for k in sorted(value)]
        return "{\n" + ",\n".join(items) + "\n" + end + "}"
    if isinstance(value, list):
        if not value:
            return "[]"
        if all(isinstance(item, dict) for item in value):
            items = [pad + _compact(item) for item in value]
        else:
            items = [pad + _pretty(item, level + 1) for item in value]
        return "[\n" + ",\n".join(items) + "\n" + end + "]"
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def content_hash(data: dict, audit: list) -> str:
    """SHA-256 (hex) of the canonical JSON of the ``data`` and ``audit`` blocks of a study file."""
    canonical = json.dumps(
        {"audit": audit, "data": data}, sort_keys=True, ensure_ascii=False, allow_nan=False, separators=(",", ":")
    )
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def _reject_constant(name):
    raise ValueError(f"{name} is not allowed in a study file (JSON has no NaN or infinity)")


_SCHEMA = None


def _schema() -> dict:
    global _SCHEMA
    if _SCHEMA is None:
        text = resources.files(__package__).joinpath("study_schema.json").read_text(encoding="utf-8")
        _SCHEMA = json.loads(text)
    return _SCHEMA

_VALIDATOR = None


def _validator():
    global _VALIDATOR
    if _VALIDATOR is None:
        import jsonschema

        schema = _schema()
        cls = jsonschema.validators.validator_for(schema)
        _VALIDATOR = cls(schema)
    return _VALIDATOR


#: Runs beyond this many are checked by a fast test of the same rules as the schema's run item;
#: any run that fails it is then validated by jsonschema, which words the error.
_SCHEMA_RUNS = 500
_RUN_KEYS = frozenset(("run", "stage", "block", "standard_order", "role", "planned", "achieved", "responses"))
_OPTIONAL_RUN_KEYS = frozenset(("whole_plot",))  # format 3: written only for runs of a split-plot stage


def _run_ok(run) -> bool:
    if type(run) is not dict or run.keys() - _OPTIONAL_RUN_KEYS != _RUN_KEYS:
        return False
    if "whole_plot" in run and (type(run["whole_plot"]) is not int or not 1 <= run["whole_plot"] <= _MAX_INT):
        return False
    for key, low in (("run", 1), ("block", -_MAX_INT), ("standard_order", -_MAX_INT)):
        if type(run[key]) is not int or not low <= run[key] <= _MAX_INT:
            return False
    if type(run["stage"]) is not str or type(run["role"]) is not str:
        return False
    for block, kinds in (("planned", (int, float, str)), ("achieved", (int, float, str)), ("responses", (int, float))):
        values = run[block]
        if type(values) is not dict or any(type(v) not in kinds for v in values.values()):
            return False
    return True


def _validate(document, source: str) -> None:
    """Validate a current-format document against the shipped schema; the error names the field.

    A document that passes the yes/no check of ``_schema_check`` (no ``jsonschema`` import) is done; any other is
    validated by ``jsonschema``, which words the error.
    """
    from ._schema_check import conforms

    runs = document.get("data", {}).get("runs") if isinstance(document.get("data"), dict) else None
    if isinstance(runs, list) and len(runs) > _SCHEMA_RUNS:  # the first runs by the schema, the rest by _run_ok
        head = {**document, "data": {**document["data"], "runs": runs[:_SCHEMA_RUNS]}}
        if conforms(head, _schema()) and all(_run_ok(run) for run in runs[_SCHEMA_RUNS:]):
            return
    elif conforms(document, _schema()):
        return
    validator = _validator()
    offset, errors = 0, []
    if isinstance(runs, list) and len(runs) > _SCHEMA_RUNS:
        head = {**document, "data": {**document["data"], "runs": runs[:_SCHEMA_RUNS]}}
        errors = list(validator.iter_errors(head))
        if not errors:
            item = validator.evolve(schema=validator.schema["properties"]["data"]["properties"]["runs"]["items"])
            for i in range(_SCHEMA_RUNS, len(runs)):
                if not _run_ok(runs[i]):
                    errors = list(item.iter_errors(runs[i]))
                    if errors:
                        offset = i
                        break
    else:
        errors = list(validator.iter_errors(document))
    if errors:
        errors.sort(key=lambda e: list(map(str, e.absolute_path)))
        error = errors[0]
        parts = ["data", "runs", offset, *error.absolute_path] if offset else list(error.absolute_path)
        message = error.message if len(error.message) <= 200 else error.message[:197] + "..."
        raise StudyFileError(
            f"The study file '{source}' does not follow the study schema: field '{_json_path(parts)}': {message}"
            + (f" ({len(errors) - 1} more problem(s))." if len(errors) > 1 else "")
        )


def _json_path(parts) -> str:
    out = ""
    for part in parts:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"



# ----- writing -----------------------------------------------------------------------------------
def real_path(path: Path) -> Path:
    """The file a save writes: *path* itself, or the target of *path* when it is a symbolic link."""
    return Path(os.path.realpath(path)) if path.is_symlink() else path


def file_revision(path: Path) -> str | None:
    """SHA-256 (hex) of the bytes of the file at *path*, or None when there is no file."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except FileNotFoundError:
        return None


def _umask() -> int:
    """The process umask, read without changing it where the system allows (Linux: /proc/self/status)."""
    try:
        with open("/proc/self/status", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _is_leftover(name: str, target: str) -> bool:
    """True for the temporary files a save of *target* writes (``.<target>.XXXX.tmp``, ``.<target>.bak.XXXX.tmp``)."""
    return name.startswith(f".{target}.") and name.endswith(".tmp")


class _FolderLock:
    """An exclusive lock on a folder, held while a save checks, writes and renames there, and while leftovers
    of an interrupted save are removed (so that no other levelwise process's temporary file is in flight).
    A killed process's lock is released by the system. Where folders cannot be locked this does nothing."""

    def __init__(self, folder: Path):
        self.folder, self.fd = folder, None

    def __enter__(self):
        try:
            import fcntl

            self.fd = os.open(self.folder, os.O_RDONLY)
            fcntl.flock(self.fd, fcntl.LOCK_EX)
        except (ImportError, OSError):
            if self.fd is not None:
                os.close(self.fd)
            self.fd = None
        return self

    def __exit__(self, *exc):
        if self.fd is not None:
            os.close(self.fd)  # closing the descriptor releases the lock
            self.fd = None


def remove_leftovers(path: Path, *, locked: bool = False) -> list[Path]:
    """Remove the temporary files that an interrupted save of *path* (or of its symlink target) left behind.

    Returns the files removed. Called by every save and load of the study.
    """
    target = real_path(Path(path))
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        return []
    removed = []
    lock = _FolderLock(folder) if not locked else None
    if lock is not None:
        lock.__enter__()
    try:
        for entry in os.scandir(folder):
            if _is_leftover(entry.name, target.name) and entry.is_file(follow_symlinks=False):
                try:
                    os.unlink(entry.path)
                    removed.append(Path(entry.path))
                except OSError:
                    pass
    except OSError:
        pass
    finally:
        if lock is not None:
            lock.__exit__(None, None, None)
    return removed


def write_atomically(path: Path, payload: bytes, *, expected: str | None = None, check: bool = False) -> str:
    """Write *payload* to *path* without ever leaving a half-written file; the old file becomes ``<path>.bak``.

    A symbolic link at *path* is followed: its target is updated and the link kept. An existing file keeps its
    mode; a new file gets the mode the umask allows (``0o666 & ~umask``). Temporary files left by an
    interrupted earlier save are removed first.

    With *check*, a file on disk must still have the SHA-256 *expected* (a deleted file may be written); otherwise
    :class:`StudyConflictError` is raised and nothing is written. The check and the write hold one lock on the
    folder, so two levelwise processes saving at once are serialised and the second one sees the conflict.

    Returns the SHA-256 of *payload* (the file's new revision).

    Raises
    ------
    StudyConflictError
        *check* is set and the file changed since *expected* was read.
    StudyFileError
        The write failed; the message names the path and the operating-system error.
    """
    target = real_path(path)
    folder = target.parent if str(target.parent) else Path(".")
    tmp_name = None
    try:
        with _FolderLock(folder):
            remove_leftovers(target, locked=True)
            if check:
                current = file_revision(target)
                if current is not None and current != expected:
                    raise StudyConflictError(
                        f"The study file '{path}' was changed by another process or program since this study was "
                        "loaded or last saved; saving "
                        "would overwrite those changes, so nothing was written. Load the file again "
                        "(Study.load) and repeat your changes, save to another path, or save with "
                        "overwrite=True to replace the file on disk."
                    )
            try:
                mode = stat.S_IMODE(os.stat(target).st_mode)
            except FileNotFoundError:
                mode = 0o666 & ~_umask()
            fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
            with os.fdopen(fd, "wb") as handle:
                os.fchmod(handle.fileno(), mode)
                handle.write(payload)
                handle.flush()
                os.fsync(handle.fileno())
            if target.exists():
                _keep_backup(target)
            os.replace(tmp_name, target)
            tmp_name = None
            _fsync_folder(folder)
    except OSError as exc:
        reason = os.strerror(exc.errno) if exc.errno else str(exc)
        if exc.errno == errno.ENOSPC:
            reason = "the disk is full"
        raise StudyFileError(
            f"The study could not be saved to '{path}': {reason}. The previous file (if any) is unchanged."
        ) from exc
    finally:
        if tmp_name is not None:
            try:
                os.unlink(tmp_name)
            except OSError:
                pass
    return hashlib.sha256(payload).hexdigest()


def _keep_backup(path: Path) -> None:
    """Make ``<path>.bak`` a complete copy of *path*, atomically (never a half-copied backup)."""
    bak = path.with_name(path.name + ".bak")
    fd, tmp = tempfile.mkstemp(prefix=f".{bak.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        os.unlink(tmp)
        try:
            os.link(path, tmp)  # a hard link costs nothing; the old inode stays the backup after the rename
        except OSError:
            shutil.copy2(path, tmp)
        os.replace(tmp, bak)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)

