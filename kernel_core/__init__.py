"""levelwise computation core: designs, coding, fitting and prediction.

Pure numpy / pandas / scipy / statsmodels. Nothing here imports Jupyter,
widget or plotting libraries (``tests/test_imports.py`` proves it).
"""

from ._errors import ImportDataError, LevelwiseError, LevelwiseWarning, OutsideEditError, StudyFileError
from ._version import __version__
from .boxcox import BoxCoxResult, box_cox
from .design import Design, full_factorial
from .effects import LenthResult, effects, half_normal, lenth
from .factors import Factor
from .fit import Fit, fit
from .formula import ModelSpec, parse_model
from .optimize import (
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
from .reduce import Reduction, reduce, refit
from .surface import slice_grid, slice_polynomials

__all__ = [
    "__version__",
    "Design",
    "Factor",
    "Fit",
    "LevelwiseError",
    "LevelwiseWarning",
    "ModelSpec",
    "fit",
    "full_factorial",
    "parse_model",
    # analysis on a fit
    "BoxCoxResult",
    "Goal",
    "LenthResult",
    "Optimum",
    "Reduction",
    "SteepestPath",
    "box_cox",
    "effects",
    "fit_responses",
    "half_normal",
    "lenth",
    "maximize",
    "minimize",
    "optimize",
    "overall_desirability",
    "reduce",
    "refit",
    "slice_grid",
    "slice_polynomials",
    "steepest_path",
    "target",
]

# Design generation (issue 3).
from .evaluation import DesignEvaluation, evaluate  # noqa: E402
from .fractional import fold_over, fractional_factorial  # noqa: E402
from .optimal import optimal_design  # noqa: E402
from .rsm_designs import box_behnken, central_composite  # noqa: E402
from .runsheet import FilledRunSheet, read_run_sheet, run_sheet, write_run_sheet  # noqa: E402
from .screening import plackett_burman  # noqa: E402

__all__ += [
    "DesignEvaluation",
    "FilledRunSheet",
    "box_behnken",
    "central_composite",
    "evaluate",
    "fold_over",
    "fractional_factorial",
    "optimal_design",
    "plackett_burman",
    "read_run_sheet",
    "run_sheet",
    "write_run_sheet",
]

# The study file and data exchange (issue 7).
from .study import Study  # noqa: E402

__all__ += ["ImportDataError", "OutsideEditError", "Study", "StudyFileError"]

# Split-plot and GLM fits (issues 13, 15)
from ._glm import GlmFit  # noqa: E402
from ._mixed import DENOMINATOR_RULE, MixedFit  # noqa: E402
from ._splitplot_designs import split_plot_order  # noqa: E402
from .fit import least_squares  # noqa: E402

__all__ += ["DENOMINATOR_RULE", "GlmFit", "MixedFit", "least_squares", "split_plot_order"]
