"""Where a dashboard's study comes from, and the shared model built on it.

A dashboard notebook finds its study this way (first match wins):

1. the environment variable ``LEVELWISE_STUDY`` (a path to a study JSON file, or ``demo``);
   ``levelwise serve STUDY`` and ``levelwise view DIR`` set it for the server and every kernel;
2. a file named ``study.json`` beside the notebook (the kernel's working folder), which is how
   a published folder is laid out, so ``voila present.ipynb`` run inside it also works;
3. the invented demo study.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from levelwise import LevelwiseError

#: Environment variable naming the study a dashboard shows.
STUDY_ENV = "LEVELWISE_STUDY"
#: Name of the study file beside a published notebook.
STUDY_FILE = "study.json"
#: The word that names the invented demo study wherever a study path is expected.
DEMO = "demo"


@dataclass(frozen=True, eq=False)
class StudySource:
    """What a dashboard needs of a study, whatever it was read from.

    Attributes
    ----------
    title : str
    factors : tuple of levelwise.Factor
    data : pandas.DataFrame
        One row per run, natural units, factor and response columns.
    responses : tuple of str
    units, models, goals : dict of str -> str / str / dict
    exclusions : dict
        ``{run id: reason}``.
    notes : str
    invented : bool
        True for the demo: every view says the data is invented.
    study : object or None
        The ``levelwise`` Study read from a file, when there is one.
    path : pathlib.Path or None
    """

    title: str
    factors: tuple
    data: pd.DataFrame
    responses: tuple
    units: dict = field(default_factory=dict)
    models: dict = field(default_factory=dict)
    goals: dict = field(default_factory=dict)
    exclusions: dict = field(default_factory=dict)
    notes: str = ""
    invented: bool = False
    study: object = None
    path: Path | None = None


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


def demo_source() -> StudySource:
    """The invented demo campaign (three stages, three responses)."""
    return from_study(demo_study(), invented=True, path=DEMO_FILE)


def demo_study():
    """The invented demo campaign as a ``levelwise`` Study, read from the shipped file."""
    from levelwise.study import Study

    return Study.load(DEMO_FILE)


def from_study(study, *, invented=False, path=None) -> StudySource:
    """A :class:`StudySource` over a ``levelwise.study.Study``."""
    responses = study.responses
    exclusions = study.exclusions
    return StudySource(
        title=study.title or "Study",
        factors=tuple(study.factors),
        data=study.data(apply_exclusions=False),
        responses=tuple(responses),
        units={name: spec.units for name, spec in responses.items()},
        models=study.models,
        goals={name: {"goal": spec.goal, "target": spec.target} for name, spec in responses.items()},
        exclusions={
            (int(row.run) if row.response is None else (int(row.run), row.response)): row.reason or ""
            for row in exclusions.itertuples()
        },
        notes=study.notes,
        invented=invented or "invented" in (study.title + " " + study.notes).lower(),
        study=study,
        path=path,
    )


def open_study(source=None) -> StudySource:
    """Read the study named by *source* (a path, ``"demo"`` or None for :func:`locate`).

    Raises
    ------
    LevelwiseError
        The file does not exist, or study files cannot be read by this installation.
    """
    where = locate(source)
    if where == DEMO:
        return demo_source()
    path = Path(where)
    if not path.is_file():
        raise LevelwiseError(f"The study file {str(path)!r} does not exist. Give a study JSON file or 'demo'.")
    from levelwise.study import Study

    return from_study(Study.load(path), path=path)


def shared_model(source: StudySource, *, read_only: bool, response: str | None = None):
    """The widgets' :class:`SharedModel` over *source* (read-only for stakeholders)."""
    from levelwise.widgets import SharedModel

    if source.study is not None:
        return SharedModel.from_study(source.study, read_only=read_only, response=response)
    return SharedModel(
        source.factors, source.data, response, responses=source.responses, models=source.models,
        units=source.units, exclusions=source.exclusions, read_only=read_only,
    )
