"""The published page's optimum, searched once by ``levelwise publish`` and stored beside the study.

A published dashboard is read-only: its data, models and goals cannot change, so neither can the best settings
for the study's goals. ``levelwise publish`` runs the page's own search (the optimiser view with the study's
goals, its number of starts and its seed) and writes the result to ``optimum.json``; each viewer's kernel then
shows it without running the search again (a few CPU-seconds per kernel) and, for a study of least-squares fits,
without importing ``scipy.optimize`` (about 15 MB per kernel; statsmodels' GLM, which fits a pass-rate or rate
response, imports it through ``scipy.stats``).

The stored result is used only when it is the answer for exactly this page: the study file's SHA-256, the goals,
the starts, the seed and the levelwise version must all match. Otherwise (a study file replaced after
publishing, another levelwise version, no file) the page searches as before.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pandas as pd

#: The stored optimum's file name in a published folder (``publish.OPTIONAL_FILES``).
OPTIMUM_FILE = "optimum.json"


def _frame(frame: pd.DataFrame | None):
    if frame is None:
        return None
    return {"index": [_plain(i) for i in frame.index], "index_name": frame.index.name,
            "columns": list(frame.columns), "data": [[_plain(v) for v in row] for row in frame.itertuples(False)]}


def _unframe(stored) -> pd.DataFrame | None:
    if stored is None:
        return None
    frame = pd.DataFrame(stored["data"], columns=stored["columns"], index=stored["index"])
    frame.index.name = stored["index_name"]
    return frame.infer_objects()


def _plain(value):
    """A JSON value for a table cell (numpy scalars to Python; strings and booleans kept)."""
    if hasattr(value, "item"):
        value = value.item()
    return value


def key(study_file: Path, view) -> dict:
    """What the stored optimum must have been searched for: the study file's bytes, goals, starts, seed, version."""
    from levelwise import __version__

    return {"study_sha256": hashlib.sha256(Path(study_file).read_bytes()).hexdigest(),
            "goals": json.loads(json.dumps(view.goals())), "starts": view.starts, "seed": view.seed,
            "levelwise": __version__}


def to_json(optimum) -> dict | None:
    """The fields of an :class:`~levelwise.Optimum` (or of the search over categorical levels), None for another
    kind of result (it is then not stored)."""
    from levelwise.model._categorical_search import LevelOptimum
    from levelwise.model._optimize import Optimum

    if type(optimum) not in (Optimum, LevelOptimum) or optimum.stopped:
        return None
    out = {"kind": type(optimum).__name__, "settings": {k: _plain(v) for k, v in optimum.settings.items()},
           "predictions": _frame(optimum.predictions),
           "desirability": {str(k): float(v) for k, v in optimum.desirability.items()},
           "desirability_name": optimum.desirability.name, "overall": float(optimum.overall),
           "starts": _frame(optimum.starts), "search_complete": bool(optimum.search_complete)}
    if isinstance(optimum, LevelOptimum):
        out["winner"] = {k: _plain(v) for k, v in optimum.winner.items()}
        out["by_level"] = _frame(optimum.by_level)
    return out


def from_json(stored: dict):
    from levelwise.model._categorical_search import LevelOptimum
    from levelwise.model._optimize import Optimum

    fields = dict(settings=stored["settings"], predictions=_unframe(stored["predictions"]),
                  desirability=pd.Series(stored["desirability"], name=stored["desirability_name"], dtype=float),
                  overall=stored["overall"], starts=_unframe(stored["starts"]),
                  search_complete=stored["search_complete"])
    if stored["kind"] == "LevelOptimum":
        return LevelOptimum(**fields, winner=stored["winner"], by_level=_unframe(stored["by_level"]))
    return Optimum(**fields)


def write(folder: Path, study_file: Path, view) -> Path | None:
    """Store *view*'s optimum (already searched) for the published *folder*; None when there is nothing to store."""
    found = to_json(getattr(view, "optimum", None))
    if found is None:
        return None
    path = Path(folder) / OPTIMUM_FILE
    path.write_text(json.dumps({"key": key(study_file, view), "optimum": found}, indent=1) + "\n", encoding="utf-8")
    return path


def read(study_file: Path, view):
    """The stored optimum for this page (*view* with the study's goals set), or None when there is none that
    matches exactly (see the module)."""
    path = Path(study_file).parent / OPTIMUM_FILE
    try:
        stored = json.loads(path.read_text(encoding="utf-8"))
        if stored["key"] != key(study_file, view):
            return None
        return from_json(stored["optimum"])
    except (OSError, ValueError, KeyError, TypeError):
        return None
