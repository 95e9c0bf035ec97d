"""Planning designed experiments: factors, designs, their structure and evaluation, and run sheets.

Every public name is re-exported from :mod:`levelwise` as well (``import levelwise as lw; lw.full_factorial(3)``).
The modules behind it are private and laid out by role:

* ``_factors``: :class:`Factor` and the coded <-> natural conversion.
* ``_twolevel``: GF(2) bit algebra of regular two-level designs (defining relation, aliases, word lengths).
* ``_design``: the :class:`Design` object (its table, structure, :meth:`Design.combine`).
* ``_factorial``: two-level full factorials and blocking; ``_aberration`` and ``_fractional``: fractions;
  ``_foldover``: the fold-over stage.
* ``_screening``: Plackett-Burman designs; ``_response_surface``: central composite and Box-Behnken designs.
* ``_constraints``, ``_region``, ``_optimal``: linear constraints, the factor region, optimal designs.
* ``_evaluation``: what a design can estimate.
* ``_runsheet``: writing run sheets (read back by :func:`levelwise.read_run_sheet`, in :mod:`levelwise.study`,
  through the one table importer).
* Beyond two levels (issue 14): ``_general_factorial`` (mixed-level full factorials), ``_conference``
  (conference matrices), ``_definitive_screening`` (definitive screening designs, the alias structure among
  second-order terms), ``_categorical_design`` (optimal designs and evaluation with categorical factors of any
  number of levels).
"""

from ._aberration import minimum_aberration
from ._conference import conference_matrix
from ._constraints import parse_constraint
from ._definitive_screening import SecondOrderAliasing, definitive_screening, second_order_aliasing
from ._design import COLUMN_RENAMES, META_COLUMNS, ROLE_RENAMES, ROLES, Design
from ._evaluation import DesignEvaluation, evaluate
from ._factorial import full_factorial
from ._factors import Factor, as_factors, default_names
from ._foldover import fold_over
from ._fractional import fractional_factorial, parse_generators
from ._general_factorial import general_factorial
from ._optimal import optimal_design
from ._region import parse_constraints
from ._response_surface import BB_GROUPS, box_behnken, central_composite, orthogonal_alpha, rotatable_alpha
from ._runsheet import run_sheet, write_run_sheet
from ._screening import plackett_burman, plackett_burman_matrix

__all__ = [
    "BB_GROUPS",
    "COLUMN_RENAMES",
    "META_COLUMNS",
    "ROLES",
    "ROLE_RENAMES",
    "Design",
    "DesignEvaluation",
    "Factor",
    "as_factors",
    "box_behnken",
    "central_composite",
    "default_names",
    "evaluate",
    "fold_over",
    "fractional_factorial",
    "full_factorial",
    "minimum_aberration",
    "optimal_design",
    "orthogonal_alpha",
    "parse_constraint",
    "parse_constraints",
    "parse_generators",
    "plackett_burman",
    "plackett_burman_matrix",
    "rotatable_alpha",
    "run_sheet",
    "write_run_sheet",
    # Beyond two levels (issue 14).
    "SecondOrderAliasing",
    "conference_matrix",
    "definitive_screening",
    "general_factorial",
    "second_order_aliasing",
]
