"""The design builder: factors, a design family with its options, a live preview, and "Create study".

Every design and every number in the preview comes from levelwise: the design
functions (full and fractional factorials, Plackett–Burman, central composite,
Box–Behnken, optimal designs by coordinate exchange, fold-over), ``Design``'s
resolution, word-length pattern and alias structure, and ``evaluate`` (VIF,
relative prediction variance, power). Searches (optimal designs, fractions without
generators) run off the main thread with a progress bar and a Stop button that keeps
the best design so far (``LongTask``); changes of the inputs are gathered until they
settle (``Debouncer``) before anything is rebuilt.
"""

from __future__ import annotations

import html

import ipywidgets as ipw
import numpy as np

from levelwise import (
    Design,
    Factor,
    LevelwiseError,
    box_behnken,
    central_composite,
    definitive_screening,
    fold_over,
    fractional_factorial,
    full_factorial,
    optimal_design,
    parse_model,
    plackett_burman,
)

from ._base import Debouncer, FigureExport, LongTask, TableExport, View
from ._builder_preview import PreviewMixin, parse_responses
from ._builder_splitplot import hard_toggle, recording, split_plot_keywords, split_plot_options
from ._number import NumberField
from .shared_model import SharedModel

FAMILIES = [
    ("Full factorial (any number of levels)", "full"),
    ("Two-level fractional factorial", "fractional"),
    ("Plackett–Burman screening", "plackett_burman"),
    ("Definitive screening (three levels)", "definitive_screening"),
    ("Central composite (response surface)", "ccd"),
    ("Box–Behnken (response surface)", "box_behnken"),
    ("Optimal design (computer search)", "optimal"),
    ("Fold-over of the current study's design", "fold_over"),
]

#: Which option widgets each family uses.
FAMILY_OPTIONS = {
    "full": ("center_points", "replicates", "blocks"),
    "fractional": ("runs", "generators", "resolution", "center_points", "replicates", "blocks"),
    "plackett_burman": ("runs", "center_points"),
    "definitive_screening": ("extra_centre_runs",),
    "ccd": ("alpha", "ccd_kind", "center_points"),
    "box_behnken": ("center_points",),
    "optimal": ("model", "runs", "criterion", "constraints", "starts", "augment", "whole_plots", "variance_ratio"),
    "fold_over": ("fold_factor", "fold_center_points"),
}


#: What "Runs 0" means, per family (shown under the options, so the hint is always true).
RUNS_ZERO = {
    "fractional": "Runs 0: the smallest fraction of the chosen resolution, or the half fraction when the "
                  "resolution is automatic.",
    "plackett_burman": "Runs 0: the smallest Plackett–Burman size for the factors (a multiple of 4 above their "
                       "number).",
    "optimal": "Runs 0: as many runs as the model has terms (the smallest that can estimate it, with no "
               "residual degrees of freedom).",
}


def generator_example(names) -> str:
    """A valid generator for *names*: the last factor as the product of the first (up to four) others."""
    names = [str(n) for n in names]
    if len(names) < 3:
        return ""
    basic = names[: min(len(names) - 1, 4)]
    joiner = "" if all(len(n) == 1 for n in names) else ":"
    return f"{names[-1]}={joiner.join(basic)}"


#: What the builder says on a mixture study (its components always sum to the total).
MIXTURE_NOTE = ("<p>This study's settings include mixture components, which always sum to the total. This builder "
                "plans designs over independent factors; make a mixture design in code (levelwise "
                "simplex_lattice, simplex_centroid, extreme_vertices or optimal_design over the components) and "
                "add it with study.add_stage.</p>")


class DesignBuilder(PreviewMixin, View):
    """Plan a design, preview what it can estimate, and start a study from it.

    Parameters
    ----------
    shared : SharedModel
        "Create study" replaces the study held here (refused when read-only).

    Attributes
    ----------
    factor_rows : list of dict of widgets
        Per factor: ``name``, ``units`` (Text), ``low``, ``high`` (NumberField: decimal point or comma),
        ``type`` (Dropdown continuous/categorical), ``levels`` (Text, comma-separated, categorical only).
        Rows are ``lw-factor-row``; ``add_factor_button`` (``lw-add-factor``), ``remove_factor_button``
        (``lw-remove-factor``).
    family : ipywidgets.Dropdown
        ``lw-design-family``; values ``full`` (any number of levels: a continuous factor's ``n_levels`` row
        control, a categorical factor's levels), ``fractional``, ``plackett_burman``, ``definitive_screening``,
        ``ccd``, ``box_behnken``, ``optimal``, ``fold_over``.
    options : dict of str -> widget
        ``center_points``, ``default_center_points``, ``replicates``, ``blocks``, ``runs``, ``generators``,
        ``resolution``, ``alpha``, ``ccd_kind``, ``model``, ``criterion``, ``constraints``, ``starts``,
        ``augment``, ``fold_factor``, ``fold_center_points``, ``seed``, ``randomize`` (each ``lw-design-option``).
    eval_model : ipywidgets.Text
        Model to evaluate the design for (``lw-eval-model``).
    search_button : ipywidgets.Button
        Runs the search now (``lw-search``; optimal designs and fractions without generators).
    task : LongTask
        The running search: ``progress`` (FloatProgress, ``lw-search-progress``), ``stop_button``
        (``lw-search-stop``: stops the search and keeps the best design so far).
    rebuild : Debouncer
        Input changes wait until they have settled (``settle_seconds``) before the design is rebuilt.
    run_sheet, structure, evaluation : ipywidgets.HTML
        The preview: ``lw-run-sheet``, ``lw-design-structure``, ``lw-design-evaluation``.
    responses : ipywidgets.Text
        Response names with units, e.g. ``Impact (J), Gloss (GU)`` (``lw-new-responses``).
    create_button : ipywidgets.Button
        ``lw-create-study``.
    downloads : ipywidgets.HTML
        Links to the run sheet as CSV and XLSX (``lw-run-sheet-export``).
    design : levelwise.Design or None
        The design previewed.
    widget : ipywidgets.VBox
        The whole view (``lw-design-builder``).
    """

    #: Seconds of quiet after the last input change before the design is rebuilt.
    settle_seconds = 0.6

    def __init__(self, shared: SharedModel):
        super().__init__(shared)
        self.design = None
        self.rebuild = Debouncer(self._rebuild, delay=self.settle_seconds)
        self.factor_box = ipw.VBox().add_class("lw-factor-table")
        self.factor_rows = []
        for f in shared.factors:
            self._add_factor_row(f)
        self.mixture_note = ipw.HTML().add_class("lw-mixture-note")
        if getattr(shared, "is_mixture", False):  # the builder plans factor designs; mixture designs are code
            self.mixture_note.value = MIXTURE_NOTE
            while len(self.factor_rows) < 2:
                self._add_factor_row()
        self.add_factor_button = ipw.Button(description="Add a factor").add_class("lw-add-factor")
        self.remove_factor_button = ipw.Button(
            description="Remove the last factor", layout=ipw.Layout(width="auto"),  # as wide as its label
        ).add_class("lw-remove-factor")
        self.add_factor_button.on_click(self.safely(lambda _: self.add_factor()))
        self.remove_factor_button.on_click(self.safely(lambda _: self.remove_factor()))
        self.family = ipw.Dropdown(options=FAMILIES, value="full", description="Design").add_class("lw-design-family")
        wide = {"style": {"description_width": "initial"}}
        self.options = {
            "center_points": NumberField(3, integer=True, minimum=0, maximum=50, description="Centre points", **wide),
            "default_center_points": ipw.Checkbox(value=True, description="usual number of centre points"),
            "replicates": NumberField(1, integer=True, minimum=1, maximum=10, description="Replicates", **wide),
            "extra_centre_runs": NumberField(0, integer=True, minimum=0, maximum=20, description="Extra centre runs",
                                             **wide),
            "blocks": ipw.Dropdown(options=[1, 2, 4, 8], value=1, description="Blocks", **wide),
            "runs": NumberField(0, integer=True, minimum=0, maximum=100_000, description="Runs (0: automatic)", **wide),
            "generators": ipw.Text(value="", description="Generators", continuous_update=False, **wide),
            "resolution": ipw.Dropdown(options=[("automatic", 0), ("III", 3), ("IV", 4), ("V", 5)], value=0,
                                       description="Resolution at least", **wide),
            "alpha": ipw.Combobox(value="rotatable", options=["rotatable", "orthogonal", "face"],
                                  description="Axial distance", **wide),
            "ccd_kind": ipw.Dropdown(options=["circumscribed", "inscribed", "face"], value="circumscribed",
                                     description="Axial points", **wide),
            "model": ipw.Text(value="full_second_order", description="Model to support", continuous_update=False,
                              **wide),
            "criterion": ipw.Dropdown(options=[("D (precise coefficients)", "D"), ("I (precise predictions)", "I")],
                                      value="D", description="Criterion", **wide),
            "constraints": ipw.Textarea(value="", placeholder="one per line, e.g. Oven + 10*Dwell <= 330",
                                        description="Constraints", continuous_update=False, **wide),
            "starts": NumberField(10, integer=True, minimum=1, maximum=200, description="Random starts", **wide),
            "augment": ipw.Checkbox(value=False, description="keep the current study's runs and add to them"),
            "fold_factor": ipw.Dropdown(options=[("every factor", "")], value="", description="Fold on", **wide),
            "fold_center_points": NumberField(0, integer=True, minimum=0, maximum=50,
                                              description="Centre points in the fold", **wide),
            "seed": NumberField(1, integer=True, minimum=0, description="Seed (run order)", **wide),
            "randomize": ipw.Checkbox(value=True, description="randomise the run order"),
            **split_plot_options(wide),  # optimal split-plot designs (issue 13)
        }
        for control in self.options.values():
            control.add_class("lw-design-option")
        self.eval_model = ipw.Text(value="main_effects", description="Evaluate for model", continuous_update=False,
                                   **wide).add_class("lw-eval-model")
        self.search_button = ipw.Button(description="Search now", layout=ipw.Layout(width="auto")).add_class(
            "lw-search")
        self.task = LongTask("Search")
        self.progress = self.task.progress
        self.search_button.on_click(self.safely(lambda _: self.search()))
        self.run_sheet = ipw.HTML().add_class("lw-run-sheet")
        self.structure = ipw.HTML().add_class("lw-design-structure")
        self.evaluation = ipw.HTML().add_class("lw-design-evaluation")
        self.responses = ipw.Text(value=self._current_responses(), description="Responses",
                                  **wide).add_class("lw-new-responses")
        self.create_button = ipw.Button(description="Create study", button_style="").add_class("lw-create-study")
        self.create_button.on_click(self.safely(lambda _: self.create_study()))
        if shared.read_only:
            self.create_button.disabled = True
            self.create_button.layout.display = "none"
        self.downloads = ipw.HTML().add_class("lw-run-sheet-export")
        self.evaluation_export = TableExport("design-evaluation", "evaluation table")
        self.figure_export = FigureExport(self, self.figure, "design")
        self.option_box = ipw.VBox().add_class("lw-design-options")
        self.hint = ipw.HTML().add_class("lw-option-hint")
        self.widget = ipw.VBox(
            [
                self.mixture_note,
                ipw.HTML("<b>Factors</b>: name, units, low and high settings, type"),
                self.factor_box,
                ipw.HBox([self.add_factor_button, self.remove_factor_button]),
                self.family,
                self.option_box,
                self.hint,
                ipw.HBox([self.options["seed"], self.options["randomize"]]),
                ipw.HBox([self.search_button, self.task.widget]),
                self.eval_model,
                self.structure,
                self.evaluation,
                self.evaluation_export.widget,
                self.run_sheet,
                self.downloads,
                self.figure_export.widget,
                ipw.HBox([self.responses, self.create_button]),
                self.status,
            ]
        ).add_class("lw-design-builder")
        if any(getattr(f, "is_categorical", False) for f in shared.factors):
            self.options["center_points"].value = 0  # a categorical factor has no centre
        self.family.observe(self.safely(self._on_family), names="value")
        for control in self.options.values():
            control.observe(self.safely(self._on_option), names="value")
        self.eval_model.observe(self.safely(self._on_option), names="value")
        self.watch(self._on_study, names=["design", "factors"])
        self.watch(self.show_shared_error, names=["error"])
        self._on_family()

    # ----- factors table ------------------------------------------------------------------------
    def _add_factor_row(self, factor: Factor | None = None):
        index = len(self.factor_rows)
        name = factor.name if factor else "ABCDEFGHJKLMNOPQRSTUVWXYZ"[index % 25]
        categorical = bool(factor is not None and getattr(factor, "is_categorical", False))
        row = {
            "name": ipw.Text(value=name, description="Name", continuous_update=False, layout=ipw.Layout(width="190px")),
            "units": ipw.Text(value=factor.units if factor else "", description="Units", continuous_update=False,
                              layout=ipw.Layout(width="150px")),
            "low": NumberField(factor.low if factor and not categorical else -1.0, description="Low",
                                 layout=ipw.Layout(width="150px")),
            "high": NumberField(factor.high if factor and not categorical else 1.0, description="High",
                                  layout=ipw.Layout(width="150px")),
            "n_levels": ipw.BoundedIntText(value=(factor.n_levels or 2) if factor and not categorical else 2, min=2,
                                           max=9, description="Settings", layout=ipw.Layout(width="150px")),
            "type": ipw.Dropdown(options=["continuous", "categorical"],
                                 value="categorical" if categorical else "continuous",
                                 description="Type", layout=ipw.Layout(width="200px")),
            "levels": ipw.Text(value=", ".join(map(str, factor.levels)) if categorical else "",
                               description="Levels", placeholder="e.g. steel, brass", continuous_update=False,
                               layout=ipw.Layout(width="220px")),
            "hard": hard_toggle(factor),  # hard to change: held over whole plots (issue 13)
        }
        for control in row.values():
            control.observe(self.safely(self._on_option), names="value")
        self.factor_rows.append(row)
        self.factor_box.children = [
            ipw.HBox(list(r.values())).add_class("lw-factor-row") for r in self.factor_rows
        ]

    def add_factor(self) -> None:
        """Add a factor row (named A, B, C, ... by default)."""
        self._add_factor_row()
        self._on_option()

    def remove_factor(self) -> None:
        """Remove the last factor row (at least one stays)."""
        if len(self.factor_rows) <= 1:
            raise LevelwiseError("A design needs at least one factor.")
        self.factor_rows.pop()
        self.factor_box.children = self.factor_box.children[:-1]
        self._on_option()

    def factors(self) -> list[Factor]:
        """The factors in the table (levelwise validates them)."""
        out = []
        for i, row in enumerate(self.factor_rows):
            try:
                if row["type"].value == "categorical":
                    levels = [v.strip() for v in row["levels"].value.split(",") if v.strip()]
                    out.append(Factor(row["name"].value.strip(), units=row["units"].value.strip(), levels=levels,
                                      hard_to_change=row["hard"].value))
                else:
                    count = row["n_levels"].value
                    out.append(Factor(row["name"].value.strip(), row["low"].value, row["high"].value,
                                      units=row["units"].value.strip(), n_levels=count if count != 2 else None,
                                      hard_to_change=row["hard"].value))
            except LevelwiseError as exc:
                raise LevelwiseError(f"Factor row {i + 1}: {exc}") from None
        return out

    # ----- options ------------------------------------------------------------------------------
    def _current_responses(self) -> str:
        return ", ".join(f"{r} ({u})" if u else r for r, u in self.shared.units.items()) or "y"

    def _on_study(self, change=None):
        names = [("every factor", "")] + [(f.name, f.name) for f in self.shared.factors]
        self.options["fold_factor"].options = names

    def _on_family(self, change=None):
        family = self.family.value
        used = FAMILY_OPTIONS[family]
        children = [self.options[name] for name in used]
        if "center_points" in used and family in ("ccd", "box_behnken"):
            children.append(self.options["default_center_points"])
        self.option_box.children = children
        searching = family in ("optimal", "fractional")
        self.search_button.description = ("Search for the optimal design" if family == "optimal"
                                          else "Search for the best fraction now")
        self.search_button.layout.display = "" if searching else "none"
        self.task.widget.layout.display = "" if searching else "none"
        if family in ("ccd", "box_behnken", "optimal") and self.eval_model.value == "main_effects":
            self.eval_model.value = "full_second_order"
        elif family in ("full", "fractional", "plackett_burman", "definitive_screening") \
                and self.eval_model.value == "full_second_order":
            self.eval_model.value = "main_effects"
        self._on_option()

    def _on_option(self, change=None):
        if getattr(self, "_building", False):
            return
        self.task.discard()  # a search for the old inputs is no longer wanted
        self._hint()
        self.rebuild.request()

    def _hint(self) -> None:
        """Hints that match the family and the factor names in the table."""
        family = self.family.value
        lines = []
        if family in RUNS_ZERO:
            lines.append(RUNS_ZERO[family])
        if family == "fractional":
            names = [row["name"].value.strip() for row in self.factor_rows]
            example = generator_example(names)
            placeholder = f"e.g. {example}" if example else "needs 3 factors or more"
            self.options["generators"].placeholder = placeholder
            lines.append("Generators: empty to search for the best fraction, or added factor = product of others, "
                         f"separated by commas ({html.escape(placeholder)}; names with more than one letter are "
                         "joined with ':').")
        self.hint.value = "<br>".join(lines)

    def _searches(self) -> bool:
        """True when building the current choice runs a search (optimal designs, fractions without generators)."""
        family = self.family.value
        return family == "optimal" or (family == "fractional" and not self.options["generators"].value.strip())

    def _rebuild(self) -> None:
        """Inputs have settled: rebuild the preview (fractions searched in the background; optimal on request)."""
        if self.family.value == "optimal":
            self.structure.value = "Press “Search for the optimal design” to run the search."
            return
        if self._searches():
            self.safely(self.search)()
        else:
            self.preview()

    # ----- building -----------------------------------------------------------------------------
    def build(self, progress=None) -> Design:
        """The design the options describe, built by levelwise (here and now)."""
        return self.recipe()(progress)

    def recipe(self):
        """``make(progress) -> Design`` for the current inputs: the inputs are read here, on the main thread,
        so *make* can run on a worker thread. Its warnings (e.g. too few whole plots) go to ``build_warnings``."""
        return recording(self, self._recipe())

    def _recipe(self):
        o = {name: control.value for name, control in self.options.items()}
        seed, randomize = o["seed"], o["randomize"]
        family = self.family.value
        if family == "fold_over":
            if self.shared.design is None:
                raise LevelwiseError("The current study has no design to fold over: create one first.")
            # The new runs form the next block, after the current runs; the preview shows both together, with the
            # structure of the combined design.
            base = self.shared.design
            return lambda progress: base.combine(fold_over(
                base, o["fold_factor"] or None, center_points=o["fold_center_points"], randomize=randomize,
                seed=seed))
        factors = self.factors()
        centre = None if (family in ("ccd", "box_behnken") and o["default_center_points"]) else o["center_points"]
        if family == "full":
            return lambda progress: full_factorial(factors, center_points=centre, replicates=o["replicates"],
                                                   blocks=o["blocks"], randomize=randomize, seed=seed)
        if family == "fractional":
            generators = [g.strip() for g in o["generators"].split(",") if g.strip()] or None
            runs = o["runs"] or None
            if runs is None and generators is None and not o["resolution"]:
                runs = 2 ** max(len(factors) - 1, 2)  # nothing chosen yet: the half fraction
            return lambda progress: fractional_factorial(
                factors, runs=runs, generators=generators, resolution=o["resolution"] or None,
                center_points=centre, replicates=o["replicates"], blocks=o["blocks"], randomize=randomize,
                seed=seed, progress=progress if progress is not None else False,
            )
        if family == "definitive_screening":
            return lambda progress: definitive_screening(factors, extra_centre_runs=o["extra_centre_runs"],
                                                         randomize=randomize, seed=seed)
        if family == "plackett_burman":
            return lambda progress: plackett_burman(factors, runs=o["runs"] or None, center_points=centre,
                                                    randomize=randomize, seed=seed)
        if family == "ccd":
            alpha = o["alpha"].strip()
            try:
                alpha = float(alpha)
            except ValueError:
                pass
            return lambda progress: central_composite(factors, alpha=alpha, kind=o["ccd_kind"],
                                                      center_points=centre, randomize=randomize, seed=seed)
        if family == "box_behnken":
            return lambda progress: box_behnken(factors, center_points=centre, randomize=randomize, seed=seed)
        constraints = [line.strip() for line in o["constraints"].splitlines() if line.strip()] or None
        runs = o["runs"] or len(parse_model(o["model"], [f.name for f in factors]).terms)
        fixed = None
        if o["augment"]:  # the new runs only, numbered after the current ones
            data = self.shared.data
            fixed = data[(["run"] if "run" in data.columns else []) + [f.name for f in factors]]
        return lambda progress: optimal_design(
            factors, o["model"], runs, criterion=o["criterion"], constraints=constraints, fixed_runs=fixed,
            starts=o["starts"], seed=seed, progress=progress if progress is not None else False,
            randomize=randomize, **split_plot_keywords(o),
        )

    def preview(self) -> Design | None:
        """Build the design and show its run sheet, structure and evaluation; errors go to the status line."""
        try:
            design = self.build()
        except LevelwiseError as exc:
            self.show_error(str(exc))
            return None
        self._show(design)
        return design

    def search(self) -> Design | None:
        """Run the search now, on a worker thread inside a kernel, with progress and a Stop button.

        Returns the design when the search ran at once (no event loop: plain Python, tests), else None; the
        design is shown when the search ends (``task.stop()`` ends it early with the best design so far).
        """
        self.rebuild.cancel()
        try:
            make = self.recipe()
        except LevelwiseError as exc:
            self.show_error(str(exc))
            return None
        self.show_error("")
        self.task.start(make, self._searched)
        return None if self.task.running else self.design

    def _searched(self, design, error) -> None:
        if error is not None:
            if isinstance(error, LevelwiseError):
                self.show_error(str(error))
            else:
                self.show_error(f"Internal error in the search: {type(error).__name__}: {error}")
            return
        self._show(design)
        if design.metadata.get("search_complete") is False:
            why = {"cancelled": "stopped on request", "interrupted": "interrupted"}.get(
                design.metadata.get("stopped"), "stopped at its time and size limit")
            self.status.value = (
                f'<div class="lw-search-incomplete">The search was {why}: this is the best design found so far, '
                "not necessarily the best there is.</div>"
            )

    # ----- the study ----------------------------------------------------------------------------
    def create_study(self) -> None:
        """Put a new study with blank responses, on the previewed design, into the shared model."""
        design = self.design if self.design is not None else self.preview()
        if design is None:
            raise LevelwiseError("The design could not be built: see the message above.")
        responses = parse_responses(self.responses.value)
        self.shared.new_study(design, responses)
        if np.all(~np.isfinite(self.shared.data[list(responses)].to_numpy(dtype=float))):
            self.status.value = (
                '<div class="lw-created">New study created: record the responses run by run, then every view fits.'
                "</div>"
            )
