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

#: Each public name and the module that defines it. The modules are imported on first use (PEP 562), so a
#: page imports only the views it shows: the published page never loads the design builder, the table import
#: or the residual inspector (and what they import).
_MODULES = {
    "CoxTraces": "cox_traces",
    "DesignBuilder": "design_builder",
    "EffectsView": "effects_view",
    "FactorSliders": "factor_sliders",
    "MixtureSliders": "mixture_sliders",
    "OptimizerView": "optimizer_view",
    "PredictionsView": "predictions_view",
    "ReadOnlyError": "shared_model",
    "ResidualInspector": "residual_inspector",
    "RunSheetEditor": "run_sheet_editor",
    "SharedModel": "shared_model",
    "SurfaceSlice": "surface_slice",
    "TableImport": "table_import",
    "TernarySlice": "ternary_slice",
}


def __getattr__(name):
    module = _MODULES.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_MODULES))


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
