"""levelwise views: the shared fitted model and the widgets bound to it.

Imports point one way: ``dashboards`` -> ``widgets`` -> ``kernel_core``.
"""

try:
    import bqplot  # noqa: F401
    import ipywidgets  # noqa: F401
    import traitlets  # noqa: F401
except ImportError as exc:  # pragma: no cover - depends on the environment
    raise ImportError(
        "levelwise.widgets needs ipywidgets, bqplot and traitlets: pip install levelwise"
    ) from exc

from .factor_sliders import FactorSliders
from .shared_model import SharedModel

__all__ = ["FactorSliders", "SharedModel"]
