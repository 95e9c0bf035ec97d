"""Finding the views that :mod:`levelwise.widgets` provides, so the notebooks compose whatever exists."""

from __future__ import annotations

import importlib

from levelwise import widgets

#: View class name -> the module of :mod:`levelwise.widgets` that defines it (one view per module).
VIEW_MODULES = {
    "DesignBuilder": "design_builder",
    "EffectsView": "effects_view",
    "FactorSliders": "factor_sliders",
    "SurfaceSlice": "surface_slice",
    "ResidualInspector": "residual_inspector",
    "PredictionsView": "predictions_view",
    "OptimizerView": "optimizer_view",
    "MixtureSliders": "mixture_sliders",
    "CoxTraces": "cox_traces",
    "TernarySlice": "ternary_slice",
}


def find_view(name: str):
    """The view class *name* from :mod:`levelwise.widgets`, or None when this installation has no such view."""
    found = getattr(widgets, name, None)
    if found is not None:
        return found
    try:
        module = importlib.import_module(f"levelwise.widgets.{VIEW_MODULES.get(name, name.lower())}")
    except ImportError:
        return None
    return getattr(module, name, None)
