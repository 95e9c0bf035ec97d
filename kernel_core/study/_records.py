"""Recording values in a study: responses and achieved settings, one at a time or many at once (an import).

A part of :class:`Study`, kept in its own module. A recorded value is replaced only with ``overwrite=True``,
and the old value stays in the audit log.
"""

from __future__ import annotations

from .._errors import LevelwiseError
from ._count_responses import check_value
from ._values import _finite, _reason, _setting


class StudyRecords:
    """Recording values (a part of :class:`Study`)."""

    def record(self, run: int, response: str, value, *, overwrite: bool = False, reason: str | None = None) -> None:
        """Record a response value for a run.

        A value already recorded is replaced only with ``overwrite=True`` (and the old value is
        kept in the audit log). ``value=None`` with ``overwrite=True`` clears it.
        """
        reason = _reason(reason)
        record = self._run(run)
        response = self._response(response)
        old = self._set_value(record, "responses", response, value, overwrite, f"response {response!r}")
        self._log_value("record", record, response, value, old, reason)

    def record_achieved(self, run: int, factor: str, value, *, overwrite: bool = False,
                        reason: str | None = None) -> None:
        """Record the setting actually achieved for one factor of a run (natural units)."""
        reason = _reason(reason)
        record = self._run(run)
        factor = self._factor(factor).name
        old = self._set_value(record, "achieved", factor, value, overwrite, f"achieved setting of {factor!r}",
                              self._factor(factor))
        self._log_value("record_achieved", record, factor, value, old, reason)

    def _set_value(self, record, block, key, value, overwrite, label, factor=None):
        old = record[block].get(key)
        if value is None:
            if not overwrite:
                raise LevelwiseError(f"Clearing the {label} of run {record['run']} needs overwrite=True.")
        else:
            field = f"{label} of run {record['run']}"
            value = _finite(value, field) if factor is None else _setting(factor, value, field)
            if factor is None:  # a count, trials or exposure: whole numbers, passes within trials (named by run)
                check_value(self._responses, record, key, value)
        if old is not None and not overwrite and old != value:
            raise LevelwiseError(
                f"The {label} of run {record['run']} is already recorded as {old!r}; "
                f"pass overwrite=True to replace it with {value!r}."
            )
        if value is None:
            record[block].pop(key, None)
        else:
            record[block][key] = value
        return old

    def _record_many(self, changes, *, overwrite: bool, reason: str | None, source: str) -> None:
        """Record many values at once (an import): ``changes`` is a list of
        ``(kind, run, key, value)`` with kind ``"responses"`` or ``"achieved"``.

        The audit log gets one summary entry, plus one entry per replaced value (so that the
        old value stays on record). Every value is validated before any is stored.
        """
        reason = _reason(reason)
        checked = []
        for kind, run, key, value in changes:
            record = self._run(run)
            if kind == "responses":
                self._response(key)
            else:
                self._factor(key)
            field = f"{key} of run {record['run']}"
            value = _finite(value, field) if kind == "responses" else _setting(self._factor(key), value, field)
            old = record[kind].get(key)
            if old is not None and old != value and not overwrite:
                raise LevelwiseError(
                    f"The {key!r} of run {record['run']} is already recorded as {old!r}; pass overwrite=True."
                )
            checked.append((record, kind, key, value, old))
        pending = {}  # run -> its responses after the import, so passes are checked against the new trials
        for record, kind, key, value, _ in checked:
            if kind == "responses":
                pending.setdefault(record["run"], dict(record["responses"]))[key] = value
        for record, kind, key, value, _ in checked:
            if kind == "responses":
                check_value(self._responses, {"run": record["run"], "responses": pending[record["run"]]}, key, value)
        replaced = 0
        for record, kind, key, value, old in checked:
            record[kind][key] = value
            if old is not None and old != value:
                replaced += 1
                action = "record" if kind == "responses" else "record_achieved"
                self._log(action, f"run {record['run']}: {key} = {value!r} (was {old!r})", reason)
        keys = sorted({key for _, _, key, _ in changes})
        runs = sorted({record["run"] for record, *_ in checked})
        span = f"runs {runs[0]}..{runs[-1]}" if runs else "no runs"
        self._log("import", f"{len(checked)} value(s) of {keys} recorded for {len(runs)} run(s) ({span}) from "
                            f"{source}; {replaced} replaced a recorded value", reason)

    def _log_value(self, action, record, key, value, old, reason):
        was = "not recorded" if old is None else repr(old)
        self._log(action, f"run {record['run']}: {key} = {value!r} (was {was})", reason)
