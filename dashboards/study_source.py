"""Where a dashboard's study comes from, and the shared model built on it.

A dashboard notebook finds its study this way (first match wins):

1. the environment variable ``LEVELWISE_STUDY`` (a path to a study JSON file, or ``demo``);
   ``levelwise serve STUDY`` and ``levelwise view DIR`` set it for the server and every kernel;
2. a file named ``study.json`` beside the notebook (the kernel's working folder), which is how
   a published folder is laid out, so ``voila present.ipynb`` run inside it also works;
3. the invented demo study.

The dashboards build their :class:`~levelwise.widgets.SharedModel` on the :class:`~levelwise.Study` read
here (:func:`shared_model`): the study is the one state every view shows.
"""

from __future__ import annotations

import os
from pathlib import Path

from levelwise import LevelwiseError, Study

#: Environment variable naming the study a dashboard shows.
STUDY_ENV = "LEVELWISE_STUDY"
#: Name of the study file beside a published notebook.
STUDY_FILE = "study.json"
#: The word that names the invented demo study wherever a study path is expected.
DEMO = "demo"


def locate(explicit=None, here=None) -> str | Path:
    """The study a dashboard should show: *explicit*, else ``$LEVELWISE_STUDY``, else ``study.json`` here, else demo."""
    if explicit not in (None, ""):
        return DEMO if str(explicit) == DEMO else Path(explicit)
    env = os.environ.get(STUDY_ENV, "")
    if env:
        return DEMO if env == DEMO else Path(env)
    beside = Path(here or os.getcwd()) / STUDY_FILE
    return beside if beside.is_file() else DEMO


#: The invented demo campaign's study file, written by ``python -m levelwise.demo_campaign``.
DEMO_FILE = Path(__file__).parent / "data" / "demo_campaign.json"


def demo_study() -> Study:
    """The invented demo campaign as a ``levelwise`` Study, read from the shipped file."""
    return Study.load(DEMO_FILE)


def study_path(source=None) -> Path:
    """The study file a dashboard shows (see :func:`locate`); the shipped file for the demo."""
    where = locate(source)
    return DEMO_FILE if where == DEMO else Path(where)


def open_study(source=None) -> Study:
    """Read the study named by *source* (a path, ``"demo"`` or None for :func:`locate`).

    Raises
    ------
    LevelwiseError
        The file does not exist or is not a readable study.
    """
    path = study_path(source)
    if not path.is_file():
        raise LevelwiseError(f"The study file {str(path)!r} does not exist. Give a study JSON file or 'demo'.")
    return Study.load(path)


def is_invented(study: Study) -> bool:
    """True for invented data (the demo): every view then says so. Read from the study's title and notes."""
    return "invented" in (study.title + " " + study.notes).lower()


def title_of(study: Study) -> str:
    """The title a dashboard shows."""
    return study.title or "Study"


def goals_of(study: Study) -> dict:
    """``{response: {"goal": ..., "target": ...}}``: the goals the study records."""
    return {name: {"goal": spec.goal, "target": spec.target} for name, spec in study.responses.items()}


def shared_model(study: Study, *, read_only: bool, response: str | None = None):
    """The widgets' :class:`SharedModel`: a view over *study* (read-only for stakeholders)."""
    from levelwise.widgets import SharedModel

    return SharedModel.from_study(study, read_only=read_only, response=response)
