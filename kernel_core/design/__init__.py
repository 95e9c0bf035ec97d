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
* ``_mixture_region``: mixture :class:`Component` and the :class:`Mixture` region (bounds, vertices,
  pseudo-components); ``_mixture``: simplex-lattice, simplex-centroid and extreme-vertices designs and
  mixture-process crossings; ``_mixture_optimal``: optimal designs over a mixture region (issue 12).
* ``_splitplot``: whole plots of hard-to-change factors and the restricted randomisation;
  ``_splitplot_optimal``: D- and I-optimal split-plot designs (``optimal_design(whole_plots=...)``).
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
from ._mixture import extreme_vertices, mixture_process, simplex_centroid, simplex_lattice
from ._mixture_region import Component, Mixture
from ._optimal import optimal_design
from ._region import parse_constraints
from ._response_surface import BB_GROUPS, box_behnken, central_composite, orthogonal_alpha, rotatable_alpha
from ._runsheet import run_sheet, write_run_sheet
from ._screening import plackett_burman, plackett_burman_matrix
from ._splitplot import WHOLE_PLOT_COLUMN, split_plot_order

__all__ = [
    "BB_GROUPS",
    "COLUMN_RENAMES",
    "Component",
    "META_COLUMNS",
    "ROLES",
    "ROLE_RENAMES",
    "Design",
    "DesignEvaluation",
    "Factor",
    "Mixture",
    "as_factors",
    "box_behnken",
    "central_composite",
    "default_names",
    "evaluate",
    "extreme_vertices",
    "fold_over",
    "fractional_factorial",
    "full_factorial",
    "minimum_aberration",
    "mixture_process",
    "optimal_design",
    "orthogonal_alpha",
    "parse_constraint",
    "parse_constraints",
    "parse_generators",
    "plackett_burman",
    "plackett_burman_matrix",
    "rotatable_alpha",
    "run_sheet",
    "simplex_centroid",
    "simplex_lattice",
    "write_run_sheet",
    # split-plot designs (issue 13)
    "WHOLE_PLOT_COLUMN",
    "split_plot_order",
    # Beyond two levels (issue 14).
    "SecondOrderAliasing",
    "conference_matrix",
    "definitive_screening",
    "general_factorial",
    "second_order_aliasing",
]
