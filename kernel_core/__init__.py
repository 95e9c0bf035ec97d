"""levelwise computation core: designs, coding, fitting and prediction.

Pure numpy / pandas / scipy / statsmodels. Nothing here imports Jupyter,
widget or plotting libraries (``tests/test_imports.py`` proves it).
"""

from ._errors import (
    ImportDataError,
    LevelwiseError,
    LevelwiseWarning,
    OutsideEditError,
    StudyConflictError,
    StudyFileError,
)
from ._progress import SearchStoppedWarning, TextProgress
from ._version import __version__
from .design import (
    Design,
    DesignEvaluation,
    Factor,
    box_behnken,
    central_composite,
    evaluate,
    fold_over,
    fractional_factorial,
    full_factorial,
    optimal_design,
    plackett_burman,
    run_sheet,
    write_run_sheet,
)
from .model import (
    BoxCoxResult,
    Fit,
    Goal,
    LenthResult,
    ModelSpec,
    Optimum,
    PredictionEngine,
    Reduction,
    SteepestPath,
    box_cox,
    effects,
    fit,
    fit_responses,
    half_normal,
    lenth,
    maximize,
    minimize,
    optimize,
    overall_desirability,
    parse_model,
    predict,
    reduce,
    refit,
    slice_grid,
    steepest_path,
    target,
)

__all__ = [
    "__version__",
    "Design",
    "Factor",
    "Fit",
    "LevelwiseError",
    "LevelwiseWarning",
    "ModelSpec",
    "PredictionEngine",
    "fit",
    "full_factorial",
    "parse_model",
    "predict",
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
    "steepest_path",
    "target",
]

# Design generation (levelwise.design).
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
from .study import (  # noqa: E402
    FilledRunSheet,
    ImportReport,
    Problem,
    Study,
    export_anova,
    export_coefficients,
    export_predictions,
    export_run_sheet,
    export_table,
    import_table,
    read_run_sheet,
    read_table,
    study_run_sheet,
)

__all__ += [
    "ImportDataError",
    "ImportReport",
    "OutsideEditError",
    "Problem",
    "Study",
    "StudyConflictError",
    "StudyFileError",
    "export_anova",
    "export_coefficients",
    "export_predictions",
    "export_run_sheet",
    "export_table",
    "import_table",
    "read_table",
    "study_run_sheet",
]
__all__ += ["SearchStoppedWarning", "TextProgress"]

# Mixtures (issue 12).
from .design import Component, Mixture  # noqa: E402

__all__ += ["Component", "Mixture"]
from .design import extreme_vertices, mixture_process, simplex_centroid, simplex_lattice  # noqa: E402

__all__ += ["extreme_vertices", "mixture_process", "simplex_centroid", "simplex_lattice"]
from .model import MixtureFit, cox_traces, fit_mixture  # noqa: E402

__all__ += ["MixtureFit", "cox_traces", "fit_mixture"]
from .model import move_component, ternary_grid, ternary_slice  # noqa: E402

__all__ += ["move_component", "ternary_grid", "ternary_slice"]

# Split-plot and GLM fits (issues 13, 15)
from .design import split_plot_order  # noqa: E402
from .model import DENOMINATOR_RULE, GlmFit, MixedFit, least_squares  # noqa: E402

__all__ += ["DENOMINATOR_RULE", "GlmFit", "MixedFit", "least_squares", "split_plot_order"]

# Beyond two levels (issue 14).
from .design import (  # noqa: E402
    SecondOrderAliasing,
    conference_matrix,
    definitive_screening,
    general_factorial,
    second_order_aliasing,
)
from .model import term_tests  # noqa: E402

__all__ += [
    "SecondOrderAliasing",
    "conference_matrix",
    "definitive_screening",
    "general_factorial",
    "second_order_aliasing",
    "term_tests",
]
