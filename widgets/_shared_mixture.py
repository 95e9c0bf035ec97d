"""The mixture side of a :class:`~levelwise.widgets.SharedModel` (a study holding mixture components).

The settings of a mixture study hold every component's amount beside the process factors, and they always form a
valid blend: the amounts sum to the total and keep the bounds and constraints (the kernel refuses any other blend,
so a view never asks it). A slider moves one component along its Cox direction (:func:`levelwise.move_component`),
a click on the ternary slice sets three components at once (:func:`levelwise.model.ternary_blend`).
"""

from __future__ import annotations

import numpy as np

from levelwise import LevelwiseError, move_component
from levelwise._errors import describe


def default_blend(study) -> dict:
    """Where a mixture study's blend starts: the centroid of its region (``{}`` without components)."""
    mixture = getattr(study, "mixture", None)
    if mixture is None:
        return {}
    return {name: float(v) for name, v in zip(mixture.names, mixture.centroid())}


class MixtureMixin:
    """Blend settings of a mixture study (mixed into ``SharedModel``, which owns the ``settings`` trait)."""

    @property
    def mixture(self):
        """The study's :class:`levelwise.Mixture`, or None when the study has no components."""
        study = getattr(self, "study", None)
        return getattr(study, "mixture", None) if study is not None else None

    @property
    def is_mixture(self) -> bool:
        return self.mixture is not None

    @property
    def component_names(self) -> list:
        return list(self.mixture.names) if self.mixture is not None else []

    def blend(self) -> dict:
        """The current component amounts ``{component: amount}``."""
        return {name: self.settings[name] for name in self.component_names}

    def move_component(self, component: str, amount) -> None:
        """Set one component's amount; the others keep their relative proportions (the Cox direction), so the
        blend still sums to the total. The amount is clipped to the range the bounds and constraints allow."""
        if self.mixture is None:
            raise LevelwiseError("This study has no mixture components to move.")
        self.settings = move_component(self.mixture, dict(self.settings), component, amount)

    def set_blend(self, **amounts) -> None:
        """Set several components at once (the result must be a valid blend), e.g. from a ternary click."""
        self.settings = {**self.settings, **amounts}

    def _split_blend(self, value: dict) -> tuple[dict, dict]:
        """(process settings, component amounts) of a settings dict."""
        names = set(self.component_names)
        return ({k: v for k, v in value.items() if k not in names}, {k: v for k, v in value.items() if k in names})

    def _checked_blend(self, amounts: dict, current: dict) -> dict:
        """The component amounts of new settings, checked as a whole blend (sum, bounds, constraints)."""
        mixture = self.mixture
        if mixture is None or not amounts:
            return {}
        blend = {}
        for name in mixture.names:
            raw = amounts.get(name, current.get(name))
            if isinstance(raw, bool) or raw is None:
                raise LevelwiseError(f"The amount of component {name!r} must be a number. Got {describe(raw)}.")
            try:
                number = float(raw)
            except (TypeError, ValueError):
                raise LevelwiseError(f"The amount of component {name!r} must be a number. "
                                     f"Got {describe(raw)}.") from None
            blend[name] = number
        try:
            mixture.check_blends(np.array([[blend[n] for n in mixture.names]]), "blend", rows=["1"])
        except LevelwiseError as exc:
            raise LevelwiseError(str(exc).replace("The blend in row 1 ", "The blend ", 1)) from None
        return blend
