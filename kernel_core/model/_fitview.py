"""Small read-only views of a Fit shared by the analysis modules (effects, surface, reduce, optimize)."""

from __future__ import annotations

from .._errors import LevelwiseError


def categorical_names(fit) -> tuple:
    """Names of the fit's categorical factors (none for a fit without categorical support)."""
    return tuple(getattr(fit, "categories", None) or ())


def require_continuous(fit, what: str) -> None:
    """Refuse, with a clear message, an analysis that is defined for continuous factors only."""
    names = categorical_names(fit)
    if names:
        raise LevelwiseError(
            f"{what} works on continuous factors only; the model {fit.spec.formula!r} has categorical "
            f"factor(s) {list(names)}. Fit one model per level of those factors, or leave them out."
        )
