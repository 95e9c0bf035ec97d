"""levelwise computation core: designs, coding, fitting and prediction.

Pure numpy / pandas / scipy / statsmodels. Nothing here imports Jupyter,
widget or plotting libraries (``tests/test_imports.py`` proves it).
"""

from ._errors import LevelwiseError, LevelwiseWarning
from .design import Design, full_factorial
from .factors import Factor
from .fit import Fit, fit
from .formula import ModelSpec, parse_model

__all__ = [
    "Design",
    "Factor",
    "Fit",
    "LevelwiseError",
    "LevelwiseWarning",
    "ModelSpec",
    "fit",
    "full_factorial",
    "parse_model",
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
