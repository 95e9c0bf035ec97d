"""The study: one experiment's complete record, its file, and moving it in and out of spreadsheets.

* :class:`Study` -- factors, design stages, runs named by run id (planned and achieved settings,
  responses), exclusions with reasons, models, notes and an audit log; the single source of truth
  that the widgets and dashboards view.
* The file (``format_version`` 4): :meth:`Study.save`, :meth:`Study.load`; older formats are migrated
  on load (:data:`MIGRATIONS`).
* Table import: :func:`import_table` (CSV, XLSX or DataFrame, merged by run id, every problem named
  by its spreadsheet row) and :func:`read_run_sheet`, which goes through it.
* Exports: the study's run sheet and the coefficient, ANOVA and prediction tables.
"""

from ._export import (
    anova_table,
    coefficient_table,
    export_anova,
    export_coefficients,
    export_predictions,
    export_run_sheet,
    export_table,
    prediction_table,
    study_run_sheet,
)
from ._format import FORMAT_VERSION, content_hash
from ._from_table import guess_columns, study_from_table
from ._import import guess_mapping, import_table
from ._migrations import MIGRATIONS, migrate_v0, migrate_v1, migrate_v2, migrate_v3
from ._run_sheet_reader import FilledRunSheet, read_run_sheet
from ._study import Study
from ._table_reader import ImportReport, Problem, parse_header, read_table, split_header
from ._tables import ACHIEVED
from ._values import GOALS, RESERVED_NAMES, AuditEntry, Response, Stage

__all__ = [
    "ACHIEVED",
    "FORMAT_VERSION",
    "GOALS",
    "MIGRATIONS",
    "RESERVED_NAMES",
    "AuditEntry",
    "FilledRunSheet",
    "ImportReport",
    "Problem",
    "Response",
    "Stage",
    "Study",
    "anova_table",
    "coefficient_table",
    "content_hash",
    "export_anova",
    "export_coefficients",
    "export_predictions",
    "export_run_sheet",
    "export_table",
    "guess_mapping",
    "import_table",
    "guess_columns",
    "study_from_table",
    "migrate_v0",
    "migrate_v1",
    "migrate_v2",
    "migrate_v3",
    "parse_header",
    "prediction_table",
    "read_run_sheet",
    "read_table",
    "split_header",
    "study_run_sheet",
]
