"""The study's tables (for fitting, for showing, the run sheet) and its fits: a part of :class:`Study`."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, LevelwiseWarning
from .._rich import with_units
from ._values import _is_categorical

#: Suffix of a column holding the achieved setting of a factor (the one header convention).
ACHIEVED = " (achieved)"


class StudyTables:
    """Tables and fits of a :class:`Study` (a part of the class, kept in its own module)."""

    # ----- tables ----------------------------------------------------------------------------
    def _frame(self, factor_block: str) -> pd.DataFrame:
        runs = list(self._runs.values())
        index = pd.Index([r["run"] for r in runs], dtype="int64")
        columns = {
            "run": np.array([r["run"] for r in runs], dtype=np.int64),
            "stage": pd.array([r["stage"] for r in runs], dtype=object),
            "block": np.array([r["block"] for r in runs], dtype=np.int64),
            **self._whole_plot_column(runs),
            "standard_order": np.array([r["standard_order"] for r in runs], dtype=np.int64),
            "role": pd.array([r["role"] for r in runs], dtype=object),
        }
        for factor in self._setting_factors():
            f, dtype = factor.name, (object if _is_categorical(factor) else float)
            missing = None if _is_categorical(factor) else np.nan
            if factor_block == "actual":
                columns[f] = np.array([r["achieved"].get(f, r["planned"][f]) for r in runs], dtype=dtype)
            else:
                columns[f] = np.array([r[factor_block].get(f, missing) for r in runs], dtype=dtype)
        for name in self._responses:
            columns[name] = np.array([r["responses"].get(name, np.nan) for r in runs], dtype=float)
        return pd.DataFrame(columns, index=index)

    @staticmethod
    def _whole_plot_column(runs) -> dict:
        """``{"whole_plot": ...}`` when some run has a whole plot (Int64; missing where a run has none), else {}."""
        if not any("whole_plot" in r for r in runs):
            return {}
        return {"whole_plot": pd.array([r.get("whole_plot") for r in runs], dtype="Int64")}

    @property
    def has_whole_plots(self) -> bool:
        """True when some run of the study belongs to a whole plot (a split-plot stage)."""
        return any("whole_plot" in r for r in self._runs.values())

    @property
    def hard_to_change(self) -> list[str]:
        """Names of the factors declared hard to change (reset only between whole plots)."""
        return [f.name for f in self._factors if getattr(f, "hard_to_change", False)]

    def whole_plots(self) -> pd.Series:
        """Each run's whole plot (index = run id; missing where a run was reset on its own), a new Series."""
        runs = list(self._runs.values())
        return pd.Series(pd.array([r.get("whole_plot") for r in runs], dtype="Int64"),
                         index=pd.Index([r["run"] for r in runs], dtype="int64"), name="whole_plot")

    def data(self, *, apply_exclusions: bool = True) -> pd.DataFrame:
        """The table for fitting: one row per run (index = run id), settings in natural units.

        Factor columns hold the achieved setting where one was recorded and the planned
        setting otherwise. With *apply_exclusions*, runs excluded from every response are
        dropped and a run excluded from one response has that response set to NaN.
        A new DataFrame every call: changing it does not change the study.
        """
        frame = self._frame("actual")
        if apply_exclusions:
            drop = []
            for item in self._exclusions:
                if item["response"] is None:
                    drop.append(item["run"])
                else:
                    frame.loc[item["run"], item["response"]] = np.nan
            frame = frame.drop(index=drop)
        return frame

    def table(self) -> pd.DataFrame:
        """Every run (nothing dropped), settings as run, every response, and an ``excluded`` column.

        ``excluded`` holds the reasons, e.g. ``"all: panel dropped"`` or ``"Impact: bubbles"``
        (``""`` when the run is used for every response). For showing the study; fit on :meth:`data`.
        """
        frame = self._frame("actual")
        notes = {run: [] for run in self._runs}
        for item in self._exclusions:
            scope = "all" if item["response"] is None else item["response"]
            notes[item["run"]].append(f"{scope}: {item['reason']}")
        frame["excluded"] = pd.array(["; ".join(notes[run]) for run in frame.index], dtype=object)
        return frame

    @property
    def response_names(self) -> list[str]:
        return list(self._responses)

    @property
    def revision(self) -> int:
        """A number that grows with every change (the length of the audit log): cheap change detection."""
        return len(self._audit)

    def copy(self):
        """An independent copy (same data and audit log)."""
        return type(self).from_json(self.to_json(), source="<copy>")

    def planned(self) -> pd.DataFrame:
        """Planned settings: the run sheet with one column per factor (index = run id)."""
        frame = self._frame("planned")
        book = ["run", "stage", "block", *(["whole_plot"] if "whole_plot" in frame else []), "standard_order", "role"]
        return frame[[*book, *self.setting_names]]

    def achieved(self) -> pd.DataFrame:
        """Achieved settings as recorded (NaN where none was), one column per factor (index = run id)."""
        return self._frame("achieved")[["run", *self.setting_names]]

    # ----- fitting ---------------------------------------------------------------------------
    def fit_table(self, response: str | None = None, *, apply_exclusions: bool = True) -> pd.DataFrame:
        """The table :meth:`fit` hands to :func:`levelwise.fit`: one row per run (index = run id).

        Factor columns hold the *planned* settings; a ``"<factor> (achieved)"`` column is added for each
        continuous factor with an achieved setting recorded (NaN where the run went as planned), so the
        fit uses the settings as run and reports :attr:`Fit.setting_deviations`. With *apply_exclusions*,
        runs excluded from every response are dropped, and with *response* those excluded from that
        response only as well (the shared model of the widgets fits every run and leaves the excluded
        ones out by the kernel's update instead, so that the fit keeps their reasons).

        A study with whole plots (a split-plot stage) adds a ``whole_plot`` column: each run's whole plot,
        and ``"run <id>"`` for a run of a stage without whole plots (it was reset on its own).

        A mixture study's table holds the settings as run (achieved where recorded, else planned) for the
        components and process factors: a blend is fitted as made, and it must still sum to the total.
        """
        if self.is_mixture:
            frame = self._frame("actual")
            if not apply_exclusions:
                return frame
            drop = {item["run"] for item in self._exclusions
                    if item["response"] is None or (response is not None and item["response"] == response)}
            return frame.drop(index=sorted(drop))
        frame = self._frame("planned")
        if "whole_plot" in frame:  # a run reset on its own is a whole plot of its own
            plots = frame["whole_plot"]
            frame["whole_plot"] = pd.array([f"run {run}" if pd.isna(p) else int(p)
                                            for run, p in zip(frame.index, plots)], dtype=object)
        achieved = self._frame("achieved")
        for factor in self._factors:
            if not _is_categorical(factor) and achieved[factor.name].notna().any():
                frame[factor.name + ACHIEVED] = achieved[factor.name]
            elif _is_categorical(factor):
                frame[factor.name] = self._frame("actual")[factor.name]
        if not apply_exclusions:
            return frame
        drop = {item["run"] for item in self._exclusions
                if item["response"] is None or (response is not None and item["response"] == response)}
        return frame.drop(index=sorted(drop))

    def fit(self, response: str, model: str | None = None, *, level: float = 0.95, whole_plot="auto",
            apply_exclusions: bool = True):
        """Fit *response* with its model (or *model*) on :meth:`fit_table`, coded by the study factors.

        The runs are named by run id; achieved settings are used where recorded (see
        :attr:`Fit.setting_deviations`). A count response (``family`` given to :meth:`add_response`) is fitted
        as a generalised linear model (:class:`~levelwise.model.GlmFit`) with its link and its trials or
        exposure response.

        Parameters
        ----------
        whole_plot : "auto" or None
            ``"auto"``: a study with whole plots (a split-plot stage) is fitted by REML with a random
            whole-plot intercept (:class:`~levelwise.model.MixedFit`); if that model cannot be estimated
            (too few whole plots), the least-squares fit is returned with the warning below. ``None``:
            least squares, ignoring the whole plots (with the warning below).
        apply_exclusions : bool, default True
            False fits every run (the caller leaves runs out with ``Fit.exclude``, as the widgets do).

        Warns
        -----
        LevelwiseWarning
            Runs (not excluded) with no value of *response* yet; the warning names their run ids.
            A study with whole plots analysed without them: the warning gives each standard error with
            and without the whole plots.
        """
        from .. import fit as fit_function

        response = self._response(response)
        if model is None:
            if response not in self._models:
                raise LevelwiseError(
                    f"The response {response!r} has no model yet; call set_model({response!r}, ...) or pass 'model'."
                )
            model = self._models[response]
        if whole_plot not in ("auto", None):
            raise LevelwiseError(f"The 'whole_plot' parameter of Study.fit must be 'auto' (fit the study's whole "
                                 f"plots) or None (ignore them). Got {whole_plot!r} instead.")
        table = self.fit_table(response, apply_exclusions=apply_exclusions)
        missing = table.index[table[response].isna()].tolist()
        if missing and len(missing) < len(table) and apply_exclusions:
            shown = missing if len(missing) <= 12 else [*missing[:12], "..."]
            warnings.warn(
                f"The response {response!r} has no value for run(s) {shown}; the fit leaves them out.",
                LevelwiseWarning, stacklevel=2,
            )
        model = self._checked_model(model)
        if self.is_mixture:
            return self._fit_mixture(table, response, model, level)
        options = dict(factors=list(self._factors), level=level)
        spec = self._responses[response]
        units = {f.name: f.units for f in self._factors} | {response: spec["units"]}
        if spec.get("family"):  # a count response: the generalised linear model (the whole plots are not used)
            table = table.drop(columns=["whole_plot"], errors="ignore")
            return with_units(fit_function(table, response, model, family=spec["family"], link=spec["link"],
                                           trials=spec.get("trials"), exposure=spec.get("exposure"), **options),
                              units)
        if whole_plot == "auto" and "whole_plot" in table:
            try:
                return with_units(fit_function(table, response, model, whole_plot="whole_plot", **options), units)
            except LevelwiseError:
                pass  # least squares below; its warning says why the split-plot fit could not be made
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            result = fit_function(table, response, model, **options)
        for item in caught:
            warnings.warn(item.message, item.category, stacklevel=2)
        return with_units(result, units)

    def fits(self, *, level: float = 0.95) -> dict:
        """A :class:`~levelwise.Fit` for every response that has a model."""
        return {response: self.fit(response, level=level) for response in self._responses if response in self._models}
