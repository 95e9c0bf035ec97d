"""A new study straight from a finished table (a plant CSV/XLSX or a data frame): :meth:`Study.from_table`.

The factor columns give the planned settings (or, with ``plan=``, are matched to a planned design by
run id or by settings, in whatever order the plant ran them); the response and achieved-setting
columns then go through :func:`~levelwise.study.import_table`, the one validator of every import.
Every problem is reported by spreadsheet row and column before a study is returned; every column
the import did not use is listed in the report.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import ImportDataError, LevelwiseError, describe
from ..design import Factor
from ._table_reader import Problem, _blank, _error, _number, parse_header, read_table, split_header

#: Settings within this many coded units of a planned run match it (the rest is recorded as achieved).
MATCH_TOLERANCE = 0.1


def _frame(source, sheet, delimiter) -> tuple[pd.DataFrame, str]:
    if isinstance(source, pd.DataFrame) and "header_row" in source.attrs:  # from read_table: rows kept
        frame = source.astype(object)
        frame.attrs.update(source.attrs)
        return frame, str(source.attrs.get("source_name", "<table>"))
    if isinstance(source, pd.DataFrame):
        frame = source.astype(object)
        frame.columns = [str(c) for c in frame.columns]
        frame.index = pd.RangeIndex(2, 2 + len(frame))
        frame.attrs["header_row"] = 1
        return frame, "<DataFrame>"
    frame = read_table(source, sheet=sheet, delimiter=delimiter)
    name = str(source) if isinstance(source, (str,)) or hasattr(source, "__fspath__") else "<table>"
    return frame, name


def _column(frame, name, what) -> str:
    """The column whose header (units stripped) is *name*; a problem when there is none."""
    if name in frame.columns:
        return name
    for column in frame.columns:
        if split_header(column)[0] == name and not parse_header(column)[2]:
            return column
    raise ImportDataError(f"The {what} {name!r} names no column of the table; the columns are {list(frame.columns)}.")


def _factor_specs(frame, factors, decimal, problems) -> list[tuple[Factor, str]]:
    """(Factor, column) per factor; a bare column name gets the observed range (or levels) and its header units."""
    if isinstance(factors, (str, Factor)) or not hasattr(factors, "__iter__"):
        raise LevelwiseError(f"The 'factors' must be a list of column names or Factors. Got {describe(factors)}.")
    out = []
    for spec in factors:
        if isinstance(spec, Factor):
            out.append((spec, _column(frame, spec.name, "factor")))
            continue
        if not isinstance(spec, str):
            raise LevelwiseError(f"Each of the 'factors' must be a column name or a Factor. Got {describe(spec)}.")
        column = _column(frame, spec, "factor")
        name, units = split_header(column)
        cells = [c for c in frame[column] if not _blank(c)]
        numbers = [_number(c, decimal) for c in cells]
        if cells and sum(bad is None for _, bad in numbers) * 2 > len(cells):
            # Mostly numbers: a continuous factor (each text cell is a problem, named below).
            values = [v for v, bad in numbers if bad is None]
            low, high = min(values), max(values)
            if low == high:
                problems.append(Problem(None, column, f"factor {name!r} has one setting only ({low!r}); a factor "
                                                      "needs two settings at least"))
                continue
            out.append((Factor(name, low, high, units=units or ""), column))
        else:
            levels = list(dict.fromkeys(str(c).strip() for c in cells))
            if len(levels) < 2:
                problems.append(Problem(None, column, f"factor {name!r} needs two settings at least; found "
                                                      f"{levels!r}"))
                continue
            out.append((Factor(name, units=units or "", levels=levels), column))
    return out


def _cell(factor, cell, decimal):
    if factor.levels:
        text = str(cell).strip()
        for level in factor.levels:
            if str(level) == text:
                return level, None
        return None, f"{describe(cell)} is not one of the levels {list(factor.levels)!r} of {factor.name!r}"
    return _number(cell, decimal)


def _match(settings: pd.DataFrame, plan: pd.DataFrame, factors, run_ids, problems, run_col) -> dict:
    """File row -> planned run id: by run id when the file has one, else by the nearest unused planned run."""
    matched = {}
    if run_ids is not None:
        for row, run_id in run_ids.items():
            if run_id not in plan.index:
                problems.append(Problem(row, run_col, f"run {run_id} is not in the planned design "
                                                      f"(runs {min(plan.index)}..{max(plan.index)})"))
            else:
                matched[row] = run_id
        return matched
    free = list(plan.index)
    for row in settings.index:
        best, best_gap = None, np.inf
        for run_id in free:
            gap = 0.0
            for f in factors:
                a, b = settings.at[row, f.name], plan.at[run_id, f.name]
                if f.levels:
                    gap = max(gap, 0.0 if a == b else np.inf)
                else:
                    gap = max(gap, abs(f.to_coded(float(a)) - f.to_coded(float(b))))
            if gap < best_gap:
                best, best_gap = run_id, gap
        if best is None or best_gap > MATCH_TOLERANCE:
            shown = {f.name: settings.at[row, f.name] for f in factors}
            problems.append(Problem(row, None, f"the settings {shown} match no planned run still unmatched "
                                               f"(within {MATCH_TOLERANCE} coded units)"))
            continue
        matched[row] = best
        free.remove(best)
    return matched


def _count_columns(frame, counts, responses) -> dict:
    """{response: {"family", "trials"/"exposure", "link"}} of the declared count responses, the trials or
    exposure columns added to *responses* (a list, changed in place) when not listed."""
    if counts is None:
        return {}
    if not isinstance(counts, dict):
        raise LevelwiseError("The 'counts' must be a dict {response: {'family': 'binomial', 'trials': column} or "
                             f"{{'family': 'poisson', 'exposure': column}}}}. Got {describe(counts)} instead.")
    out = {}
    for name, spec in counts.items():
        if isinstance(spec, str):
            spec = {"family": spec}
        if not isinstance(spec, dict) or set(spec) - {"family", "trials", "exposure", "link"}:
            raise LevelwiseError(f"The 'counts' entry of {name!r} must be a dict with 'family' and optionally "
                                 f"'trials', 'exposure', 'link'. Got {describe(spec)} instead.")
        if name not in responses:
            raise LevelwiseError(f"The 'counts' entry {name!r} must be one of the responses {list(responses)}.")
        out[name] = dict(spec)
        for role in ("trials", "exposure"):
            other = spec.get(role)
            if isinstance(other, str) and other not in responses:
                _column(frame, other, f"{role} column")
                responses.append(other)
    return out


def _count_problems(frame, counts, columns, decimal, problems) -> None:
    """Every bad count named by spreadsheet row and column: negative, not whole, passes above trials, zero
    trials, exposure not positive."""
    for name, spec in counts.items():
        column = columns[name]
        partner = spec.get("trials") or spec.get("exposure")
        other = columns.get(partner)
        for row, cell in frame[column].items():
            value, bad = _number(cell, decimal)
            limit = _number(frame.at[row, other], decimal)[0] if other is not None else None
            if other is not None and limit is not None and spec.get("exposure") and not limit > 0:
                problems.append(Problem(row, other, f"the exposure of {name!r} must be positive; got {limit:g}"))
            if spec.get("trials") and limit is not None and (limit < 1 or limit != round(limit)):
                problems.append(Problem(row, other, f"the number of trials of {name!r} must be a whole number >= 1; "
                                                    f"got {limit:g}"))
                continue
            if bad or value is None:
                continue
            if value < 0 or value != round(value):
                problems.append(Problem(row, column, f"a count must be a whole number >= 0; got {value:g}"))
            elif limit is not None and spec.get("trials") and value > limit:
                problems.append(Problem(row, column, f"{value:g} passes is more than the {limit:g} trials in "
                                                     f"column {other!r}"))


def study_from_table(source, *, factors, responses, run: str | None = None, achieved: dict | None = None,
                     plan=None, title: str = "", stage: str = "imported", sheet: str | None = None,
                     delimiter: str = ",", decimal: str = ".", counts: dict | None = None):
    """A new :class:`Study` and its :class:`ImportReport` from one table; see :meth:`Study.from_table`."""
    from ._import import import_table
    from ._study import Study

    frame, name = _frame(source, sheet, delimiter)
    header_row = frame.attrs.get("header_row", 1)
    problems: list[Problem] = []
    specs = _factor_specs(frame, factors, decimal, problems)
    if isinstance(responses, str) or not hasattr(responses, "__iter__"):
        raise LevelwiseError(f"The 'responses' must be a list of column names. Got {describe(responses)}.")
    responses = list(responses)
    counts = _count_columns(frame, counts, responses)
    response_cols = [_column(frame, r, "response") for r in responses]
    achieved = dict(achieved or {})
    achieved_cols = {f: (c if c in frame.columns else _column(frame, c, "achieved-setting column"))
                     for f, c in achieved.items()}
    run_col = None
    if run is not None:
        run_col = _column(frame, run, "run-id column")
    else:
        run_col = next((c for c in frame.columns if split_header(c)[0].lower() == "run"), None)

    # Settings of every row: every bad cell is a problem, named by row and column.
    factor_objs = [f for f, _ in specs]
    settings = pd.DataFrame(index=frame.index, columns=[f.name for f in factor_objs], dtype=object)
    for f, column in specs:
        for row, cell in frame[column].items():
            if _blank(cell):
                problems.append(Problem(row, column, f"factor missing: no setting for {f.name!r}"))
                continue
            value, bad = _cell(f, cell, decimal)
            if bad:
                problems.append(Problem(row, column, bad))
            else:
                settings.at[row, f.name] = value
    run_ids = None
    if run_col is not None:
        run_ids, seen = {}, {}
        for row, cell in frame[run_col].items():
            value, bad = _number(cell, decimal)
            if bad or value is None or value < 1 or not float(value).is_integer():
                problems.append(Problem(row, run_col, f"the run id must be an integer >= 1; got {describe(cell)}"))
                continue
            if int(value) in seen:
                problems.append(Problem(row, run_col, f"duplicate run: run {int(value)} is also in row "
                                                      f"{seen[int(value)]}"))
                continue
            seen[int(value)] = row
            run_ids[row] = int(value)
    for column in response_cols:  # checked here too, so one report holds every problem
        for row, cell in frame[column].items():
            if _number(cell, decimal)[1]:
                problems.append(Problem(row, column, f"a response must be a number; got {describe(cell)}"))
    _count_problems(frame, counts, dict(zip(responses, response_cols)), decimal, problems)

    plan_table = None
    if plan is not None and not problems:
        plan_table = getattr(plan, "table", plan)
        if not isinstance(plan_table, pd.DataFrame):
            raise LevelwiseError(f"The 'plan' must be a Design or a DataFrame. Got {describe(plan)} instead.")
        plan_table = plan_table.copy()
        plan_table.columns = [split_header(str(c))[0] for c in plan_table.columns]
        for f in factor_objs:
            if f.name not in plan_table:
                raise ImportDataError(f"The 'plan' has no column for factor {f.name!r}; its columns are "
                                      f"{list(plan_table.columns)}.")
            if not f.levels:
                plan_table[f.name] = pd.to_numeric(plan_table[f.name], errors="raise").astype(float)
        if "run" in plan_table:
            plan_table["run"] = pd.to_numeric(plan_table["run"], errors="raise").astype(int)
        if "run" not in plan_table:
            plan_table["run"] = range(1, len(plan_table) + 1)
        plan_table = plan_table.set_index("run", drop=False)
        matched = _match(settings, plan_table, factor_objs, run_ids, problems, run_col)
    if problems:
        raise _error(name, problems)

    study = Study(factor_objs, title=title)
    if plan_table is not None:
        study.add_stage(stage, plan_table.reset_index(drop=True), reason=f"planned design given with {name}")
        ids = matched
    else:
        table = settings.copy()
        for f in factor_objs:
            if not f.levels:
                table[f.name] = table[f.name].astype(float)
        plots = next((c for c in frame.columns if split_header(str(c))[0].lower() == "whole_plot"), None)
        if plots is not None:  # a split-plot table: each run's whole plot is kept (Study.add_stage checks it)
            table["whole_plot"] = frame.loc[table.index, plots]
        if run_ids is not None:
            table.insert(0, "run", [run_ids[row] for row in table.index])
            table = table.sort_values("run")
        added = study.add_stage(stage, table.reset_index(drop=True), reason=f"imported from {name}")
        ids = dict(zip(table.index, added))

    # Responses and achieved settings: through the one validator, by run id.
    body = pd.DataFrame({"run": [ids[row] for row in frame.index]}, index=frame.index, dtype=object)
    mapping = {"run": "run", "factors": {}, "achieved": {}, "responses": {}}
    keys = {split_header(column)[0]: column for column in response_cols}
    named = dict(zip(responses, keys))  # the name given -> the response's name in the study
    for key, column in sorted(keys.items(), key=lambda item: item[0] in {named[n] for n in counts}):
        spec = next(({**c, **{r: named.get(c[r], c[r]) for r in ("trials", "exposure") if c.get(r)}}
                     for n, c in counts.items() if named[n] == key), {})
        study.add_response(key, units=split_header(column)[1] or "", **spec)  # counts after their trials
        body[column] = frame[column]
        mapping["responses"][key] = column
    for factor, column in achieved_cols.items():
        body[column] = frame[column]
        mapping["achieved"][factor] = column
    if plan_table is not None:  # the file's own settings, where they differ from the plan, were the ones run
        for f, _col in specs:
            if f.name in achieved_cols:
                continue
            marked = f"{f.name} (achieved)"
            differs = [row for row in frame.index
                       if settings.at[row, f.name] != plan_table.at[ids[row], f.name]]
            if differs:
                body[marked] = [settings.at[row, f.name] if row in differs else None for row in frame.index]
                mapping["achieved"][f.name] = marked
    used = {*(c for _, c in specs), *response_cols, *achieved_cols.values(), run_col}
    for column in frame.columns:  # listed by import_table as not used; never dropped silently
        if column not in used:
            body[column] = frame[column]
    body.attrs.update(header_row=header_row, spreadsheet_rows=True, source_name=name)
    report = import_table(study, body, mapping=mapping, reason=f"imported from {name}")
    return study, report


def guess_columns(frame: pd.DataFrame, *, max_levels: int = 5) -> dict:
    """A first guess of which columns of a new table are what, for the user to confirm.

    ``run``: a column headed ``run``; ``achieved``: ``"<factor> (achieved)"`` columns; ``factors``:
    columns with at most *max_levels* distinct settings (a designed factor has few); ``responses``:
    the other numeric columns; ``unused``: the rest (text notes, blank columns).
    """
    out = {"run": None, "factors": [], "responses": [], "achieved": {}, "unused": []}
    for column in frame.columns:
        name, _, achieved = parse_header(str(column))
        cells = [c for c in frame[column] if not _blank(c)]
        numeric = bool(cells) and all(_number(c)[1] is None for c in cells)
        distinct = len({str(c).strip() for c in cells})
        if name.lower() == "run" and out["run"] is None and numeric:
            out["run"] = column
        elif achieved:
            out["achieved"][name] = column
        elif name.lower() in {"block", "standard_order", "std_order", "role", "stage", "excluded", "whole_plot"}:
            out["unused"].append(column)
        elif 2 <= distinct <= max_levels and (numeric or distinct < len(cells)):
            out["factors"].append(column)
        elif numeric:
            out["responses"].append(column)
        else:
            out["unused"].append(column)
    out["achieved"] = {k: v for k, v in out["achieved"].items()
                       if any(split_header(f)[0] == k for f in out["factors"])}
    return out
