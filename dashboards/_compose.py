"""Finding the views that :mod:`widgets` provides, so the notebooks compose whatever exists."""

from __future__ import annotations

import importlib

import widgets

#: View class name -> the module of :mod:`widgets` that defines it (one view per module).
VIEW_MODULES = {
    "DesignBuilder": "design_builder",
    "EffectsView": "effects_view",
    "FactorSliders": "factor_sliders",
    "SurfaceSlice": "surface_slice",
    "ResidualInspector": "residual_inspector",
    "PredictionsView": "predictions_view",
    "OptimizerView": "optimizer_view",
}


def find_view(name: str):
    """The view class *name* from :mod:`widgets`, or None when this installation has no such view."""
    found = getattr(widgets, name, None)
    if found is not None:
        return found
    try:
        module = importlib.import_module(f"widgets.{VIEW_MODULES.get(name, name.lower())}")
    except ImportError:
        return None
    return getattr(module, name, None)
