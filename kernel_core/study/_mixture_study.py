"""Mixture studies: a study whose settings include the amounts of mixture components (a part of :class:`Study`).

A study may hold components (:class:`~levelwise.Component`, with a total, bounds, optional linear constraints and
the choice of L-pseudo-components) alone or with ordinary process factors. The components' amounts are stored in
each run's ``planned`` (and ``achieved``) settings beside the process factors; the file keeps the components in the
optional ``data.mixture`` block (format 4). Every stage's blends are checked (sum to the total, bounds,
constraints) and a bad blend is refused naming the components. :meth:`Study.fit` fits the Scheffé models
(``scheffe_linear``, ``scheffe_quadratic``, ``scheffe_special_cubic``, ``scheffe_cubic``, a crossed
``"<preset> * <process model>"`` or a formula) through :func:`levelwise.fit_mixture`, whose engine is the one
prediction engine.
"""

from __future__ import annotations

from .._errors import LevelwiseError, describe
from ..design import Factor
from ..design._mixture_region import Component, Mixture, as_components
from ._persist import exclusion_code


class StudyMixture:
    """The mixture side of a :class:`Study` (a part of the class, kept in its own module)."""

    _mixture: Mixture | None = None
    _pseudo: bool = False

    def _init_mixture(self, components, total, pseudo, constraints) -> None:
        if components is None:
            if constraints:
                raise LevelwiseError("The 'constraints' of a study apply to mixture components; this study has none "
                                     "(pass components=[Component(...), ...]).")
            self._mixture, self._pseudo = None, False
            return
        if isinstance(components, Mixture):
            if constraints or (total is not None and float(total) != components.total):
                raise LevelwiseError("Give the 'total' and 'constraints' either in the Mixture or as parameters of "
                                     "the Study, not both.")
            mixture = components
        else:
            mixture = Mixture(as_components(components), 1.0 if total is None else total, constraints)
        if not isinstance(pseudo, bool):
            raise LevelwiseError(f"The 'pseudo' parameter of a study must be True or False. Got {describe(pseudo)}.")
        clash = sorted(set(mixture.names) & {f.name for f in self._factors})
        if clash:
            raise LevelwiseError(f"The names {clash} are used by both a component and a process factor; every "
                                 "component and factor needs its own name.")
        for f in self._factors:
            if getattr(f, "levels", ()):
                raise LevelwiseError(f"Process factor {f.name!r} is categorical; a mixture study takes continuous "
                                     "process factors.")
        self._mixture, self._pseudo = mixture, pseudo

    # ----- read-only views -------------------------------------------------------------------
    @property
    def mixture(self) -> Mixture | None:
        """The study's :class:`~levelwise.design.Mixture` (components, total, bounds, constraints), or None."""
        return self._mixture

    @property
    def is_mixture(self) -> bool:
        return self._mixture is not None

    @property
    def components(self) -> tuple[Component, ...]:
        return self._mixture.components if self._mixture is not None else ()

    @property
    def component_names(self) -> list[str]:
        return list(self._mixture.names) if self._mixture is not None else []

    @property
    def pseudo(self) -> bool:
        """True when the study's mixture models are fitted on L-pseudo-components."""
        return self._pseudo

    @property
    def setting_names(self) -> list[str]:
        """Every setting of a run: the components (in order), then the process factors."""
        return self.component_names + [f.name for f in self._factors]

    def _setting_factors(self) -> tuple:
        """Components (as continuous factors over their declared bounds), then the process factors."""
        return self._component_factors() + tuple(self._factors)

    def _component_factors(self) -> tuple:
        m = self._mixture
        if m is None:
            return ()
        return tuple(Factor(c.name, float(lo), float(hi), c.units)
                     for c, lo, hi in zip(m.components, m.declared_lows, m.declared_highs))

    def _component_factor(self, name):
        for f in self._component_factors():
            if f.name == name:
                return f
        return None

    # ----- checks ----------------------------------------------------------------------------
    def _check_stage_blends(self, settings: dict, n: int, where: str = "design") -> None:
        """Refuse a stage whose blends do not sum to the total or break a bound (naming the components)."""
        if self._mixture is None or n == 0:
            return
        import numpy as np

        amounts = np.column_stack([np.asarray(settings[name], dtype=float) for name in self._mixture.names])
        self._mixture.check_blends(amounts, where, rows=[f"{i + 1}" for i in range(n)])

    def _checked_model(self, model):
        """*model* once the parser has read it (a Scheffé preset, ``"<preset> * <process model>"`` or a formula over
        the components and process factors for a mixture study); raises a LevelwiseError naming the problem."""
        if self._mixture is None:
            from ._values import checked_model

            return checked_model(model, self.factor_names)
        from ..model._mixture_terms import model_exponents

        if not isinstance(model, str) or not model.strip():
            raise LevelwiseError(f"The 'model' must be a non-empty string. Got {describe(model)}.")
        model_exponents(model, self.component_names, self.factor_names)
        return model

    # ----- the file --------------------------------------------------------------------------
    def _mixture_entry(self) -> dict:
        """The file's optional ``data.mixture`` block (format 4)."""
        m = self._mixture
        return {
            "total": m.total,
            "components": [{"name": c.name, "low": c.low, "high": c.high, "units": c.units} for c in m.components],
            "constraints": list(m.constraint_text),
            "pseudo": self._pseudo,
        }

    @staticmethod
    def _mixture_arguments(entry: dict) -> dict:
        """Study keyword arguments from a ``data.mixture`` block (LevelwiseError on a bad component)."""
        components = [Component(c["name"], c["low"], c["high"], c["units"]) for c in entry["components"]]
        return {"components": components, "total": entry["total"], "pseudo": entry.get("pseudo", False),
                "constraints": entry.get("constraints") or None}

    # ----- fitting ---------------------------------------------------------------------------
    def _fit_mixture(self, table, response: str, model, level: float):
        from ..model._mixture import fit_mixture

        return fit_mixture(table, response, _model_argument(model), self._mixture, process=list(self._factors),
                           pseudo=self._pseudo, level=level)

    def _mixture_code(self, path: str) -> str:
        """Python that rebuilds the mixture fits of the study (see :meth:`Study.to_code`)."""
        m = self._mixture
        lines = [
            "# Rebuilds the analysis of this mixture study from its file.",
            "from levelwise import Component, Factor, Mixture, fit_mixture",
            "from levelwise.study import Study",
            "",
            f"study = Study.load({path!r})",
            "mixture = Mixture([",
        ]
        lines += [f"    Component({c.name!r}, {c.low!r}, {c.high!r}, units={c.units!r})," for c in m.components]
        lines.append(f"], total={m.total!r}, constraints={list(m.constraint_text)!r})")
        lines.append("process = [" + ", ".join(f"Factor({f.name!r}, {f.low!r}, {f.high!r}, units={f.units!r})"
                                               for f in self._factors) + "]")
        lines += ["# Settings as run: achieved where recorded, planned otherwise. Index = run id.",
                  "data = study.data(apply_exclusions=False)"]
        lines += exclusion_code(self._exclusions)
        lines.append("fits = {}")
        for response, model in self._models.items():
            lines.append(f"fits[{response!r}] = fit_mixture(data, {response!r}, {_model_argument(model)!r}, "
                         f"mixture, process=process, pseudo={self._pseudo!r})")
        return "\n".join(lines) + "\n"


def _model_argument(model: str):
    """The study's model text as :func:`fit_mixture` takes it ("a * b" of two presets becomes the pair)."""
    from ..model._mixture_terms import split_crossed

    return split_crossed(model)


__all__ = ["StudyMixture"]
