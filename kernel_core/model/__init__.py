"""Models: formulas, least-squares fits, the prediction engine and the analyses of a fit.

Private modules by role (import the names from here or from ``levelwise``):

- ``_formula`` Wilkinson formulas and presets -> :class:`ModelSpec` (an exponent matrix)
- ``_inputs`` checks of the fit's input (numeric columns, levels, achieved settings, run ids)
- ``_coding`` natural <-> coded, sum-to-zero contrasts, categorical expansion
- ``_numerics`` pivoted QR, rank and aliases, extended-precision re-solve
- ``_fit`` :func:`fit`; ``_result`` the :class:`Fit` result; ``_exclusions`` rank-one exclude/include
- ``_engine`` the one :class:`PredictionEngine`; ``_settings`` its settings check; ``_polynomials`` exact
  trace/slice polynomials;
  ``_slices`` :func:`slice_grid`
- ``_mixed`` split-plot fits by REML (:class:`MixedFit`); ``_glm`` binomial and Poisson fits
  (:class:`GlmFit`); ``_families`` what they share (engine arguments, exclusions by refitting)
- ``_anova``, ``_diagnostics``, ``_effects``, ``_boxcox``, ``_reduce``, ``_optimize`` analyses of a fit
- mixtures (issue 12): ``_mixture_terms`` Scheffé presets and mixture-process crossings; ``_mixture``
  :func:`fit_mixture` and :class:`MixtureFit`; ``_mixture_engine`` its prediction engine (blend check, Cox
  traces); ``_mixture_optimize`` desirability over a mixture region; ``_mixture_slices`` slider moves and
  ternary slices
- beyond two levels (issue 14): ``_term_tests`` (whole-term partial F, elimination by term, the curvature
  indicator), ``_categorical_search`` (optimisation and the steepest path over categorical levels)
"""

from ._boxcox import BoxCoxResult, box_cox
from ._coding import Coding
from ._effects import LenthResult, effects, half_normal, lenth
from ._engine import PredictionEngine, predict
from ._fit import fit, least_squares
from ._formula import PRESETS, ModelSpec, monomials, parse_model, term_name
from ._glm import GlmFit
from ._inputs import ACHIEVED_SUFFIX
from ._mixed import DENOMINATOR_RULE, MixedFit
from ._mixture import MixtureFit, fit_mixture
from ._mixture_engine import MixtureEngine, cox_traces
from ._mixture_slices import move_component, ternary_slice
from ._mixture_ternary import ternary_blend, ternary_grid, ternary_halfplanes, ternary_position
from ._optimize import (
    Goal,
    Optimum,
    SteepestPath,
    fit_responses,
    maximize,
    minimize,
    optimize,
    overall_desirability,
    steepest_path,
    target,
)
from ._reduce import Reduction, reduce, refit
from ._result import Fit
from ._slices import slice_grid
from ._term_tests import term_tests  # issue 14: whole-term partial F tests

__all__ = [
    "ACHIEVED_SUFFIX",
    "DENOMINATOR_RULE",
    "GlmFit",
    "MixedFit",
    "least_squares",
    "PRESETS",
    "BoxCoxResult",
    "Coding",
    "Fit",
    "Goal",
    "LenthResult",
    "MixtureEngine",
    "MixtureFit",
    "ModelSpec",
    "Optimum",
    "PredictionEngine",
    "Reduction",
    "SteepestPath",
    "box_cox",
    "cox_traces",
    "effects",
    "fit",
    "fit_mixture",
    "ternary_blend",
    "ternary_grid",
    "ternary_halfplanes",
    "ternary_position",
    "fit_responses",
    "half_normal",
    "lenth",
    "maximize",
    "minimize",
    "monomials",
    "move_component",
    "optimize",
    "overall_desirability",
    "parse_model",
    "predict",
    "reduce",
    "refit",
    "slice_grid",
    "steepest_path",
    "target",
    "ternary_slice",
    "term_name",
    "term_tests",
]
