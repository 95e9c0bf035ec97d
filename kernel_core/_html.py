"""Small HTML tables for rich notebook output (``_repr_html_``): pure Python, no notebook import.

``html_table(frame, ...)`` writes a plain, escaped ``<table>``: numbers to a few significant digits (never
an unrounded float), missing values blank, units in the column headers as ``name [units]`` (the convention of
the exported tables), an optional caption, and at most *max_rows* rows with a note of how many were left out.
Designs use it now; fits, studies and ANOVA tables can use the same helper.
"""

from __future__ import annotations

import html
import math
import numbers

#: Rows shown before the table is cut (the note says how many more there are).
MAX_ROWS = 40


def format_number(value, digits: int = 4) -> str:
    """*digits* significant digits, no exponent for everyday magnitudes; '' for NaN and None."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, numbers.Integral):
        return str(int(value))
    value = float(value)
    if math.isnan(value):
        return ""
    if math.isinf(value):
        return "∞" if value > 0 else "−∞"
    if value == 0 or 1e-3 <= abs(value) < 10 ** (digits + 3):
        text = f"{value:.{digits}g}"
        if "e" in text:  # e.g. 12345 at 4 digits: write it in full, rounded
            text = f"{round(value, -int(math.floor(math.log10(abs(value)))) + digits - 1):.0f}"
        return text
    return f"{value:.{max(digits - 1, 1)}e}"


def cell(value, digits: int = 4) -> str:
    if isinstance(value, numbers.Number):
        return format_number(value, digits)
    if value is None:
        return ""
    try:
        if value != value:  # NaN-like (pandas NA)
            return ""
    except (TypeError, ValueError):
        pass
    return html.escape(str(value))


def header(name, units: dict | None = None) -> str:
    unit = (units or {}).get(name, "")
    return html.escape(f"{name} [{unit}]" if unit else str(name))


def html_table(frame, *, digits: int = 4, units: dict | None = None, caption: str = "", index: bool = False,
               max_rows: int = MAX_ROWS, css: str = "lw-table") -> str:
    """An HTML table of a pandas DataFrame (see the module docstring)."""
    columns = list(frame.columns)
    shown = frame.iloc[:max_rows] if max_rows is not None else frame
    head = "".join(f"<th>{header(c, units)}</th>" for c in ([frame.index.name or ""] if index else []) + columns)
    rows = []
    for idx, values in zip(shown.index, shown.itertuples(index=False)):
        first = f"<th>{cell(idx, digits)}</th>" if index else ""
        rows.append("<tr>" + first + "".join(f"<td>{cell(v, digits)}</td>" for v in values) + "</tr>")
    more = len(frame) - len(shown)
    note = f'<p class="lw-table-note">… and {more} more rows.</p>' if more > 0 else ""
    cap = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    return (f'<table class="{html.escape(css)}">{cap}<thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(rows)}</tbody></table>{note}")


__all__ = ["MAX_ROWS", "cell", "format_number", "html_table"]
