"""levelwise computation core: designs, coding, fitting and prediction.

Pure numpy / pandas / scipy / statsmodels. Nothing here imports Jupyter,
widget or plotting libraries (``tests/test_imports.py`` proves it).
"""

from ._errors import ImportDataError, LevelwiseError, LevelwiseWarning, OutsideEditError, StudyFileError
from .design import Design, full_factorial
from .factors import Factor
from .fit import Fit, fit
from .formula import ModelSpec, parse_model
from .study import Study

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
    "Study",
    "StudyFileError",
    "OutsideEditError",
    "ImportDataError",
]
