"""Fold-over of a two-level design: the mirrored runs, as the next stage."""

from __future__ import annotations

import numpy as np

from .._errors import LevelwiseError, describe
from ._design import Design, _check_count, structure_of_runs


def fold_over(design: Design, factor=None, *, center_points=0, randomize=True, seed=None) -> Design:
    """The fold-over runs of a two-level design: every sign reversed, or only one factor's.

    Only the new runs are returned, as the next stage of the experiment: they form the next block(s), are
    randomised on their own, and their run ids and standard order continue after the original's. Combine them
    with ``design.combine(new)`` for the structure of all the runs together.

    Parameters
    ----------
    design : Design
        A two-level design; its corner runs (role ``"corner"``, every factor at -1/+1) are mirrored. Centre
        runs are not repeated.
    factor : str, optional
        Fold on this factor only (its column reversed); by default all signs are reversed.
    center_points : int, default 0
        Centre runs to add to the new runs (continuous factors only), spread over the new blocks; they
        show whether the response shifted between the stages.
    randomize : bool, default True
        Put the new runs in random order within their blocks. A split-plot design (hard-to-change factors and
        a ``whole_plot`` column) folds into whole plots: the mirror of each whole plot is a new whole plot, in
        the restricted random order (whole plots, then the runs within each).
    seed : int, optional
        Seed of that randomisation.

    Returns
    -------
    Design
        The new runs: as many as the original's corner runs (plus *center_points*). A design run in blocks
        1..b gives new blocks b+1..2b, the mirror of each. Its own structure is that of the mirrored fraction.

    Raises
    ------
    LevelwiseError
        Not a Design, no corner runs at -1/+1, an unknown *factor*, centre runs with a categorical factor.

    Examples
    --------
    >>> from levelwise import fractional_factorial
    >>> d = fractional_factorial(7, runs=8, randomize=False)
    >>> new = fold_over(d, randomize=False)
    >>> len(new), int(new.table.run.min()), set(new.table.block), d.resolution, d.combine(new).resolution
    (8, 9, {2}, 3, 4)
    """
    if not isinstance(design, Design):
        raise LevelwiseError(f"The 'design' parameter must be a Design. Got {describe(design)} instead.")
    center_points = _check_count(center_points, "center_points", 0)
    names = design.factor_names
    coded = design.coded.to_numpy(dtype=float)
    table = design.table
    corner = table["role"].to_numpy() == "corner"
    if not corner.any() or not np.all(np.isin(coded[corner], (-1.0, 1.0))):
        raise LevelwiseError("fold_over needs a two-level design with corner runs (every factor at -1 or +1). "
                             f"This {design.kind} design has none.")
    flip = np.full(len(names), -1.0)
    if factor is not None:
        if factor not in names:
            raise LevelwiseError(
                f"The 'factor' parameter must name a factor of the design {names}. Got {describe(factor)} instead."
            )
        flip = np.ones(len(names))
        flip[names.index(factor)] = -1.0
    if center_points and any(f.is_categorical for f in design.factors):
        raise LevelwiseError("The 'center_points' parameter must be 0 when a factor is categorical (a categorical "
                             f"factor has no centre). Got center_points={center_points}.")
    standard = table["standard_order"].to_numpy()
    order = np.flatnonzero(corner)[np.argsort(standard[corner], kind="stable")]  # corners in standard order
    folded = coded[order] * flip
    last_block = int(table["block"].max())
    block = table["block"].to_numpy()[order] + last_block
    new_blocks = np.unique(block)
    role = ["corner"] * len(folded)
    if center_points:
        folded = np.vstack([folded, np.zeros((center_points, len(names)))])
        block = np.concatenate([block, np.sort(np.resize(new_blocks, center_points))])
        role += ["centre"] * center_points
    standard_order = int(standard.max()) + np.arange(1, len(folded) + 1)
    what = "full fold-over" if factor is None else f"fold-over on {factor}"
    structure = structure_of_runs(folded, role, block, names)
    first_run = int(table["run"].max()) + 1
    split = "whole_plot" in table.columns and any(f.hard_to_change for f in design.factors)
    new = Design(design.factors, folded, role, block, randomize=randomize and not split, seed=seed,
                 standard_order=standard_order, first_run=first_run,
                 kind=f"{what} of {design.kind}", structure=structure,
                 metadata={"fold": what, "folded_runs": int(corner.sum())})
    if not split:
        return new
    # A split-plot design folds into whole plots too: the mirror of each whole plot is a whole plot (the
    # hard-to-change factors stay constant in it, flipped or not), the new centre runs of a block one more;
    # the randomisation is restricted as for the original (whole plots, then runs within each).
    from ._splitplot import split_plot_order

    plots = [f"wp {p}" for p in table["whole_plot"].to_numpy()[order]] + ["centre"] * center_points
    out = split_plot_order(new, randomize=randomize, seed=seed, plots=plots)
    out.table["run"] = np.arange(first_run, first_run + len(out))
    return out
