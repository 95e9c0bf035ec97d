"""levelwise dashboards: notebooks served by Voilà, and the code that launches them.

Composition only: build the shared model, lay out the views.
"""

from pathlib import Path

NOTEBOOKS = Path(__file__).parent

__all__ = ["NOTEBOOKS"]
