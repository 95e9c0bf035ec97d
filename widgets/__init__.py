"""levelwise views: the shared fitted model and the widgets bound to it.

Imports point one way: ``dashboards`` -> ``widgets`` -> ``levelwise``.
"""

try:
    import bqplot  # noqa: F401
    import ipywidgets  # noqa: F401
    import traitlets  # noqa: F401
except ImportError as exc:  # pragma: no cover - depends on the environment
    raise ImportError(
        "levelwise.widgets needs ipywidgets, bqplot and traitlets: pip install levelwise"
    ) from exc

from .cox_traces import CoxTraces
from .design_builder import DesignBuilder
from .effects_view import EffectsView
from .factor_sliders import FactorSliders
from .mixture_sliders import MixtureSliders
from .optimizer_view import OptimizerView
from .predictions_view import PredictionsView
from .residual_inspector import ResidualInspector
from .run_sheet_editor import RunSheetEditor
from .shared_model import ReadOnlyError, SharedModel
from .surface_slice import SurfaceSlice
from .table_import import TableImport
from .ternary_slice import TernarySlice

__all__ = [
    "CoxTraces",
    "DesignBuilder",
    "EffectsView",
    "FactorSliders",
    "MixtureSliders",
    "OptimizerView",
    "PredictionsView",
    "ReadOnlyError",
    "ResidualInspector",
    "RunSheetEditor",
    "SharedModel",
    "SurfaceSlice",
    "TableImport",
    "TernarySlice",
]
