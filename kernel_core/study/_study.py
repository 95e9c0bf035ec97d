"""The :class:`Study`: everything recorded about one experiment, with an audit log of every change.

A study holds the factors, one or more design stages (for example a screen, its fold-over, then a
response-surface stage), the planned and achieved settings of every run (named by run id), the
responses with their units and goals, the exclusions with their reasons, one model per response and
free-text notes. Its tables and fits live in ``_tables``, its file in ``_persist``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ..design import Factor, as_factors
from . import _values
from ._mixture_study import StudyMixture
from ._persist import StudyFile
from ._records import StudyRecords
from ._responses import StudyResponses
from ._tables import StudyTables
from ._values import (
    AuditEntry,
    Response,
    Stage,
    _finite,
    _is_categorical,
    _name,
    _plain,
    _reason,
    _run_id,
    _setting,
    _text,
)


def _given(factors) -> bool:
    """False for an empty list of factors (a mixture study without process factors)."""
    return not (isinstance(factors, (list, tuple)) and len(factors) == 0)


#: The role values of format 1 (and of designs made before the rename), read as the current ones.
_OLD_ROLES = {"factorial": "corner", "center": "centre", "edge": "edge_midpoint"}


class Study(StudyResponses, StudyMixture, StudyRecords, StudyTables, StudyFile):
    """An experiment's complete record, with an audit log of every change.

    Parameters
    ----------
    factors : list of Factor
        The study factors (the process factors of a mixture study, which may have none); every stage's runs
        give a planned setting for each.
    components : list of Component or Mixture, optional
        Mixture components: each run's amounts sum to *total* within the bounds (and *constraints*).
    total : float, optional
        The mixture total (default 1; 100 for percent).
    pseudo : bool, default False
        Fit the mixture models on L-pseudo-components.
    constraints : str or list of str, optional
        Linear constraints over the component amounts, e.g. ``"Filler + Pigment <= 40"``.
    title : str, optional
    notes : str, optional
        Free text.

    Examples
    --------
    >>> from levelwise import Factor, full_factorial
    >>> s = Study([Factor("A", 0, 1), Factor("B", 10, 20, "min")], title="demo")
    >>> s.add_stage("screen", full_factorial(s.factors, randomize=False))
    [1, 2, 3, 4]
    >>> s.add_response("y", units="g", goal="maximize")
    >>> s.record(2, "y", 4.5)
    >>> s.data().loc[2, "y"]
    np.float64(4.5)
    """

    def __init__(self, factors=(), *, components=None, total: float | None = None, pseudo: bool = False,
                 constraints=None, title: str = "", notes: str = ""):
        self._factors = () if components is not None and not _given(factors) else as_factors(factors)
        self._init_mixture(components, total, pseudo, constraints)
        for f in self._factors:
            for level in getattr(f, "levels", ()):
                if isinstance(level, str):
                    _text(level, f"level of factor {f.name!r}", empty=False, kind="name")
                else:
                    _finite(level, f"level of factor {f.name!r}")
            _name(f.name, "factor name")
            _text(f.units, f"units of factor {f.name!r}", kind="units")
        self._title = _text(title, "title", kind="title")
        self._notes = _text(notes, "notes", kind="notes")
        self._stages: list[dict] = []
        self._runs: dict[int, dict] = {}
        self._responses: dict[str, dict] = {}
        self._exclusions: list[dict] = []
        self._models: dict[str, str] = {}
        self._audit: list[dict] = []
        self._file_revisions: dict[str, str] = {}  # file -> SHA-256 of its bytes at this study's load or last save
        blend = f" and mixture components {self.component_names}" if self.is_mixture else ""
        self._log("create", f"study created with factors {[f.name for f in self._factors]}{blend}")

    @classmethod
    def from_table(cls, source, *, factors, responses, run: str | None = None, achieved: dict | None = None,
                   plan=None, title: str = "", stage: str = "imported", sheet: str | None = None,
                   delimiter: str = ",", decimal: str = ".", counts: dict | None = None) -> Study:
        """A new study from one finished table (data frame, CSV or XLSX), in one call.

        Parameters
        ----------
        source : pandas.DataFrame, path or bytes
        factors : list of str or Factor
            Factor columns (``"Name [units]"`` headers; the units are taken from the header). A bare
            name gets the observed range as low..high (or the observed levels, for text); give a
            :class:`Factor` to set low/high/levels/units yourself.
        responses : list of str
            Response columns (units from the header).
        run : str, optional
            The run-id column (default: a column headed ``run``; else runs are numbered 1..n).
        achieved : dict, optional
            factor -> column holding the setting actually reached.
        plan : Design or DataFrame, optional
            The planned design. Rows are matched to it by run id (with ``run``) or else by their
            settings (nearest planned run within 0.1 coded units), so a plant run order that differs
            from the plan is accepted; settings that differ from the plan are recorded as achieved.
        counts : dict, optional
            Count responses: ``{response: {"family": "binomial", "trials": column, "link": "logit"}}`` or
            ``{response: {"family": "poisson", "exposure": column}}`` (see :meth:`add_response`); a trials or
            exposure column not among *responses* is added to them. Bad counts are problems of their row.

        Every problem is raised together in one :class:`ImportDataError` naming its spreadsheet row
        and column; columns not used are listed (``study.import_report.warnings``) and warned about.
        """
        from ._from_table import study_from_table

        study, report = study_from_table(source, factors=factors, responses=responses, run=run, achieved=achieved,
                                         plan=plan, title=title, stage=stage, sheet=sheet, delimiter=delimiter,
                                         decimal=decimal, counts=counts)
        study.import_report = report
        return study

    # ----- read-only views -------------------------------------------------------------------
    @property
    def factors(self) -> tuple[Factor, ...]:
        return self._factors

    @property
    def factor_names(self) -> list[str]:
        return [f.name for f in self._factors]

    @property
    def title(self) -> str:
        return self._title

    @property
    def notes(self) -> str:
        return self._notes

    @property
    def responses(self) -> dict[str, Response]:
        return {name: Response(name, **spec) for name, spec in self._responses.items()}

    @property
    def stages(self) -> tuple[Stage, ...]:
        return tuple(Stage(**stage) for stage in self._stages)

    @property
    def run_ids(self) -> list[int]:
        return list(self._runs)

    @property
    def models(self) -> dict[str, str]:
        return dict(self._models)

    @property
    def audit(self) -> tuple[AuditEntry, ...]:
        return tuple(AuditEntry(**entry) for entry in self._audit)

    @property
    def exclusions(self) -> pd.DataFrame:
        """One row per exclusion: ``run``, ``response`` (None: every response), ``reason``, ``when``."""
        items = self._exclusions
        return pd.DataFrame({
            "run": np.array([item["run"] for item in items], dtype=np.int64),
            "response": pd.Series([item["response"] for item in items], dtype=object),  # None: every response
            "reason": pd.Series([item["reason"] for item in items], dtype=object),
            "when": pd.Series([item["when"] for item in items], dtype=object),
        })

    def __len__(self) -> int:
        return len(self._runs)

    def _repr_html_(self) -> str:
        from .._rich import study_html

        return study_html(self)

    def __repr__(self) -> str:
        return (
            f"<Study {self._title!r}: {len(self._runs)} runs in {len(self._stages)} stage(s), "
            f"factors {self.factor_names}, responses {list(self._responses)}>"
        )

    # ----- internal helpers ------------------------------------------------------------------
    def _log(self, action: str, what: str, reason: str | None = None) -> None:
        self._audit.append({"when": _values.now(), "action": action, "what": what, "reason": reason})

    def _factor(self, name) -> Factor:
        for f in self._factors:
            if f.name == name:
                return f
        component = self._component_factor(name)
        if component is not None:  # a component's amount, checked like a continuous setting
            return component
        raise LevelwiseError(f"The 'factor' must be one of {self.setting_names}. Got {describe(name)} instead.")

    def _run(self, run) -> dict:
        run_id = _run_id(run)
        if run_id not in self._runs:
            known = f"{min(self._runs)}..{max(self._runs)}" if self._runs else "none yet"
            raise LevelwiseError(f"The 'run' {run_id} is not in the study (runs: {known}).")
        return self._runs[run_id]

    def _response(self, name) -> str:
        if name not in self._responses:
            raise LevelwiseError(
                f"The 'response' must be one of {list(self._responses)} (add it with add_response). "
                f"Got {describe(name)} instead."
            )
        return name

    # ----- changes ---------------------------------------------------------------------------
    def set_notes(self, text: str, *, reason: str | None = None) -> None:
        """Replace the free-text notes."""
        reason = _reason(reason)
        self._notes = _text(text, "notes", kind="notes")
        self._log("notes", f"notes set ({len(text)} characters)", reason)

    def set_title(self, title: str) -> None:
        """Replace the title."""
        self._title = _text(title, "title", kind="title")
        self._log("title", f"title set to {title!r}")

    def add_stage(self, name: str, design, *, description: str = "", reason: str | None = None,
                  renumber: bool = False) -> list[int]:
        """Append a design stage and return its run ids, in run order.

        Parameters
        ----------
        name : str
            Unique stage name, e.g. ``"screen"``, ``"fold-over"``, ``"surface"``.
        design : Design or pandas.DataFrame
            A :class:`~levelwise.Design` or a table with one column per study factor (natural
            units) and optionally ``run``, ``block``, ``standard_order``, ``role`` and ``whole_plot``
            (a split-plot stage: each run's whole plot; numbers that repeat the study's whole plots are
            continued after them, so whole plots are unique within the study).
        renumber : bool, default False
            Number the stage's runs after the study's, whatever run ids the design carries.

        The design's own run ids (its ``run`` column) are kept when none of them is already in the
        study: a fold-over or another augmentation names its new runs by ids that continue after
        the original ones. A design whose run ids repeat ones in the study is refused (add only the
        new runs; pass ``renumber=True`` for an independent design numbered from 1). A table
        without a ``run`` column gets ids after the study's.
        """
        name = _text(name, "stage name", empty=False, kind="name")
        reason = _reason(reason)
        description = _text(description, "description", kind="notes")
        if any(stage["name"] == name for stage in self._stages):
            raise LevelwiseError(f"The 'stage name' {name!r} is already used; stage names must be unique.")
        table = getattr(design, "table", design)
        if not isinstance(table, pd.DataFrame):
            raise LevelwiseError(
                f"The 'design' must be a Design or a DataFrame of factor settings. Got {describe(design)} instead."
            )
        missing = [n for n in self.setting_names if n not in table.columns]
        if missing:
            what = "factor(s) or component(s)" if self.is_mixture else "factor(s)"
            raise LevelwiseError(
                f"The 'design' has no column for {what} {missing}; it must give every study "
                f"{'setting' if self.is_mixture else 'factor'} {self.setting_names}."
            )
        n = len(table)
        settings = {}
        for f in self._setting_factors():
            if _is_categorical(f):
                settings[f.name] = [
                    _setting(f, value, f"planned setting of factor {f.name!r} in row {row + 1} of the design")
                    for row, value in enumerate(table[f.name].tolist())
                ]
                continue
            values = pd.to_numeric(table[f.name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
            bad = ~np.isfinite(values)
            if bad.any():
                row = int(np.flatnonzero(bad)[0])
                raw = table[f.name].iloc[row]
                raw = raw.item() if isinstance(raw, np.generic) else raw
                raise LevelwiseError(
                    f"The planned setting of factor {f.name!r} in row {row + 1} of the design must be a finite "
                    f"number. Got {describe(raw)} instead."
                )
            settings[f.name] = values
        self._check_stage_blends(settings, n)
        block = self._int_column(table, "block", 1, n)
        order_column = "standard_order" if "standard_order" in table else "std_order"
        standard_order = self._int_column(table, order_column, None, n)
        role_column = "role" if "role" in table else ("point_type" if "point_type" in table else None)
        roles = [""] * n if role_column is None else [
            _OLD_ROLES.get(text, text) for text in (_text(str(v), "role") for v in table[role_column])
        ]
        plots, plot_note = self._stage_whole_plots(table, n, settings)
        ids = self._stage_ids(table, n, renumber)
        names = self.setting_names
        for i, run_id in enumerate(ids):
            self._runs[run_id] = {
                "run": run_id,
                "stage": name,
                "block": block[i],
                "standard_order": standard_order[i] if standard_order is not None else i + 1,
                "role": roles[i],
                "planned": {f: _plain(settings[f][i]) for f in names},
                "achieved": {},
                "responses": {},
            }
            if plots is not None:
                self._runs[run_id]["whole_plot"] = plots[i]
        self._stages.append({"name": name, "description": description, "created": _values.now()})
        span = f"runs {min(ids)}..{max(ids)}" if n else "no runs"
        self._log("add_stage", f"stage {name!r} added with {n} run(s) ({span}){plot_note}", reason)
        return ids

    def _stage_whole_plots(self, table, n: int, settings) -> tuple[list[int] | None, str]:
        """Whole plots of a new stage (its ``whole_plot`` column), continued after the study's when they repeat.

        Every run needs a whole plot (an integer >= 1), and a hard-to-change factor must be planned at one
        setting within each whole plot. Returns the whole plots (None without the column) and a note for the log.
        """
        if "whole_plot" not in table or n == 0:
            return None, ""
        values = pd.to_numeric(table["whole_plot"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        bad = ~np.isfinite(values) | (values != np.round(values)) | (values < 1) | (values > 2**53 - 1)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raw = table["whole_plot"].iloc[row]
            raw = raw.item() if isinstance(raw, np.generic) else raw
            raise LevelwiseError(
                f"The 'whole_plot' of row {row + 1} of the design must be a whole-plot number (an integer >= 1; "
                f"every run of a split-plot stage needs one). Got {describe(raw)} instead."
            )
        plots = values.astype(np.int64)
        for f in self._factors:
            if not getattr(f, "hard_to_change", False):
                continue
            column = pd.Series(list(settings[f.name]))
            changes = column.groupby(plots).nunique()
            if (changes > 1).any():
                plot = int(changes.index[(changes > 1).to_numpy()][0])
                raise LevelwiseError(
                    f"The hard-to-change factor {f.name!r} is planned at more than one setting in whole plot "
                    f"{plot} of the design; it must stay at one setting within each whole plot."
                )
        used = {run["whole_plot"] for run in self._runs.values() if "whole_plot" in run}
        note = f", whole plots {int(plots.min())}..{int(plots.max())}"
        if used & set(plots.tolist()):
            shift = max(used) + 1 - int(plots.min())
            plots = plots + shift
            note = (f", whole plots {int(plots.min())}..{int(plots.max())} (the design's numbers continued after "
                    "the study's)")
        return [int(p) for p in plots], note

    def _stage_ids(self, table, n: int, renumber: bool) -> list[int]:
        """Run ids of a new stage: the design's own when they are new to the study, else refused or renumbered."""
        start = max(self._runs, default=0) + 1
        if renumber or "run" not in table or n == 0:
            return list(range(start, start + n))
        ids = [_run_id(value.item() if isinstance(value, np.generic) else value, f"run of row {row + 1} of the design")
               for row, value in enumerate(table["run"].tolist())]
        if len(set(ids)) != len(ids):
            twice = sorted({i for i in ids if ids.count(i) > 1})
            raise LevelwiseError(f"The 'design' names run id(s) {twice[:10]} more than once; run ids must be unique.")
        repeated = sorted(set(ids) & set(self._runs))
        if repeated:
            shown = repeated if len(repeated) <= 10 else [*repeated[:10], "..."]
            raise LevelwiseError(
                f"The 'design' repeats run id(s) {shown} already in the study. If these are runs already made, add "
                "only the new runs (fold_over returns only the new runs, numbered after the original ones). If it "
                "is an independent design numbered from 1, pass renumber=True to number its runs after the "
                f"study's (from {start})."
            )
        return ids

    @staticmethod
    def _int_column(table, column, default, n):
        if column not in table:
            return [default] * n if default is not None else None
        values = pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        bad = ~np.isfinite(values) | (values != np.round(values)) | (np.abs(values) > 2**53 - 1)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise LevelwiseError(
                f"The '{column}' of row {row + 1} of the design must be an integer. "
                f"Got {describe(table[column].iloc[row])} instead."
            )
        return [int(v) for v in values]

    def exclude(self, run: int, reason: str, response: str | None = None) -> None:
        """Exclude a run from fitting (every response, or only *response*); a reason is required."""
        record = self._run(run)
        reason = _reason(reason, required=True)
        if response is not None:
            response = self._response(response)
        for item in self._exclusions:
            if item["run"] == record["run"] and item["response"] in (None, response):
                scope = "every response" if item["response"] is None else repr(item["response"])
                raise LevelwiseError(f"The 'run' {record['run']} is already excluded from {scope}.")
        self._exclusions.append({"run": record["run"], "response": response, "reason": reason, "when": _values.now()})
        scope = "every response" if response is None else repr(response)
        self._log("exclude", f"run {record['run']} excluded from {scope}", reason)

    def include(self, run: int, response: str | None = None, *, reason: str | None = None) -> None:
        """Undo the exclusions of a run (all of them, or the one for *response*)."""
        reason = _reason(reason)
        record = self._run(run)
        keep, dropped = [], []
        for item in self._exclusions:
            match = item["run"] == record["run"] and (response is None or item["response"] == response)
            (dropped if match else keep).append(item)
        if not dropped:
            raise LevelwiseError(f"The 'run' {record['run']} has no exclusion to undo"
                                 + (f" for response {response!r}." if response is not None else "."))
        self._exclusions = keep
        scopes = ", ".join("every response" if d["response"] is None else repr(d["response"]) for d in dropped)
        self._log("include", f"run {record['run']} included again in {scopes}", reason)

    def set_model(self, response: str, model: str, *, reason: str | None = None) -> None:
        """Set the model (a Wilkinson formula or preset over the factor names) for a response."""
        reason = _reason(reason)
        response = self._response(response)
        self._checked_model(model)  # raises LevelwiseError naming the bad term
        _text(model, "model")
        old = self._models.get(response)
        self._models[response] = model
        self._log("set_model", f"model of {response!r} set to {model!r} (was {old!r})", reason)

