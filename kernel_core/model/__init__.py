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
- ``_anova``, ``_diagnostics``, ``_effects``, ``_boxcox``, ``_reduce``, ``_optimize`` analyses of a fit
- beyond two levels (issue 14): ``_term_tests`` (whole-term partial F, elimination by term, the curvature
  indicator), ``_categorical_search`` (optimisation and the steepest path over categorical levels)
"""

from ._boxcox import BoxCoxResult, box_cox
from ._coding import Coding
from ._effects import LenthResult, effects, half_normal, lenth
from ._engine import PredictionEngine, predict
from ._fit import fit
from ._formula import PRESETS, ModelSpec, monomials, parse_model, term_name
from ._inputs import ACHIEVED_SUFFIX
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
    "PRESETS",
    "BoxCoxResult",
    "Coding",
    "Fit",
    "Goal",
    "LenthResult",
    "ModelSpec",
    "Optimum",
    "PredictionEngine",
    "Reduction",
    "SteepestPath",
    "box_cox",
    "effects",
    "fit",
    "fit_responses",
    "half_normal",
    "lenth",
    "maximize",
    "minimize",
    "monomials",
    "optimize",
    "overall_desirability",
    "parse_model",
    "predict",
    "reduce",
    "refit",
    "slice_grid",
    "steepest_path",
    "target",
    "term_name",
    "term_tests",
]
