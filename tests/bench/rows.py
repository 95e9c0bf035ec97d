"""One row of the results table, as written to ``bench-results.json``."""

from __future__ import annotations

import math

#: How a row's ratio is read against its goal.
#: speedup  - reference / ours, goal is a minimum (">= 50x");
#: overhead - ours / reference, goal is a maximum ("<= 1.5x");
#: absolute - our own figure against a stated maximum (seconds, ms or MB), no ratio.
KINDS = ("speedup", "overhead", "absolute")


def _finite(value):
    return value is not None and isinstance(value, (int, float)) and math.isfinite(value)


def make_row(case_id: str, case: str, *, kind: str, goal: str, goal_value: float | None,
             ours=None, reference=None, unit: str = "s", status: str = "ok", note: str = "",
             ours_repeats: int = 0, reference_repeats: int = 0, **extra) -> dict:
    """A result row; *ratio* and *met* are derived here, never typed in."""
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}, got {kind!r}")
    ratio = None
    met = None
    if status.startswith("partial") and kind == "speedup":
        reference = None  # a partial row has our figure only
    if status == "ok":
        if kind == "speedup" and _finite(ours) and _finite(reference) and ours > 0:
            ratio = reference / ours
            met = ratio >= goal_value if goal_value is not None else None
        elif kind == "overhead" and _finite(ours) and _finite(reference) and reference > 0:
            ratio = ours / reference
            met = ratio <= goal_value if goal_value is not None else None
        elif kind == "absolute" and _finite(ours):
            met = ours <= goal_value if goal_value is not None else None
    return {
        "id": case_id,
        "case": case,
        "kind": kind,
        "unit": unit,
        "ours": ours,
        "reference": reference,
        "ratio": ratio,
        "goal": goal,
        "goal_value": goal_value,
        "met": met,
        "ours_repeats": ours_repeats,
        "reference_repeats": reference_repeats,
        "status": status,
        "note": note,
        **extra,
    }


def unavailable(case_id: str, case: str, *, kind: str, goal: str, goal_value, status: str, unit: str = "s",
                note: str = "") -> dict:
    """A row for a case that could not be measured, saying why (feature missing, skipped, error)."""
    return make_row(case_id, case, kind=kind, goal=goal, goal_value=goal_value, unit=unit, status=status, note=note)
