"""The :class:`Design` object: planned runs, their roles and two-level structure, and combining stages."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._errors import LevelwiseError, describe
from ._factors import as_factors
from ._twolevel import TwoLevelStructure, block_contrasts, structure_from_runs

#: Columns that come before the factor columns in :attr:`Design.table`.
META_COLUMNS = ("run", "standard_order", "block", "role")

#: What each run is for, as written in the ``role`` column (values of the designs levelwise builds).
ROLES = {
    "corner": "a two-level run: every factor at its low or high setting (factorials, fractions, fold-overs, "
              "Plackett-Burman designs, the cube of a central composite design)",
    "centre": "every continuous factor at the middle of its range",
    "axial": "one factor away from the centre along its axis, the others at their centres (central composite)",
    "edge_midpoint": "the middle of an edge (or face) of the cube: some factors at low/high, the rest at their "
                     "centres (Box-Behnken)",
    "optimal": "a run chosen by the optimal-design search",
    # mixtures (issue 12)
    "vertex": "a vertex of the mixture region (a pure component on the simplex)",
    "edge_centroid": "the centroid of an edge of the mixture region (a binary blend on the simplex)",
    "face_centroid": "the centroid of a face of the mixture region",
    "overall_centroid": "the centroid of the mixture region (the average of its vertices)",
    "lattice": "a point of a simplex lattice that is no vertex or centroid",
    "interior_check": "an axial blend halfway from the overall centroid to a vertex",
    "grid": "a run of a general full factorial that is not a two-level corner (some factor at a middle level or "
            "a categorical factor with more than 2 levels)",
    "fold_pair": "a run of a definitive screening design, made together with its mirror image (every coded "
                 "setting negated)",
}

#: History of the role names: the value an older levelwise wrote (column ``point_type``) -> the role today.
#: Identity entries record names checked and kept. ``"fixed"`` marked the earlier runs that
#: ``optimal_design(fixed_runs=...)`` copied into its result; it now returns only the new runs, so no design
#: writes it any more and an old value reads as ``"earlier_run"``. Older run sheets and study files are
#: translated with this table (the study file migration keeps a frozen copy of it).
ROLE_RENAMES = {
    "factorial": "corner",
    "center": "centre",
    "axial": "axial",
    "edge": "edge_midpoint",
    "optimal": "optimal",
    "fixed": "earlier_run",
}

#: Column names an older levelwise wrote -> the names today.
COLUMN_RENAMES = {"std_order": "standard_order", "point_type": "role"}


def _check_count(value, parameter: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise LevelwiseError(
            f"The '{parameter}' parameter must be an integer >= {minimum}. Got {describe(value)} instead."
        )
    return int(value)


def _check_roles(role, n: int) -> np.ndarray:
    role = np.asarray(role, dtype=object).reshape(-1)
    if role.shape != (n,):
        raise LevelwiseError(f"The 'role' parameter must give one role per run ({n}). Got {role.size} instead.")
    bad = [r for r in role if not isinstance(r, str) or not r.strip()]
    if bad:
        raise LevelwiseError(f"Each 'role' must be a non-empty string such as 'corner'. Got {describe(bad[0])}.")
    return role


def _check_criterion(criterion) -> str:
    """The optimal searches' 'criterion' parameter: 'D' or 'I'."""
    if criterion not in ("D", "I"):
        raise LevelwiseError(f"The 'criterion' parameter must be 'D' or 'I'. Got {describe(criterion)} instead.")
    return criterion


def _check_progress(progress):
    """A 'progress' parameter that must be a callable or None."""
    if progress is not None and not callable(progress):
        raise LevelwiseError(f"The 'progress' parameter must be a callable or None. Got {describe(progress)}.")
    return progress


def _check_enough_runs(model, p: int, runs: int, fixed: int, what: str = "terms") -> int:
    """The run count of an optimal search (new + fixed) against the model's *p* columns; returns it."""
    n = runs + fixed
    if n < p:
        raise LevelwiseError(
            f"The model {model!r} has {p} {what} but the design would have only {n} runs "
            f"({runs} new + {fixed} fixed); 'runs' must be at least {p - fixed}."
        )
    return n


def _estimable(X: np.ndarray) -> tuple[int, np.ndarray]:
    """Numerical rank of a model matrix (column-pivoted QR, the usual tolerance) and which columns it estimates."""
    import scipy.linalg

    n, p = X.shape
    _, r, piv = scipy.linalg.qr(X, mode="economic", pivoting=True)
    diag = np.abs(np.diag(r))
    tol = max(n, p) * np.finfo(float).eps * (diag[0] if len(diag) else 0.0)
    rank = int((diag > tol).sum())
    estimable = np.zeros(p, dtype=bool)
    estimable[piv[:rank]] = True
    return rank, estimable


def _check_seed(seed):
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise LevelwiseError(f"The 'seed' parameter must be None or an integer >= 0. Got {describe(seed)} instead.")
    return seed


#: The design-table column that numbers the whole plots of a split-plot design (see ``_splitplot``).
WHOLE_PLOT = "whole_plot"


def _combined_whole_plots(first, second):
    """Whole-plot numbers of *first* then *second* (None when neither stage has whole plots).

    *first* keeps its numbers; *second*'s continue after the largest of them when any would repeat one. A
    stage without whole plots gets one whole plot per run, numbered after the other stage's.
    """
    if WHOLE_PLOT not in first.table.columns and WHOLE_PLOT not in second.table.columns:
        return None
    parts, top = [], 0
    for design in (first, second):
        if WHOLE_PLOT in design.table.columns:
            plots = design.table[WHOLE_PLOT].to_numpy(dtype=np.int64)
            if parts and np.isin(plots, parts[0]).any():
                plots = plots - plots.min() + top + 1
        else:
            plots = np.arange(top + 1, top + 1 + len(design), dtype=np.int64)
        parts.append(plots)
        top = max(top, int(plots.max(initial=0)))
    return np.concatenate(parts)


def structure_of_runs(coded, role, block, names):
    """Regular two-level structure of runs that are all corner or centre runs (None otherwise).

    The corner runs give the defining relation; their blocks, when there are 2^b of them, the block confounding.
    """
    coded = np.asarray(coded, dtype=float)
    role = np.asarray(role, dtype=object)
    corner = role == "corner"
    centre = role == "centre"
    if not corner.any() or not np.all(corner | centre) or not np.all(coded[centre] == 0.0):
        return None
    return structure_from_runs(coded[corner], list(names), block_contrasts(np.asarray(block)[corner]))


class Design:
    """A planned set of runs.

    Parameters
    ----------
    factors : list of Factor or int
    coded : array (n, k)
        Coded settings, one row per run in standard order.
    role : sequence of str
        What each run is for: ``"corner"``, ``"centre"``, ``"axial"``, ``"edge_midpoint"``, ``"optimal"``
        (see :data:`ROLES`), or a plain name of your own.
    block : sequence of int, optional
        Block number per run (default all 1).
    randomize : bool, default True
        Put the runs in a random order within each block, blocks kept in sequence.
    seed : int, optional
        Seed of the randomisation (reproducible).
    standard_order : sequence of int, optional
        Standard-order number per row (default 1..n).
    first_run : int, default 1
        Run id of the first run; the others follow (a later stage continues after the runs before it).
    kind : str, optional
        What built the design, e.g. ``"fractional factorial"``.
    structure : TwoLevelStructure, optional
        Defining relation and block confounding of a regular two-level design.
    metadata : dict, optional
        Extra facts (axial distance, efficiencies, ...), shown in :attr:`metadata`.

    Attributes
    ----------
    factors : tuple of Factor
        The factors, in column order.
    table : pandas.DataFrame
        One row per run in run (randomised) order, with columns ``run`` (the run id), ``standard_order``,
        ``block``, ``role`` and one column per factor in natural units.
    coded : pandas.DataFrame
        The same runs in coded units (-1 at low, +1 at high), one column per factor.
    """

    def __init__(
        self,
        factors,
        coded: np.ndarray,
        role,
        block=None,
        *,
        randomize=True,
        seed=None,
        standard_order=None,
        first_run: int = 1,
        kind: str = "custom",
        structure: TwoLevelStructure | None = None,
        metadata: dict | None = None,
    ):
        self.factors = as_factors(factors)
        seed = _check_seed(seed)
        first_run = _check_count(first_run, "first_run", 1)
        coded = np.asarray(coded, dtype=float)
        n = coded.shape[0]
        if coded.ndim != 2 or coded.shape[1] != len(self.factors):
            raise LevelwiseError(
                f"The 'coded' array must have one column per factor ({len(self.factors)}). "
                f"Got shape {coded.shape} instead."
            )
        role = _check_roles(role, n)
        block = np.ones(n, dtype=int) if block is None else np.asarray(block, dtype=int)
        standard_order = np.arange(1, n + 1) if standard_order is None else np.asarray(standard_order, dtype=int)
        for name, values in (("block", block), ("standard_order", standard_order)):
            if values.shape != (n,):
                raise LevelwiseError(f"The '{name}' parameter must give one value per run ({n}). "
                                     f"Got {values.size} values instead.")
        order = np.arange(n)
        if randomize:
            rng = np.random.default_rng(seed)
            # Randomise within each block, blocks kept in sequence.
            order = np.concatenate([rng.permutation(np.flatnonzero(block == b)) for b in np.unique(block)])
        self._set_runs(coded[order], np.arange(first_run, first_run + n), standard_order[order], block[order],
                       role[order])
        self.kind = kind
        self.seed = seed
        self.randomized = bool(randomize)
        self._structure = structure
        self._metadata = dict(metadata or {})

    def _set_runs(self, coded, run, standard_order, block, role):
        """Fill :attr:`table` and :attr:`coded` from rows already in run order."""
        natural = {f.name: f.to_natural(coded[:, j]) for j, f in enumerate(self.factors)}
        self.table = pd.DataFrame(
            {"run": run, "standard_order": standard_order, "block": block, "role": role, **natural}
        )
        self.coded = pd.DataFrame(coded, columns=[f.name for f in self.factors])

    @property
    def factor_names(self) -> list[str]:
        return [f.name for f in self.factors]

    @property
    def metadata(self) -> dict:
        """Facts about the design (kind, seed, axial distance, efficiencies, ...); a fresh copy each time."""
        out = {"kind": self.kind, "runs": len(self), "blocks": int(self.table["block"].nunique()),
               "seed": self.seed, "randomized": self.randomized}
        if self._structure is not None:
            out["generators"] = list(self.generators)
            out["resolution"] = self.resolution
            out["word_length_pattern"] = list(self.word_length_pattern)
            out["block_confounded"] = self.block_confounded
        out.update(self._metadata)
        return out

    # -- regular two-level structure ---------------------------------------------------------------
    @property
    def is_regular(self) -> bool:
        """True for a regular two-level design (full factorial or fraction) with a defining relation."""
        return self._structure is not None

    def _need_structure(self, what):
        if self._structure is None:
            raise LevelwiseError(
                f"'{what}' is defined for regular two-level designs only; this is a {self.kind} design. "
                "Use levelwise.evaluate(design, model) for its alias matrix."
            )
        return self._structure

    @property
    def generators(self):
        """Generators such as ``["E=ABCD"]`` (empty for a full factorial; None for other designs)."""
        return None if self._structure is None else list(self._structure.generators)

    @property
    def defining_relation(self):
        """Words w of the defining relation I = w1 = w2 = ..., shortest first (None for non-regular designs)."""
        return None if self._structure is None else self._structure.defining_relation()

    @property
    def resolution(self):
        """Resolution (length of the shortest word); None for a full factorial or a non-regular design."""
        return None if self._structure is None else self._structure.resolution()

    @property
    def word_length_pattern(self):
        """(A3, A4, ..., Ak): number of words of each length (None for non-regular designs)."""
        return None if self._structure is None else self._structure.word_length_pattern()

    @property
    def block_confounded(self) -> list:
        """Effects confounded with blocks (lowest order of each alias class); empty without blocks."""
        return [] if self._structure is None else self._structure.block_confounded()

    def aliases(self, max_order: int = 3) -> dict:
        """Each effect up to *max_order* mapped to the effects (up to *max_order*) it is aliased with.

        A leading ``-`` marks a negative alias; ``"Block"`` marks confounding with blocks.

        Examples
        --------
        >>> from levelwise import fractional_factorial
        >>> d = fractional_factorial(3, generators=["C=AB"], randomize=False)
        >>> d.aliases(max_order=2)["A"]
        ['BC']
        """
        _check_count(max_order, "max_order", 1)
        return self._need_structure("aliases").aliases(max_order)

    def combine(self, new: Design) -> Design:
        """The design of both stages: these runs first, in their order, then the runs of *new* in theirs.

        Run ids, standard order, blocks and roles are kept as they are. Whole plots (the ``whole_plot`` column of
        a split-plot stage) are kept too: this design's numbers as they are, the new stage's continued after them
        (shifted when they would repeat one), and a stage without whole plots gets one whole plot per run (each
        of its runs was reset on its own). The two-level structure (defining
        relation, resolution, aliases, confounding with blocks) is recomputed from all the corner runs when
        every run is a corner or centre run; otherwise the combined design has none (use
        :func:`levelwise.evaluate`).

        Parameters
        ----------
        new : Design
            Runs of a later stage on the same factors, e.g. ``fold_over(self)``; its run ids must not repeat
            these.

        Returns
        -------
        Design

        Raises
        ------
        LevelwiseError
            *new* is not a Design, has other factors, or repeats a run id.

        Examples
        --------
        >>> from levelwise import fold_over, fractional_factorial
        >>> screen = fractional_factorial(7, runs=8, seed=1)
        >>> both = screen.combine(fold_over(screen, seed=2))
        >>> screen.resolution, both.resolution, len(both), both.table.run.tolist() == list(range(1, 17))
        (3, 4, 16, True)
        """
        if not isinstance(new, Design):
            raise LevelwiseError(f"The 'new' parameter must be a Design. Got {describe(new)} instead.")
        if tuple(new.factors) != tuple(self.factors):
            raise LevelwiseError(
                "The 'new' design must have the same factors (names, ranges, levels, in order) as this one. "
                f"Got {new.factor_names} against {self.factor_names}."
            )
        repeated = sorted(set(self.table["run"]) & set(new.table["run"]))
        if repeated:
            raise LevelwiseError(
                f"The 'new' design repeats run id(s) {repeated[:10]} of this design; a later stage must continue "
                "after the earlier runs (e.g. Design(..., first_run=...))."
            )
        coded = np.vstack([self.coded.to_numpy(dtype=float), new.coded.to_numpy(dtype=float)])
        parts = {c: np.concatenate([self.table[c].to_numpy(), new.table[c].to_numpy()]) for c in META_COLUMNS}
        out = object.__new__(Design)
        out.factors = self.factors
        out._set_runs(coded, parts["run"], parts["standard_order"], parts["block"], parts["role"])
        out.kind = f"{self.kind} + {new.kind}"
        out.seed = None
        out.randomized = self.randomized and new.randomized
        out._structure = structure_of_runs(coded, parts["role"], parts["block"], self.factor_names)
        out._metadata = {"parts": [{"kind": d.kind, "runs": [int(d.table["run"].min()), int(d.table["run"].max())]}
                                   for d in (self, new)]}
        plots = _combined_whole_plots(self, new)
        if plots is not None:
            out.table.insert(list(out.table.columns).index("block") + 1, WHOLE_PLOT, plots)
            hard = sorted({*self.metadata.get("hard_to_change", ()), *new.metadata.get("hard_to_change", ())},
                          key=self.factor_names.index)
            out._metadata.update({"hard_to_change": hard, "whole_plots": int(len(np.unique(plots)))})
        region = getattr(new, "_region", None) or getattr(self, "_region", None)
        if region is not None:
            out._region = region
        return out

    def to_run_sheet(self, responses=("y",)) -> pd.DataFrame:
        """Run sheet in run order: planned settings, blank achieved-setting and response columns.

        See :func:`levelwise.design.run_sheet`.
        """
        from ._runsheet import run_sheet

        return run_sheet(self, responses=responses)

    def __len__(self) -> int:
        return len(self.table)

    def __repr__(self) -> str:
        extra = f", resolution {self.resolution}" if self.resolution else ""
        return f"<Design ({self.kind}): {len(self)} runs, factors {self.factor_names}{extra}>"

    def _repr_html_(self) -> str:
        """Rich notebook output: what the design is, then its runs in run order (natural units in headers)."""
        import html as _html

        from .._html import html_table

        ranges = []
        for f in self.factors:
            if getattr(f, "is_categorical", False):
                ranges.append(f"{f.name}: {', '.join(map(str, f.levels))}")
            else:
                unit = f" {f.units}" if f.units else ""
                ranges.append(f"{f.name} {f.low:g} to {f.high:g}{unit}")
        facts = [f"{len(self)} runs"]
        if self.resolution:
            facts.append(f"resolution {self.resolution}")
        if self.generators:
            facts.append("generators " + ", ".join(self.generators))
        if self.metadata.get("search_complete") is False:
            facts.append("search stopped early: the best design found so far")
        units = {f.name: f.units for f in self.factors if f.units}
        summary = (f"<p><b>Design ({_html.escape(str(self.kind))})</b>: {_html.escape('; '.join(facts))}.<br>"
                   f"Factors: {_html.escape('; '.join(ranges))}.</p>")
        return summary + html_table(self.table, units=units, caption="Runs in run order")
